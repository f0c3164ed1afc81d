"""Measured audio figures of the comparison (sdrx.compare.figures) and the truth-sidecar lookup."""

import json

import numpy as np
import pytest
from scipy import signal

from sdrx.compare.figures import audio_bandwidth_hz, designed_figures, sinad_db
from sdrx.compare.truth import single_tone_hz

FS = 48000.0


@pytest.fixture
def rng():
    return np.random.default_rng(31337)


@pytest.mark.parametrize("snr_db", [20.0, 40.0])
def test_sinad_of_tone_plus_noise(rng, snr_db):
    n = int(3 * FS)
    t = np.arange(n) / FS
    tone = np.sqrt(2) * np.cos(2 * np.pi * 1000 * t + 0.3)  # power 1
    noise = rng.standard_normal(n) * 10 ** (-snr_db / 20)  # power 10^(-snr/10)
    got = sinad_db(tone + noise, FS, 1000.0)
    # source: SINAD = (S + N + D) / (N + D), IEEE Std 1241-2010 (from memory)
    expect = 10 * np.log10((1 + 10 ** (-snr_db / 10)) / 10 ** (-snr_db / 10))
    assert got == pytest.approx(expect, abs=0.1)


def test_sinad_counts_distortion(rng):
    n = int(2 * FS)
    t = np.arange(n) / FS
    x = np.cos(2 * np.pi * 1000 * t) + 0.01 * np.cos(2 * np.pi * 3000 * t)  # 1 % third harmonic
    # the same definition with distortion alone: SINAD = 10 log10((1 + d^2) / d^2), d the harmonic ratio
    assert sinad_db(x, FS, 1000.0) == pytest.approx(10 * np.log10((1 + 1e-4) / 1e-4), abs=0.05)


@pytest.mark.parametrize("order,fc", [(8, 3000.0), (6, 2000.0)])
def test_audio_bandwidth_of_butterworth_noise(rng, order, fc):
    x = signal.sosfilt(signal.butter(order, fc, fs=FS, output="sos"), rng.standard_normal(int(8 * FS)))
    # source: Butterworth attenuation 10 log10(1 + (f/fc)^(2n)) (Williams & Taylor, Electronic Filter Design
    # Handbook, 4th ed. (2006), ch. 2 (from memory)): 20 dB at fc * 99^(1/(2n))
    expect = fc * 99 ** (1 / (2 * order))
    assert audio_bandwidth_hz(x, FS) == pytest.approx(expect, rel=0.03)


def test_audio_bandwidth_none_when_never_down(rng):
    assert audio_bandwidth_hz(rng.standard_normal(int(2 * FS)), FS) is None


def test_designed_figures_agree_with_rf_response():
    from sdrx.chain import design_chain

    d = design_chain("medium")
    f = designed_figures(d, 1e6, 9e3)
    h = d.rf_response(np.array([1e6, 1e6 + 9e3, 1e6 - 9e3, d.image_hz(1e6)]), 1e6)
    # the definition (Federal Standard 1037C): rejection = response at tune / response elsewhere, dB
    np.testing.assert_allclose(f["adjacent_rejection_db"]["upper"], 20 * np.log10(abs(h[0] / h[1])), atol=1e-9)
    np.testing.assert_allclose(f["adjacent_rejection_db"]["lower"], 20 * np.log10(abs(h[0] / h[2])), atol=1e-9)
    np.testing.assert_allclose(f["image_rejection_db"], 20 * np.log10(abs(h[0] / h[3])), atol=1e-9)
    edge = d.rf_response(np.array([1e6, 1e6 + f["bandwidth_6db_hz"] / 2]), 1e6)
    # medium is nearly symmetric: half the -6 dB width is close to the -6 dB point
    assert 20 * np.log10(abs(edge[1] / edge[0])) == pytest.approx(-6.0, abs=0.3)


def test_single_tone_from_truth(tmp_path):
    cap = tmp_path / "c.sigmf-meta"
    cap.write_text("{}")
    (tmp_path / "c.truth.json").write_text(json.dumps({"stations": [
        {"carrier_hz": 1000004.0, "program": {"kind": "tone", "frequency": 400.0}},
        {"carrier_hz": 1010000.0, "program": {"kind": "tones", "frequencies": [1000.0]}},
        {"carrier_hz": 1020000.0, "program": {"kind": "tones", "frequencies": [400.0, 1000.0]}},
        {"carrier_hz": 1030000.0, "program": {"kind": "speech"}},
    ]}))
    assert single_tone_hz(cap, 1e6) == 400.0
    assert single_tone_hz(cap, 1.01e6) == 1000.0
    assert single_tone_hz(cap, 1.02e6) is None
    assert single_tone_hz(cap, 1.03e6) is None
    assert single_tone_hz(cap, 1.05e6) is None  # no station there
    assert single_tone_hz(tmp_path / "other.wav", 1e6) is None  # no sidecar
