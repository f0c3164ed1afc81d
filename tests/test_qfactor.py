"""Tests of sdrx.analysis.qfactor against circuit-theory formulas and scipy."""

import math

import numpy as np
import pytest
from scipy import signal

from sdrx.analysis import qfactor as qf
from sdrx.errors import ParameterError


def _rlc_parallel_db(f, f0, q):
    """|H| of a parallel RLC (R=1) by scipy.signal.freqs, normalised: another route to the curve."""
    w0 = 2 * np.pi * f0
    # H(s) = (w0/Q) s / (s^2 + (w0/Q) s + w0^2)
    _, h = signal.freqs([w0 / q, 0], [1, w0 / q, w0**2], worN=2 * np.pi * np.asarray(f))
    return -20 * np.log10(np.abs(h))


def test_universal_resonance_curve_matches_rlc_circuit():
    f = np.linspace(300e3, 700e3, 101)
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory);
    # scipy.signal.freqs on the RLC transfer function as a second route
    np.testing.assert_allclose(qf.single_tuned_attenuation_db(f, 455e3, 50), _rlc_parallel_db(f, 455e3, 50),
                               rtol=0, atol=1e-9)
    h = qf.single_tuned_response(f, 455e3, 50)
    q = 50
    expect = 1 / np.sqrt(1 + q**2 * (f / 455e3 - 455e3 / f) ** 2)
    np.testing.assert_allclose(np.abs(h), expect, rtol=1e-12)
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory)


def test_single_tuned_bandwidth_worked_example():
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory):
    # half-power width f0/Q; Q 50 at 455 kHz -> 9.10 kHz
    assert qf.single_tuned_bandwidth(455e3, 50) == pytest.approx(455e3 / 50, rel=1e-12)
    assert qf.single_tuned_bandwidth(455e3, 50) / 1e3 == pytest.approx(9.10, abs=0.005)
    # the width is exact: the curve is 3.0103 dB down at both edges found by geometric symmetry
    bw = qf.single_tuned_bandwidth(455e3, 50, 40.0)
    f1 = (-bw + math.sqrt(bw**2 + 4 * 455e3**2)) / 2
    assert qf.single_tuned_attenuation_db(f1, 455e3, 50) == pytest.approx(40.0, abs=1e-9)
    assert qf.single_tuned_attenuation_db(f1 + bw, 455e3, 50) == pytest.approx(40.0, abs=1e-9)


def test_n_stage_shrinkage():
    # source: synchronous tuning, Terman, Electronic and Radio Engineering, 4th ed. (1955), tuned amplifiers
    # (from memory):
    # BW_n = BW_1 sqrt(2^(1/n) - 1)
    bw1 = 455e3 / 50
    for n in (1, 2, 3, 4):
        assert qf.cascade_bandwidth(455e3, 50, stages=n) == pytest.approx(bw1 * math.sqrt(2 ** (1 / n) - 1), rel=1e-12)
    # worked value: three stages 4.639 kHz
    assert qf.cascade_bandwidth(455e3, 50, stages=3) / 1e3 == pytest.approx(4.639, abs=0.0005)
    assert qf.shrinkage_factor(3) == pytest.approx(math.sqrt(2 ** (1 / 3) - 1), rel=1e-12)


def test_double_tuned_critical_coupling():
    # source: critical coupling kQ = 1, Terman, Radio Engineers' Handbook (1943), sec. 3, coupled circuits (from
    # memory):
    # k = 1/Q, BW = sqrt(2) f0/Q; n stages x (2^(1/n) - 1)^(1/4)
    bw = qf.double_tuned_bandwidth(455e3, 50)
    assert bw == pytest.approx(math.sqrt(2) * 455e3 / 50, rel=1e-12)
    assert bw / 1e3 == pytest.approx(12.87, abs=0.005)
    assert qf.double_tuned_shrinkage_factor(2) == pytest.approx((2**0.5 - 1) ** 0.25, rel=1e-12)
    assert qf.double_tuned_shrinkage_factor(2) == pytest.approx(0.8022, abs=5e-5)
    assert qf.cascade_bandwidth(455e3, 50, stages=2, kind="double") == pytest.approx(bw * (2**0.5 - 1) ** 0.25, rel=1e-12)


def test_double_tuned_curve_matches_coupled_circuit_model():
    """Two identical series-tuned loops (R = 1) coupled by a mutual reactance X_m = k·w0·L, k = 1/Q, solved as a circuit."""
    f0, q = 455e3, 50
    f = np.linspace(400e3, 520e3, 241)
    w = 2 * np.pi * f
    w0 = 2 * np.pi * f0
    L = q / w0
    C = 1 / (w0**2 * L)
    xm = w0 * L / q  # critical coupling k = 1/Q; reactance held at its value at f0 (narrow-band coupling element)
    z = 1 + 1j * (w * L - 1 / (w * C))
    i2 = 1j * xm / (z * z + xm**2)  # secondary current for unit EMF in the primary (mesh equations)
    h = np.abs(i2) / (1 / 2)  # peak |i2| = 1/(2R) at critical coupling
    # source: physical identity — the mesh equations of the two coupled loops, solved here (flat top, peak 1/2R)
    np.testing.assert_allclose(qf.double_tuned_attenuation_db(f, f0, q), -20 * np.log10(h), rtol=0, atol=1e-9)
    assert h.max() == pytest.approx(1.0, abs=1e-3)


def test_required_q_solvers_roundtrip_and_worked_example():
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory):
    # 20 dB down at +-9 kHz (full width 18 kHz) at 455 kHz needs 455 sqrt(99)/18
    assert qf.q_for_bandwidth(455e3, 18e3, 20.0) == pytest.approx(455 * math.sqrt(99) / 18, rel=1e-12)
    for kind in qf.KINDS:
        for n in (1, 2, 3, 4):
            q = qf.q_for_rejection(455e3, 10e3, 40.0, n, kind)
            # the upper side is exactly 40 dB down, the lower side more
            assert qf.stage_attenuation_db(465e3, 455e3, q, n, kind) == pytest.approx(40.0, abs=1e-9)
            assert qf.stage_attenuation_db(445e3, 455e3, q, n, kind) > 40.0
            qb = qf.q_for_bandwidth(455e3, 20e3, 40.0, n, kind)
            assert qb < q  # the arithmetic offset needs slightly more Q than the geometric width


def test_shortcut_q():
    # source: the universal resonance curve's large-attenuation form Q ~ 10^(x/20) f0 / BW_x (same source)
    assert qf.shortcut_q(455e3, 9e3, 20.0) == pytest.approx(10 * 455e3 / 18e3, rel=1e-12)
    exact = qf.q_for_rejection(455e3, 10e3, 60.0)
    assert qf.shortcut_q(455e3, 10e3, 60.0) / exact - 1 == pytest.approx(0, abs=0.03)


def test_preselector_image_rejection_worked_example():
    f, f_if, q = 1000e3, 455e3, 100
    fim = f + 2 * f_if
    rho = fim / f - f / fim
    alpha = math.sqrt(1 + q**2 * rho**2)
    # source: alpha = sqrt(1 + Q^2 rho^2), Kennedy & Davis, Electronic Communication Systems, 4th ed. (1999),
    # receivers chapter (from memory); 42.8 dB
    assert qf.preselector_image_rejection_db(f, fim, q) == pytest.approx(20 * math.log10(alpha), abs=1e-9)
    assert qf.preselector_image_rejection_db(f, fim, q) == pytest.approx(42.8, abs=0.05)
    assert qf.preselector_image_rejection_db(f, fim, q, stages=2) == pytest.approx(2 * 20 * math.log10(alpha))


@pytest.mark.parametrize("call, match", [
    (lambda: qf.q_for_rejection(455e3, 500e3, 40), "offset"),
    (lambda: qf.q_for_rejection(455e3, 10e3, -3), "rejection"),
    (lambda: qf.cascade_bandwidth(455e3, 50, stages=0), "stages"),
    (lambda: qf.cascade_bandwidth(455e3, 50, kind="triple"), "kind"),
    (lambda: qf.single_tuned_bandwidth(455e3, 0), "q"),
])
def test_bad_parameters(call, match):
    with pytest.raises(ParameterError, match=match):
        call()
