"""Tests of sdrx.analysis.selectivity: designed figures against outside formulas and scipy."""

import math

import numpy as np
import pytest
from scipy import signal

from sdrx.analysis import selectivity as sel
from sdrx.chain import design_chain
from sdrx.errors import ParameterError

from helpers_filters import preset_response_db, single_tuned_power

TUNE = 1000e3
IF = 455e3


def _formula_edges(preset, level_db):
    """Offsets where the preset's formula response (tests/helpers_filters.py) is level_db down, by brentq."""
    from scipy import optimize

    g = lambda off: preset_response_db(preset, TUNE, TUNE + off) + level_db  # noqa: E731
    grid = np.arange(0.0, 200e3, 50.0)
    out = []
    for sign in (-1.0, 1.0):
        i = int(np.argmax(g(sign * grid) <= 0))
        out.append(optimize.brentq(g, *sorted((sign * grid[i - 1], sign * grid[i])), xtol=1e-7, rtol=1e-14))
    return tuple(out)


@pytest.mark.parametrize("preset", ["wide", "medium"])
def test_designed_figures_against_the_handbook_formulas(preset):
    # the presets' response from the universal resonance curve, the critically coupled pair and the
    # Butterworth attenuation (sources in tests/helpers_filters.py), never from the design objects;
    # measured deviation 1.8e-7 Hz in the widths (the design root finder stops at 1e-6 Hz) and 1.2e-13 dB in the
    # rejections; tolerances 2e-6 Hz and 1e-11 dB
    d = design_chain(preset)
    fig = sel.designed_figures(d, TUNE, 10e3)
    for k, w in fig.bandwidth_hz.items():
        lo, hi = _formula_edges(preset, float(k))
        assert w == pytest.approx(hi - lo, abs=2e-6), k
        assert fig.edges_hz[k] == pytest.approx((lo, hi), abs=2e-6), k
    assert fig.shape_factor == pytest.approx(fig.bandwidth_hz["60"] / fig.bandwidth_hz["6"], rel=1e-12)
    for key, rej in fig.adjacent_rejection_db.items():
        assert rej == pytest.approx(-float(preset_response_db(preset, TUNE, TUNE + float(key))), abs=1e-11), key
    assert fig.image_rejection_db == pytest.approx(-float(preset_response_db(preset, TUNE, d.image_hz(TUNE))),
                                                   abs=1e-11)


def test_narrow_preset_bandwidths_are_consistent_with_scipy_freqs():
    # consistency check (the elliptic stage has no closed-form magnitude here; its formulas are checked in
    # test_chain_prototypes.py): each stage's (z, p, k) evaluated by scipy.signal.freqs, crossings on a 2 Hz grid
    d = design_chain("narrow")
    fig = sel.designed_figures(d, TUNE, 10e3)
    off = np.arange(-200e3, 200e3, 2.0)
    lo = TUNE + d.if_hz
    f = TUNE + off
    h = np.ones(f.shape, complex)
    for st in d.stages:
        b, a = signal.zpk2tf(*st.zpk)
        h *= signal.freqs(b, a, worN=2 * np.pi * np.abs(f - lo))[1] / signal.freqs(b, a, worN=[2 * np.pi * IF])[1]
    y = 20 * np.log10(np.abs(h)) + 10 * np.log10(single_tuned_power(f, TUNE, d.preselector.q))
    i0 = np.searchsorted(off, 0)
    for k, w in fig.bandwidth_hz.items():
        up = i0 + np.argmax(y[i0:] <= -float(k))
        dn = i0 - np.argmax(y[i0::-1] <= -float(k))
        assert w == pytest.approx(off[up] - off[dn], abs=4.0), k   # the 2 Hz grid, both edges


@pytest.mark.parametrize("n", [3, 5])
def test_butterworth_attenuation(n):
    d = design_chain({"preselector": {"kind": "none"},
                      "if_stage": [{"response": "butterworth", "order": n, "bandwidth": "9k"}]})
    fig = sel.designed_figures(d, TUNE, 9e3)
    for key, rej in fig.adjacent_rejection_db.items():
        f_if = IF - float(key)  # high-side LO: RF offset +d lands at IF - d
        omega = abs(f_if**2 - IF**2) / (f_if * 9e3)
        # low-pass to band-pass variable, geometric symmetry (scipy.signal.lp2bp documentation)
        # source: Butterworth A = 10 log10(1 + Omega^(2n)), Williams & Taylor, Electronic Filter Design
        # Handbook, 4th ed. (2006), ch. 2 (from memory)
        assert rej == pytest.approx(10 * math.log10(1 + omega ** (2 * n)), abs=1e-11)   # measured 4e-13 dB
    # the design bandwidth is the half-power (3.0103 dB) width; the reported 3.000 dB width is where
    # Omega^(2n) = 10^0.3 - 1, and the geometric edges are Omega·B apart (measured deviation 1e-12 relative)
    assert fig.bandwidth_hz["3"] == pytest.approx(9e3 * (10 ** 0.3 - 1) ** (1 / (2 * n)), rel=1e-10)


def test_butterworth_group_delay():
    d = design_chain({"preselector": {"kind": "none"},
                      "if_stage": [{"response": "butterworth", "order": 5, "bandwidth": "9k"}]})
    tau = sel.group_delay_s(d, TUNE, [0.0])[0]
    wc = 2 * math.pi * 4.5e3  # band-pass 9 kHz wide = low-pass equivalent with 4.5 kHz cut-off
    # source: Butterworth group delay at DC, tau(0) = sum_k -Re(p_k)/|p_k|^2 over the poles e^{j(pi/2 + (2k-1)pi/2n)}
    # = 1/sin(pi/2n)/wc (derived from the pole positions, Williams & Taylor, Electronic Filter Design Handbook,
    # 4th ed. (2006), ch. 2 (from memory)); n 5, fc 4.5 kHz: 114.5 us
    assert tau == pytest.approx(1 / math.sin(math.pi / 10) / wc, rel=2e-8)   # measured deviation 1.6e-9
    assert tau * 1e6 == pytest.approx(114.5, abs=0.3)


def test_group_delay_of_single_tuned_preselector():
    d = design_chain({"preselector": {"kind": "tracking", "q": 50},
                      "if_stage": [{"response": "single_tuned", "q": 40}]})
    tau = sel.group_delay_s(d, TUNE, [0.0])[0]
    # source: single-tuned circuit, tau(f0) = 2Q/w0: d/dw of the phase atan(Q(w/w0 - w0/w)) at w0 (derived from
    # the universal resonance curve (Terman, Radio Engineers' Handbook, 1943, sec. 3; from memory))
    # measured deviation 1.9e-9 (relative; the 1 Hz central difference); tolerance 2e-8
    assert tau == pytest.approx(2 * 50 / (2 * math.pi * TUNE) + 2 * 40 / (2 * math.pi * IF), rel=2e-8)


def test_preselector_image_rejection_worked_example():
    d = design_chain({"preselector": {"kind": "tracking", "q": 100}, "mixer": {"kind": "real"},
                      "if_stage": [{"response": "butterworth", "order": 2, "bandwidth": "9k"}]})
    fig = sel.designed_figures(d, TUNE, 10e3)
    fim = TUNE + 2 * IF  # common practice: image = f + 2 IF for high-side LO
    rho = fim / TUNE - TUNE / fim
    # source: alpha = sqrt(1 + Q^2 rho^2), Kennedy & Davis, Electronic Communication Systems, 4th ed. (1999),
    # receivers chapter (from memory): 42.8 dB
    assert fig.image_rejection_db == pytest.approx(20 * math.log10(math.sqrt(1 + 100**2 * rho**2)), abs=1e-9)
    assert fig.image_rejection_db == pytest.approx(42.8, abs=0.05)


def test_real_mixer_without_preselector_has_no_image_rejection():
    d = design_chain({"preselector": {"kind": "none"}, "mixer": {"kind": "real"}})
    # physical identity: a real mixer's image response equals its wanted response
    assert sel.designed_figures(d, TUNE, 10e3).image_rejection_db == pytest.approx(0.0, abs=1e-9)


def test_equivalent_q_of_one_single_tuned_stage_is_its_q():
    d = design_chain({"preselector": {"kind": "none"}, "if_stage": [{"response": "single_tuned", "q": 40}]})
    fig = sel.designed_figures(d, TUNE, 10e3)
    q = sel.q_summary(d, TUNE, 10e3, fig)
    # identity: the chain IS one single-tuned circuit at the IF (universal resonance curve, exact form)
    assert q["equivalent_if"] == pytest.approx(40.0, rel=1e-9)
    assert q["stages"][0]["loaded_q"] == 40.0
    x = q["rejection_db"]
    assert q["shortcut_if"] == pytest.approx(10 ** (x / 20) * IF / 20e3, rel=1e-12)
    assert q["shortcut_if_error_pct"] == pytest.approx(100 * (q["shortcut_if"] / 40 - 1), rel=1e-9)
    # the same rejection at RF needs Q scaled by about f_RF/f_IF: the reason for the superheterodyne (the
    # scaling is exact only for small offsets; at ±10 kHz it is 0.58 % off)
    assert q["equivalent_rf"] / q["equivalent_if"] == pytest.approx(TUNE / IF, rel=0.01)


def test_band_edges_refined():
    lo, hi = sel.band_edges(lambda x: -10 * np.log10(1 + (x / 1e3) ** 2), 3.0, 20e3, 50.0)
    assert hi == pytest.approx(1e3 * math.sqrt(10**0.3 - 1), abs=1e-5)
    assert lo == pytest.approx(-hi, abs=1e-5)
    assert sel.band_edges(lambda x: -np.abs(x) * 0, 3.0, 1e3, 10.0) == (None, None)


@pytest.mark.parametrize("tune, spacing, match", [
    (-1e3, 10e3, "above 0"),
    (20e3, 10e3, "would reach 0 Hz"),
    (1e6, 200e3, "--spacing"),
])
def test_bad_tuning(tune, spacing, match):
    with pytest.raises(ParameterError, match=match):
        sel.designed_figures(design_chain("medium"), tune, spacing)
