"""Chebyshev, elliptic and Bessel IF stages against the handbook formulas, computed here by another route.

Each stage is a low-pass prototype moved to a band-pass about the IF, so a real IF frequency f sees the
prototype at Ω = (f² − f0²)/(f·B), B the design bandwidth (the low-pass to band-pass substitution
s -> (s² + ω0²)/(s·B); scipy.signal.lp2bp documentation). The expected values below never call the
filter-design functions sdrx uses (scipy.signal.cheby1 / ellip / bessel): they come from (the first two in
tests/helpers_filters.py)
- Chebyshev: A(Ω) = 10·log10(1 + ε²·T_n(Ω)²), ε² = 10^(Ap/10) − 1, T_n(x) = cos(n·acos x) for |x| <= 1
  and cosh(n·acosh|x|)·sign(x)^n beyond (Williams & Taylor, Electronic Filter Design Handbook, 4th ed.
  (McGraw-Hill, 2006), ch. 2; T_n: Abramowitz & Stegun, Handbook of Mathematical Functions (1964), 22.3.15;
  from memory);
- elliptic: the degree equation n = K(k)·K'(k1) / (K'(k)·K(k1)), k = 1/Ωs the selectivity and
  k1 = sqrt((10^(Ap/10) − 1)/(10^(As/10) − 1)) the discrimination, K the complete elliptic integral
  (Daniels, Approximation Methods for Electronic Filter Design (McGraw-Hill, 1974), elliptic-function
  filters; from memory), solved here for Ωs with scipy.special.ellipk: from Ωs on the attenuation never
  falls below As and reaches it (the stopband floor);
- Bessel (Thomson): H(s) = θ_n(0)/θ_n(s) with the reverse Bessel polynomial
  θ_n(s) = Σ_k (2n − k)!/(2^(n−k)·k!·(n − k)!)·s^k, whose group delay Re{θ'(jω)/θ(jω)} is maximally flat
  about 1 s at DC (W. E. Thomson, "Delay networks having maximally flat frequency characteristics",
  Proc. IEE 96 part III, 1949, pp. 487-490; from memory); sdrx's stages put −3 dB at the band edge, so the
  polynomial is scaled by its own −3 dB frequency ω3, found here by root finding.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize

from sdrx.chain import design_chain

from helpers_filters import chebyshev_att_db, elliptic_stopband_edge, if_freq

IF_HZ = 455e3


def _one(stage):
    return design_chain({"preselector": {"kind": "none"}, "agc": {"enabled": False}, "if_stage": [stage]}).stages[0]


def _att_db(stage, f_hz):
    return -20 * np.log10(np.abs(stage.freq_response(f_hz)))


@pytest.mark.parametrize("order, ripple_db", [(3, 0.5), (4, 0.5), (5, 1.0)])
def test_chebyshev_stage_follows_the_chebyshev_attenuation(order, ripple_db):
    st = _one({"response": "chebyshev", "order": order, "bandwidth": "9k", "ripple_db": ripple_db})
    omega = np.linspace(-4.0, 4.0, 1601)
    # measured deviation from the formula: 1e-12 dB (float rounding); tolerance 1e-10 dB
    np.testing.assert_allclose(_att_db(st, if_freq(omega, 9e3, IF_HZ)), chebyshev_att_db(order, ripple_db, omega),
                               rtol=0, atol=1e-10)


@pytest.mark.parametrize("order", [3, 4, 5])
def test_chebyshev_ripple_band_edges_are_the_design_bandwidth(order):
    st = _one({"response": "chebyshev", "order": order, "bandwidth": "9k", "ripple_db": 0.5})
    f1, f2 = if_freq([-1.0, 1.0], 9e3, IF_HZ)
    # the ripple band's edges (Ω = ±1) are Ap down, 9 kHz apart, geometrically about the IF
    assert f2 - f1 == pytest.approx(9e3, rel=1e-12)
    assert math.sqrt(f1 * f2) == pytest.approx(IF_HZ, rel=1e-12)
    np.testing.assert_allclose(_att_db(st, [f1, f2]), 0.5, rtol=0, atol=1e-10)
    # equiripple: 0 dB at the n zeros of T_n, cos((2k − 1)π/2n), and Ap at its n + 1 extrema cos(kπ/n)
    zeros = np.cos((2 * np.arange(1, order + 1) - 1) * np.pi / (2 * order))
    extrema = np.cos(np.arange(order + 1) * np.pi / order)
    np.testing.assert_allclose(_att_db(st, if_freq(zeros, 9e3, IF_HZ)), 0.0, rtol=0, atol=1e-10)
    np.testing.assert_allclose(_att_db(st, if_freq(extrema, 9e3, IF_HZ)), 0.5, rtol=0, atol=1e-10)
    a = _att_db(st, if_freq(np.linspace(-1.0, 1.0, 2001), 9e3, IF_HZ))
    assert a.min() >= -1e-10 and a.max() <= 0.5 + 1e-10
    # just outside the ripple band the skirt falls below Ap
    assert float(_att_db(st, if_freq([1.001], 9e3, IF_HZ))[0]) > 0.5


def test_chebyshev_worked_values():
    # the formula at 0.5 dB ripple, Ω = 2: n = 3 19.22 dB, n = 5 42.04 dB
    assert float(chebyshev_att_db(3, 0.5, 2.0)) == pytest.approx(19.22, abs=0.005)
    assert float(chebyshev_att_db(5, 0.5, 2.0)) == pytest.approx(42.04, abs=0.005)
    for n, want in ((3, 19.22), (5, 42.04)):
        st = _one({"response": "chebyshev", "order": n, "bandwidth": "9k", "ripple_db": 0.5})
        assert float(_att_db(st, if_freq([2.0], 9e3, IF_HZ))[0]) == pytest.approx(want, abs=0.005)


@pytest.mark.parametrize("order, ripple_db, stop_db, bw_hz", [(4, 0.5, 60.0, 5e3), (3, 0.5, 40.0, 9e3),
                                                               (5, 1.0, 70.0, 6e3)])
def test_elliptic_stopband_floor_and_edge(order, ripple_db, stop_db, bw_hz):
    st = _one({"response": "elliptic", "order": order, "bandwidth": bw_hz, "ripple_db": ripple_db,
               "stopband_db": stop_db})
    ws = elliptic_stopband_edge(order, ripple_db, stop_db)
    beyond = np.concatenate([np.geomspace(ws, 60 * ws, 40001), -np.geomspace(ws, 60 * ws, 40001)])
    a = _att_db(st, if_freq(beyond, bw_hz, IF_HZ))
    # floor: nowhere beyond Ωs less than As, and As is reached (the equiripple stopband touches it);
    # measured deviation 6e-9 dB, tolerance 1e-7 dB
    assert a.min() == pytest.approx(stop_db, abs=1e-7)
    # edge: As exactly at ±Ωs; 0.1 % inside the edge the attenuation is already 0.08-0.25 dB less
    np.testing.assert_allclose(_att_db(st, if_freq([-ws, ws], bw_hz, IF_HZ)), stop_db, rtol=0, atol=1e-7)
    assert np.all(_att_db(st, if_freq([-0.999 * ws, 0.999 * ws], bw_hz, IF_HZ)) < stop_db - 0.05)
    # ripple band: between 0 and Ap, Ap at its edges Ω = ±1 (the design bandwidth)
    inside = _att_db(st, if_freq(np.linspace(-1.0, 1.0, 4001), bw_hz, IF_HZ))
    assert inside.min() >= -1e-7 and inside.max() <= ripple_db + 1e-7
    np.testing.assert_allclose(_att_db(st, if_freq([-1.0, 1.0], bw_hz, IF_HZ)), ripple_db, rtol=0, atol=1e-7)


def test_elliptic_narrow_preset_stopband_edge_worked_value():
    # order 4, 0.5 dB, 60 dB: Ωs = 2.6832 from the degree equation, so the 5 kHz ripple band reaches its
    # 60 dB floor 13.42 kHz wide (at the IF, geometric edges)
    ws = elliptic_stopband_edge(4, 0.5, 60.0)
    assert ws == pytest.approx(2.6832, abs=5e-5)
    f1, f2 = if_freq([-ws, ws], 5e3, IF_HZ)
    assert f2 - f1 == pytest.approx(ws * 5e3, rel=1e-12)


def _thomson(order):
    """Reverse Bessel polynomial θ_n (highest power first) and its derivative."""
    c = [math.factorial(2 * order - k) / (2 ** (order - k) * math.factorial(k) * math.factorial(order - k))
         for k in range(order + 1)]
    theta = np.array(c[::-1])
    return theta, np.polyder(theta)


def _thomson_w3(theta):
    h2 = lambda w: abs(theta[-1] / np.polyval(theta, 1j * w)) ** 2 - 0.5  # noqa: E731
    return optimize.brentq(h2, 0.1, 10.0, xtol=1e-14)


def _group_delay_s(stage, f_hz, step_hz=0.5):
    """-dφ/dω of the stage by a central difference of its phase (the test's own differentiation)."""
    f = np.asarray(f_hz, dtype=float)
    dphi = np.angle(stage.freq_response(f + step_hz / 2) / stage.freq_response(f - step_hz / 2))
    return -dphi / (2 * math.pi * step_hz)


def test_thomson_3db_frequencies_worked_values():
    # −3 dB frequency of the delay-normalised Bessel low-pass, n = 2..5: 1.3617, 1.7557, 2.1139, 2.4274 rad/s
    # (Williams & Taylor, ch. 2, Bessel; from memory), recomputed from the polynomials
    got = [_thomson_w3(_thomson(n)[0]) for n in (2, 3, 4, 5)]
    np.testing.assert_allclose(got, [1.3617, 1.7557, 2.1139, 2.4274], rtol=0, atol=5e-5)


@pytest.mark.parametrize("order", [2, 4, 6])
def test_bessel_stage_delay_is_thomsons_maximally_flat_delay(order):
    bw = 9e3
    st = _one({"response": "bessel", "order": order, "bandwidth": "9k"})
    theta, dtheta = _thomson(order)
    w3 = _thomson_w3(theta)
    f = np.linspace(IF_HZ - 6e3, IF_HZ + 6e3, 241)
    w, w0, b = 2 * math.pi * f, 2 * math.pi * IF_HZ, 2 * math.pi * bw
    omega = (w * w - w0 * w0) / (w * b)
    # band-pass delay = low-pass delay at Ω times dΩ/dω = (ω² + ω0²)/(ω²·B); low-pass scaled by ω3
    tau_lp = w3 * np.real(np.polyval(dtheta, 1j * w3 * omega) / np.polyval(theta, 1j * w3 * omega))
    expected = tau_lp * (w * w + w0 * w0) / (w * w * b)
    # measured deviation 5e-10 (relative); tolerance 5e-9
    np.testing.assert_allclose(_group_delay_s(st, f), expected, rtol=5e-9)
    # and the magnitude is the same polynomial's: |θ(0)/θ(jω3·Ω)|
    mag = np.abs(theta[-1] / np.polyval(theta, 1j * w3 * omega))
    np.testing.assert_allclose(np.abs(st.freq_response(f)), mag, rtol=0, atol=1e-12)


def test_bessel_delay_is_flatter_than_butterworth_across_the_band():
    # Thomson's polynomial of order 4: the low-pass delay at the band edge (Ω = 1) is 98.2 % of its DC
    # delay. At the IF the band-pass adds its own slight tilt, dΩ/dω = (ω² + ω0²)/(ω²·B), ±1 % over
    # the band: the Bessel stage's delay varies by 3.4 % across the −3 dB band, a Butterworth
    # stage of the same order and width by 51 % (its delay peaks near the edges)
    theta, dtheta = _thomson(4)
    w3 = _thomson_w3(theta)
    ratio = np.real(np.polyval(dtheta, 1j * w3) / np.polyval(theta, 1j * w3)) / (dtheta[-1] / theta[-1])
    assert ratio == pytest.approx(0.98192, abs=5e-5)
    f = if_freq(np.linspace(-1.0, 1.0, 201), 9e3, IF_HZ)
    spread = {}
    for kind in ("bessel", "butterworth"):
        tau = _group_delay_s(_one({"response": kind, "order": 4, "bandwidth": "9k"}), f)
        spread[kind] = tau.max() / tau.min() - 1
    assert spread["bessel"] < 0.04 and spread["butterworth"] > 0.4, spread
