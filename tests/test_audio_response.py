"""The chain's overall audio response and audio bandwidth (sdrx.analysis.audio_response) against the formulas.

The expected response is computed here, never from sdrx's design objects or filters:
- the IF/RF part from the presets' complex responses (tests/helpers_filters.py: Butterworth poles, tuned
  circuits, universal resonance curve). With the carrier on tune, the envelope's part that is linear in a
  small modulation is the upright sideband pair, so a tone at fm comes through with
  G_d(fm) = (G(fm) + conj(G(−fm)))/2, G the envelope response normalised at the carrier (derived from
  |A + a·e^{jωt}·G(f) + a·e^{−jωt}·G(−f)| to first order in a; the complex-envelope analysis of Haykin,
  Communication Systems, 4th ed. (Wiley, 2001), ch. 2; from memory);
- the audio filters: Butterworth high- and low-pass at the channel rate fs_ch = 96 kHz (the smallest
  multiple of the 48 kHz audio rate at or above 88 kHz, DEVELOPERS.md), bilinear transform with the band
  edge prewarped, |H|² = 1/(1 + (tan(πf/fs)/tan(πfc/fs))^(2n)) (Oppenheim & Schafer, Discrete-Time Signal
  Processing, 3rd ed. (Pearson, 2010), sec. 7.2, bilinear transformation; from memory), and the high-pass
  the same with the ratio inverted.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from scipy import optimize

from sdrx.analysis.audio_response import AUDIO_BANDWIDTH_DB, REFERENCE_HZ, audio_bandwidth_hz, measure_audio_response
from sdrx.chain import design_chain

from helpers_filters import preset_envelope_response
from helpers_rx import sine_fit

TUNE = 1.0e6
FS_CH = 96e3
#: (high-pass Hz, order, low-pass Hz, order) of the presets' audio filters (README: presets, chain specs)
AUDIO = {"medium": (80.0, 2, 4500.0, 4), "wide": (50.0, 2, 7500.0, 4)}


def _formula_db(preset, fm):
    hp, n_hp, lp, n_lp = AUDIO[preset]
    w = lambda f: math.tan(math.pi * f / FS_CH)  # noqa: E731
    r_hp, r_lp = (w(fm) / w(hp)) ** (2 * n_hp), (w(fm) / w(lp)) ** (2 * n_lp)
    audio2 = r_hp / (1 + r_hp) / (1 + r_lp)
    g0 = preset_envelope_response(preset, TUNE, TUNE)
    g = lambda d: preset_envelope_response(preset, TUNE, TUNE + d) / g0  # noqa: E731
    gd = (g(fm) + np.conj(g(-fm))) / 2
    return 10 * math.log10(audio2) + 20 * math.log10(abs(gd))


def _formula_relative_db(preset, fm):
    return _formula_db(preset, fm) - _formula_db(preset, REFERENCE_HZ)


@functools.lru_cache(maxsize=None)
def _measured(preset, path):
    return measure_audio_response(design_chain(preset), TUNE, path=path)


# measured deviation from the formulas, above −60 dB: 0.001 dB; the bandwidth 2.3e-5 and the low edge 4e-7
# (relative). Tolerances about ten times that.
@pytest.mark.parametrize("preset, path, tol_db", [("medium", "fast", 0.008), ("wide", "fast", 0.008),
                                                  ("medium", "exact", 0.008)])
def test_audio_response_and_bandwidth_against_the_formulas(preset, path, tol_db):
    r = _measured(preset, path)
    f = np.array(r.freqs_hz)
    want = np.array([_formula_relative_db(preset, x) for x in f])
    keep = want > -60.0
    assert keep.sum() > 150
    np.testing.assert_allclose(np.array(r.response_db)[keep], want[keep], rtol=0, atol=tol_db)
    edge = optimize.brentq(lambda x: _formula_relative_db(preset, x) + AUDIO_BANDWIDTH_DB, 1500.0, 15000.0)
    assert r.bandwidth_hz == pytest.approx(edge, rel=1.5e-4)
    if _formula_relative_db(preset, 50.0) < -AUDIO_BANDWIDTH_DB:
        low = optimize.brentq(lambda x: _formula_relative_db(preset, x) + AUDIO_BANDWIDTH_DB, 20.0, 1000.0)
        assert r.low_edge_hz == pytest.approx(low, rel=5e-6)
    else:
        assert r.low_edge_hz is None   # wide: 3 dB down only below the lowest test tone


def test_worked_audio_bandwidths_follow_the_chain():
    # the formulas above: medium 3012 Hz (its 4.5 kHz audio low-pass meets the IF's skirts: 9 kHz Butterworth
    # and single-tuned Q 60 take 8.7 dB off at 4.5 kHz), wide 6278 Hz; narrow (elliptic 5 kHz IF, 2.5 kHz
    # audio) below both
    assert optimize.brentq(lambda x: _formula_relative_db("medium", x) + 3.0, 1500.0, 15000.0) == pytest.approx(
        3012.0, abs=0.05)
    assert optimize.brentq(lambda x: _formula_relative_db("wide", x) + 3.0, 1500.0, 15000.0) == pytest.approx(
        6278.4, abs=0.05)
    narrow = audio_bandwidth_hz(design_chain("narrow"), TUNE)
    assert narrow < 2500.0 < _measured("medium", "fast").bandwidth_hz < 4500.0 < _measured("wide", "fast").bandwidth_hz


@pytest.mark.parametrize("fm", [300.0, 2020.0, 3020.0])   # tones of the comb
def test_the_comb_reads_what_single_tones_read(fm):
    # consistency check of the method: one AM tone at a time (30 %, the bench test signal, common practice)
    # through the same chain, its amplitude by a sine fit (IEEE Std 1241), relative to a 1 kHz tone; the comb
    # must not intermodulate (measured agreement 1.2e-5 dB; tolerance 2e-4 dB)
    from sdrx.analysis.selectivity import tone_capture
    from sdrx.run import Receiver

    d = design_chain("narrow")
    info = tone_capture(d, TUNE, 10e3)
    n = int(0.3 * info.fs)
    t = np.arange(n) / info.fs
    amps = []
    for f in (REFERENCE_HZ, fm):
        x = 0.1 * (1 + 0.3 * np.cos(2 * np.pi * f * t)) * np.exp(2j * np.pi * (TUNE - info.center_hz) * t)
        rx = Receiver(d, info, TUNE, agc_hold_gain_db=0.0)
        audio = np.concatenate([rx.process(x.astype(np.complex64)), rx.flush()])
        rx.close()
        amps.append(sine_fit(audio[int(0.15 * 48000):], 48000.0, f)[0])
    single_db = 20 * math.log10(amps[1] / amps[0])
    r = _measured_narrow()
    i = r.freqs_hz.index(fm)
    comb_db = r.response_db[i]
    assert comb_db == pytest.approx(single_db, abs=2e-4)


@functools.lru_cache(maxsize=None)
def _measured_narrow():
    return measure_audio_response(design_chain("narrow"), TUNE)
