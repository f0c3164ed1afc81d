"""Measured audio figures of the comparison (sdrx.compare.figures) and the truth-sidecar lookup."""

import json

import numpy as np
import pytest

from sdrx.compare.figures import designed_figures, sinad_db
from sdrx.compare.truth import single_tone_hz

from helpers_filters import preset_response_db

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
    # the noise power read over 2.75 s of white noise scatters by sqrt(2/N) = 0.39 % (1σ, 0.017 dB); measured
    # deviation 0.023 dB; tolerance 0.1 dB (6σ)
    assert got == pytest.approx(expect, abs=0.1)


def test_sinad_counts_distortion(rng):
    n = int(2 * FS)
    t = np.arange(n) / FS
    x = np.cos(2 * np.pi * 1000 * t) + 0.01 * np.cos(2 * np.pi * 3000 * t)  # 1 % third harmonic
    # the same definition with distortion alone: SINAD = 10 log10((1 + d^2) / d^2), d the harmonic ratio
    # measured deviation 1.5e-12 dB; tolerance 1e-9 dB
    assert sinad_db(x, FS, 1000.0) == pytest.approx(10 * np.log10((1 + 1e-4) / 1e-4), abs=1e-9)


def test_designed_figures_against_the_handbook_formulas():
    from scipy import optimize

    from sdrx.chain import design_chain

    d = design_chain("medium")
    f = designed_figures(d, 1e6, 9e3)
    # the medium preset's response from the universal resonance curve and the Butterworth attenuation
    # (tests/helpers_filters.py), not from the design; rejection = response at the tune over the response
    # elsewhere, equal inputs (Federal Standard 1037C). Measured deviation 1e-13 dB; tolerance 1e-11 dB
    resp = lambda rf: float(preset_response_db("medium", 1e6, rf))  # noqa: E731
    assert f["adjacent_rejection_db"]["upper"] == pytest.approx(-resp(1e6 + 9e3), abs=1e-11)
    assert f["adjacent_rejection_db"]["lower"] == pytest.approx(-resp(1e6 - 9e3), abs=1e-11)
    assert f["adjacent_rejection_db"]["worst"] == min(f["adjacent_rejection_db"].values())
    assert f["image_hz"] == 1.91e6   # common practice: high-side LO, image f + 2·IF
    assert f["image_rejection_db"] == pytest.approx(-resp(1.91e6), abs=1e-11)
    widths = {}
    for level in (6.0, 60.0):
        g = lambda off: resp(1e6 + off) + level  # noqa: E731
        hi = optimize.brentq(g, 0.0, 100e3, xtol=1e-7)
        lo = optimize.brentq(g, -100e3, 0.0, xtol=1e-7)
        widths[level] = hi - lo
    # measured deviation 1.8e-7 Hz (the design's root finder stops at 1e-6 Hz); tolerance 2e-6 Hz
    assert f["bandwidth_6db_hz"] == pytest.approx(widths[6.0], abs=2e-6)
    assert f["bandwidth_60db_hz"] == pytest.approx(widths[60.0], abs=2e-6)
    assert f["shape_factor"] == pytest.approx(widths[60.0] / widths[6.0], rel=1e-9)


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


def test_selectivity_plot_names_its_grey_lines_in_words():
    from matplotlib.figure import Figure

    from sdrx.compare.plot import _reference_lines

    def labels(spacing_hz):
        ax = Figure().add_subplot(1, 1, 1)
        _reference_lines(ax, spacing_hz, 30e3)
        y = [t.get_text() for a in ax.child_axes for t in a.get_yticklabels()]
        x = [t.get_text() for a in ax.child_axes for t in a.get_xticklabels()]
        levels = sorted(ln.get_ydata()[0] for ln in ax.get_lines() if ln.get_ydata()[0] == ln.get_ydata()[1])
        channels = sorted(ln.get_xdata()[0] for ln in ax.get_lines() if ln.get_xdata()[0] == ln.get_xdata()[1])
        return y, x, (levels, channels)

    y, x, grey = labels(9e3)
    assert y == ["−6 dB\nbandwidth", "−60 dB\nbandwidth"]
    assert x == ["adjacent channel\n−9 kHz", "adjacent channel\n+9 kHz"]
    assert grey == ([-60.0, -6.0], [-9.0, 9.0])      # the lines those labels name
    y, x, grey = labels(None)
    assert len(y) == 2 and x == [] and grey == ([-60.0, -6.0], [])
