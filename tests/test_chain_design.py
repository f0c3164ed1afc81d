"""Chain designs: analog prototypes against textbook formulas and scipy, LO plan, mixer factors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from sdrx.chain import design_chain
from sdrx.errors import ParameterError

IF_HZ = 455e3


def _one(stage):
    return design_chain({"preselector": {"kind": "none"}, "agc": {"enabled": False}, "if_stage": [stage]}).stages[0]


def test_single_tuned_prototype_is_the_universal_resonance_curve():
    st = _one({"response": "single_tuned", "q": 50})
    f = np.linspace(400e3, 520e3, 121)
    q = 50.0
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory)
    expected = 1 / np.sqrt(1 + (q * (f / IF_HZ - IF_HZ / f)) ** 2)
    np.testing.assert_allclose(np.abs(st.freq_response(f)), expected, rtol=1e-13)   # measured 9e-15
    _, h = signal.freqs_zpk(*st.zpk, worN=2 * np.pi * f)    # consistency: scipy.signal.freqs_zpk on the same zpk
    np.testing.assert_allclose(st.freq_response(f), h, rtol=1e-14)   # measured 1.2e-16


def test_q_for_20_db_at_9_khz_worked_value():
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory):
    # x-dB width = (f0/Q)·sqrt(10^(x/10) − 1), so 20 dB at ±9 kHz needs Q = 455·sqrt(99)/18 = 251.5
    q = IF_HZ * math.sqrt(10 ** (20 / 10) - 1) / 18e3
    assert q == pytest.approx(251.5, abs=0.05)
    st = _one({"response": "single_tuned", "q": q})
    # 20 dB down at f where Q(f/f0 − f0/f) = ±sqrt(99): the geometric edges of an 18 kHz (arithmetic) width
    x = math.sqrt(99.0)
    f2 = IF_HZ * (x / q + math.sqrt((x / q) ** 2 + 4)) / 2
    assert 20 * math.log10(abs(st.freq_response([f2])[0])) == pytest.approx(-20.0, abs=1e-12)   # measured 4e-14


def test_double_tuned_critical_coupling_is_flat_topped():
    st = _one({"response": "double_tuned", "q": 50})
    f = np.linspace(430e3, 480e3, 101)
    x = 50.0 * (f / IF_HZ - IF_HZ / f)
    # source: critical coupling kQ = 1, Terman, Radio Engineers' Handbook (1943), sec. 3, coupled circuits (from
    # memory):
    # |H| = 2/sqrt(4 + x⁴), x = Q(f/f0 − f0/f); width sqrt(2)·f0/Q = 12.87 kHz at Q 50
    np.testing.assert_allclose(np.abs(st.freq_response(f)), 2 / np.sqrt(4 + x ** 4), rtol=1e-13)   # measured 1e-14
    assert st.bandwidth_hz == pytest.approx(math.sqrt(2) * IF_HZ / 50, rel=1e-12)
    assert math.sqrt(2) * IF_HZ / 50 == pytest.approx(12.87e3, abs=5)


@pytest.mark.parametrize("kind, order", [("butterworth", 3), ("chebyshev", 5), ("bessel", 4), ("elliptic", 4)])
def test_prototypes_are_consistent_with_scipy_designs_moved_to_a_band_pass(kind, order):
    # consistency check: the same scipy.signal calls the design makes (the outside checks of these stages, from
    # the handbook formulas, are in test_chain_prototypes.py)
    stage = {"response": kind, "order": order, "bandwidth": "9k"}
    st = _one(stage)
    w0, bw = 2 * np.pi * IF_HZ, 2 * np.pi * 9e3
    maker = {"butterworth": lambda: signal.butter(order, 1.0, analog=True, output="zpk"),
             "chebyshev": lambda: signal.cheby1(order, 0.5, 1.0, analog=True, output="zpk"),
             "bessel": lambda: signal.bessel(order, 1.0, analog=True, output="zpk", norm="mag"),
             "elliptic": lambda: signal.ellip(order, 0.5, 60, 1.0, analog=True, output="zpk")}[kind]
    z, p, k = signal.lp2bp_zpk(*maker(), wo=w0, bw=bw)
    f = np.linspace(430e3, 480e3, 501)
    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)
    np.testing.assert_allclose(st.freq_response(f), h, rtol=1e-12, atol=1e-15)   # measured 7e-16 (relative)
    # geometric symmetry: f0 = sqrt(f1·f2) for any pair of equal-response frequencies
    f1 = 450e3
    f2 = IF_HZ ** 2 / f1   # source: scipy.signal.lp2bp documentation (s -> (s² + ω0²)/(s·B))
    assert abs(st.freq_response([f1])[0]) == pytest.approx(abs(st.freq_response([f2])[0]), rel=1e-12)   # 9e-14


def test_bandpass_preselector_is_centred_on_the_geometric_mean_of_its_edges():
    # source: geometric symmetry of the low-pass to band-pass transform (scipy.signal.lp2bp documentation):
    # a band-pass with edges 450.5 and 459.5 kHz is centred on sqrt(450.5·459.5) kHz = 454 977.7 Hz, where its
    # response is 1, and it is the same at f and f0²/f; its edges are 3.01 dB down (Butterworth)
    d = design_chain({"preselector": {"kind": "bandpass", "low": "450.5k", "high": "459.5k", "order": 2}})
    f0 = math.sqrt(450.5e3 * 459.5e3)
    assert f0 == pytest.approx(454977.7, abs=0.05)
    h = lambda f: np.abs(d.preselector.response(np.atleast_1d(f), 1e6))  # noqa: E731
    assert h(f0)[0] == pytest.approx(1.0, abs=1e-12)
    assert h(np.array([f0 - 100.0, f0 + 100.0])).max() < 1.0
    np.testing.assert_allclose(h(np.array([440e3, 452e3])), h(f0 * f0 / np.array([440e3, 452e3])), rtol=1e-12)
    np.testing.assert_allclose(20 * np.log10(h(np.array([450.5e3, 459.5e3]))), -10 * math.log10(2), atol=1e-9)


def test_lo_plan_high_and_low_side():
    hi = design_chain({"injection": "high"})
    lo = design_chain({"injection": "low"})
    assert hi.lo_hz(1e6) == 1.455e6 and hi.image_hz(1e6) == 1.91e6     # common practice: LO f + IF, image f + 2·IF
    assert lo.lo_hz(1e6) == 545e3 and lo.image_hz(1e6) == 90e3


@pytest.mark.parametrize("ge_db, ph", [(0.0864, 1.0), (0.0, 1.0), (1.0, 5.0)])
def test_quadrature_mixer_factors_give_the_irr_formula(ge_db, ph):
    d = design_chain({"mixer": {"kind": "quadrature", "gain_error_db": ge_db, "phase_error_deg": ph}})
    g, c = 10 ** (ge_db / 20), math.cos(math.radians(ph))
    irr = 10 * math.log10((1 + g * g + 2 * g * c) / (1 + g * g - 2 * g * c))
    # source: Razavi, RF Microelectronics, 2nd ed. (2011), ch. 4, image-reject receivers (from memory)
    assert 20 * math.log10(abs(d.mixer.k_wanted / d.mixer.k_image)) == pytest.approx(irr, abs=1e-11)   # 9e-13
    # small-error approximation ≈ 4/(ε² + φ²) (same source), for small errors only: it is 0.010 dB off at 1 %
    # and 1°, 0.0002 dB at 1° alone (the approximation's own error, not sdrx's)
    eps = g - 1
    if ge_db < 0.5:
        assert irr == pytest.approx(10 * math.log10(4 / (eps ** 2 + math.radians(ph) ** 2)), abs=0.02)


def test_rf_response_real_mixer_image_equals_wanted_and_preselector_rejection():
    d = design_chain({"preselector": {"kind": "tracking", "q": 100}})
    w, im = d.rf_response([1e6, d.image_hz(1e6)], 1e6)
    rho = 1.91 / 1.0 - 1.0 / 1.91
    # source: α = sqrt(1 + Q²ρ²), Kennedy & Davis, Electronic Communication Systems, 4th ed. (1999), receivers
    # chapter (from memory); 1000 kHz, IF 455, Q 100: 42.8 dB
    # measured deviation 1.4e-14 dB
    assert 20 * math.log10(abs(w / im)) == pytest.approx(20 * math.log10(math.sqrt(1 + (100 * rho) ** 2)), abs=1e-12)


def test_tuned_stage_too_wide_is_refused():
    with pytest.raises(ParameterError, match=r"if_stage\[1\]\.q: .* (too low|wider than twice the IF)"):
        _one({"response": "double_tuned", "q": 0.6})
