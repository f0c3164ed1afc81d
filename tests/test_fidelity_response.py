"""Audio fidelity (antenna to audio, AGC held) against the sideband attenuation of the IF and the audio filters.

The expected values are computed here from the circuit formulas, not from the design code:
- single-tuned circuit: H = 1/(1 + jQ(f/f0 − f0/f)), the universal resonance curve (Terman, Radio Engineers'
  Handbook, resonant circuits);
- Butterworth band-pass of order n and bandwidth B: |H| = 1/sqrt(1 + Ω^(2n)), Ω = (f/f0 − f0/f)·f0/B (the
  Butterworth attenuation 10·log10(1 + Ω^(2n)) with the low-pass to band-pass transformation; Zverev,
  Handbook of Filter Synthesis);
- Butterworth audio filters: |H| = 1/sqrt(1 + (f/fc)^(2n)) (low-pass), 1/sqrt(1 + (fc/f)^(2n)) (high-pass).
An envelope detector at small depth passes the in-phase sideband sum (H(f0 + fm) + conj H(f0 − fm))/2.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

from sdrx.analysis import fidelity as fid
from sdrx.chain import design_chain

TUNE = 1000e3
IF = 455e3
FREQS = (100.0, 400.0, 1000.0, 2000.0, 3150.0, 5000.0, 8000.0)
WIDE_AUDIO = {"highpass": "20", "highpass_order": 1, "lowpass": "20k", "lowpass_order": 4}


def _audio_db(f, hp=20.0, hp_n=1, lp=20e3, lp_n=4):
    return -10 * np.log10(1 + (hp / f) ** (2 * hp_n)) - 10 * np.log10(1 + (f / lp) ** (2 * lp_n))


def _single_tuned(f, q):
    return 1.0 / (1 + 1j * q * (f / IF - IF / f))


def _sideband_db(h_fn, fm):
    # high-side injection inverts the channel: RF tune + fm lands at IF − fm; |G| does not depend on it
    g = 0.5 * (h_fn(IF + fm) + np.conj(h_fn(IF - fm)))
    return 20 * np.log10(np.abs(g))


def _relative(db_of, freqs):
    v = np.array([db_of(f) for f in freqs])
    return v - db_of(1000.0)


def _measured(spec, path="fast", freqs=FREQS):
    r = fid.measure_fidelity(design_chain(spec), TUNE, path=path, freqs_hz=freqs)
    got = {f: v for f, v in r.response}
    return r, np.array([got[f] for f in freqs])


def test_single_tuned_if_sideband_attenuation():
    q = 40.0
    spec = {"preselector": {"kind": "none"}, "if_stage": [{"response": "single_tuned", "q": q}], "audio": WIDE_AUDIO}
    _, got = _measured(spec)
    want = _relative(lambda f: _sideband_db(lambda x: _single_tuned(x, q), f) + _audio_db(f), FREQS)
    np.testing.assert_allclose(got, want, atol=0.02)   # agrees to about 0.002 dB
    # the -3 dB point of one tuned circuit: Q·2fm/f0 ≈ 1, fm ≈ f0/(2Q) = 5.69 kHz
    assert -3.2 < float(got[FREQS.index(5000.0)]) < -2.0


def test_butterworth_if_sideband_attenuation_and_its_3db_point():
    n, b = 3, 8e3
    spec = {"preselector": {"kind": "none"}, "if_stage": [{"response": "butterworth", "order": n, "bandwidth": b}],
            "audio": WIDE_AUDIO}
    r, got = _measured(spec)

    def h(f):   # magnitude with the Butterworth band-pass's phase symmetry (odd about f0): G = |H| averaged
        om = (f / IF - IF / f) * IF / b
        return 1.0 / np.sqrt(1 + om ** (2 * n))

    sb = lambda fm: 20 * np.log10(0.5 * (h(IF + fm) + h(IF - fm)))  # noqa: E731
    want = _relative(lambda f: sb(f) + _audio_db(f), FREQS)
    np.testing.assert_allclose(got, want, atol=0.02)   # agrees to about 0.003 dB
    f3 = optimize.brentq(lambda f: sb(f) + _audio_db(f) - (sb(1000.0) + _audio_db(1000.0)) + 3.0, 2e3, 6e3)
    assert f3 == pytest.approx(b / 2, rel=0.02)                   # the band-pass's half width
    assert r.high_3db_hz == pytest.approx(f3, rel=0.002)


def test_audio_filter_edges_are_the_butterworth_cutoffs():
    # behind a wide IF, the -3 dB points are the audio filters' cut-offs (Butterworth: -3.01 dB at fc)
    spec = {"preselector": {"kind": "none"}, "if_stage": [{"response": "butterworth", "order": 2, "bandwidth": "60k"}],
            "audio": {"highpass": "80", "highpass_order": 2, "lowpass": "3k", "lowpass_order": 4}}
    r, got = _measured(spec, freqs=(100.0, 400.0, 2000.0, 2500.0))
    want = _relative(lambda f: _audio_db(f, 80.0, 2, 3e3, 4), (100.0, 400.0, 2000.0, 2500.0))
    np.testing.assert_allclose(got, want, atol=0.05)
    # relative to 1 kHz the edges sit a hair beyond the cut-offs (the filters' loss at 1 kHz)
    assert r.low_3db_hz == pytest.approx(80.0, rel=0.01)
    assert r.high_3db_hz == pytest.approx(3000.0, rel=0.01)


@pytest.mark.parametrize("preset", ["wide", "medium", "narrow"])
def test_presets_measure_as_predicted(preset):
    r = fid.measure_fidelity(design_chain(preset), TUNE, freqs_hz=(50.0, 200.0, 1000.0, 2000.0, 4000.0))
    for (f, m), (_, p) in zip(r.response, r.predicted):
        if p >= -20.0:
            # down to -20 dB the audio filters' bilinear realisation stays within 0.1 dB of the prototypes
            assert m == pytest.approx(p, abs=0.1), f
    assert r.low_3db_hz == pytest.approx(r.predicted_low_3db_hz, rel=0.005)
    assert r.high_3db_hz == pytest.approx(r.predicted_high_3db_hz, rel=0.005)


def test_exact_path_fidelity():
    r = fid.measure_fidelity(design_chain("medium"), TUNE, path="exact", freqs_hz=(200.0, 1000.0, 2000.0))
    for (f, m), (_, p) in zip(r.response, r.predicted):
        assert m == pytest.approx(p, abs=0.1), f
    assert r.high_3db_hz == pytest.approx(r.predicted_high_3db_hz, rel=0.005)
