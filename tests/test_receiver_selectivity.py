"""IF selectivity measured by running tones through the Receiver (single-signal method, AGC off).

Each check feeds unmodulated carriers at offsets from the tuning, reads the
antenna-referred carrier level the Receiver reports (rx.stats, after a settle
time) and finds the -3 dB edges by root finding on those measurements. The
design objects are never read for the expected values: those come from the
textbook formulas, recomputed here.

source: ITU-R SM.332 (single-signal selectivity with the AGC off) for the method.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.chain import design_chain

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_filters import chebyshev_att_db, elliptic_stopband_edge, if_freq  # noqa: E402
from helpers_rx import carrier_level_db, find_crossing, iq_info  # noqa: E402

FS = 240e3
CENTER = 1.0e6
TUNE = 1.0e6
IF_HZ = 455e3
INFO = iq_info(FS, CENTER)


def _design(stages, path_note=None):
    return design_chain({"if_frequency": "455k", "preselector": {"kind": "none"},
                         "agc": {"enabled": False}, "if_stage": stages})


def _level(d, offset_hz, path="fast"):
    return carrier_level_db(d, INFO, TUNE, TUNE + offset_hz, level_dbfs=-20.0, seconds=0.03, settle_s=0.01,
                            path=path)


def _measured_3db_width(d, half_guess_hz, path="fast"):
    """Full -3 dB width from the measured carrier levels (both edges found by root finding)."""
    ref = _level(d, 0.0, path)
    f = lambda off: _level(d, off, path)  # noqa: E731
    tol = half_guess_hz * 1e-6
    hi = find_crossing(f, ref - 10 * math.log10(2.0), 0.5 * half_guess_hz, 1.6 * half_guess_hz, xtol=tol)
    lo = find_crossing(f, ref - 10 * math.log10(2.0), -1.6 * half_guess_hz, -0.5 * half_guess_hz, xtol=tol)
    return hi - lo


@pytest.mark.parametrize("q", [30.0, 60.0, 120.0])
def test_single_tuned_3db_width_is_f0_over_q(q):
    d = _design([{"response": "single_tuned", "q": q}])
    expected = IF_HZ / q  # x = Q(f/f0 - f0/f) = ±1
    # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943), sec. 3 (from memory)
    width = _measured_3db_width(d, expected / 2)
    assert width == pytest.approx(expected, rel=3e-5)   # measured deviation 3.3e-6 (relative)


def test_single_tuned_3db_width_exact_path():
    q = 60.0
    d = _design([{"response": "single_tuned", "q": q}])
    # source: universal resonance curve (Terman, Radio Engineers' Handbook, 1943, sec. 3; from memory)
    expected = IF_HZ / q
    width = _measured_3db_width(d, expected / 2, path="exact")
    assert width == pytest.approx(expected, rel=6e-5)   # measured deviation 5.8e-6 (relative)


@pytest.mark.parametrize("n", [2, 3])
def test_n_identical_single_tuned_stages_shrink_by_sqrt_2_pow_1_over_n_minus_1(n):
    q = 50.0
    d = _design([{"response": "single_tuned", "q": q, "agc": False} for _ in range(n)])
    # source: synchronous tuning, Terman, Electronic and Radio Engineering, 4th ed. (1955), tuned amplifiers
    # (from memory)
    expected = IF_HZ / q * math.sqrt(2.0 ** (1.0 / n) - 1.0)
    width = _measured_3db_width(d, expected / 2)
    assert width == pytest.approx(expected, rel=3e-5)   # measured deviation 2.6e-6 (relative)
    if n == 3:
        # the formula at Q 50, 455 kHz, three stages: 4.639 kHz
        assert expected == pytest.approx(4639.0, abs=1.0)


@pytest.mark.parametrize("q", [40.0, 80.0])
def test_double_tuned_critical_coupling_width_is_sqrt2_f0_over_q(q):
    d = _design([{"response": "double_tuned", "q": q}])
    expected = math.sqrt(2.0) * IF_HZ / q
    # source: critical coupling kQ = 1, Terman, Radio Engineers' Handbook (1943), sec. 3, coupled circuits (from
    # memory)
    width = _measured_3db_width(d, expected / 2)
    assert width == pytest.approx(expected, rel=3e-5)   # measured deviation 7e-7 (relative)


@pytest.mark.parametrize("order", [3, 5])
def test_butterworth_attenuation_follows_10log10_1_plus_omega_2n(order):
    bw = 9e3
    d = _design([{"response": "butterworth", "order": order, "bandwidth": "9k"}])
    ref = _level(d, 0.0)
    for omega in (-3.0, -2.0, -1.0, 1.0, 1.5, 2.0, 3.0):
        f_if = if_freq(omega, bw, IF_HZ)
        offset = IF_HZ - f_if  # high-side LO: RF tune + d mixes to IF − d
        att = ref - _level(d, offset)
        expected = 10 * math.log10(1 + omega ** (2 * order))
        # source: Williams & Taylor, Electronic Filter Design Handbook, 4th ed. (2006), ch. 2 (from memory)
        assert att == pytest.approx(expected, abs=1.5e-4), (omega, att, expected)   # measured deviation 1.4e-5 dB
    # the formula at Ω = 2: n = 3 18.13 dB, n = 5 30.11 dB
    assert 10 * math.log10(1 + 2.0 ** (2 * order)) == pytest.approx({3: 18.13, 5: 30.11}[order], abs=0.01)


def test_low_side_injection_keeps_the_width():
    q = 60.0
    d = design_chain({"if_frequency": "455k", "injection": "low", "preselector": {"kind": "none"},
                      "agc": {"enabled": False}, "if_stage": [{"response": "single_tuned", "q": q}]})
    # source: universal resonance curve (Terman, Radio Engineers' Handbook, 1943, sec. 3; from memory)
    expected = IF_HZ / q
    width = _measured_3db_width(d, expected / 2)
    assert width == pytest.approx(expected, rel=3e-5)   # measured deviation 1.1e-6 (relative)


def test_geometric_asymmetry_meets_the_steeper_skirt_on_the_right_side():
    # A real band-pass about a low IF is geometrically symmetric: |H(f0·r)| = |H(f0/r)|, so for equal
    # arithmetic offsets the skirt below f0 is steeper. With high-side injection an RF carrier above the
    # tuning lands below the IF (IF − d) and must come out weaker than the one the same distance below.
    # source: geometric symmetry of the low-pass to band-pass transform (scipy.signal.lp2bp documentation)
    d = _design([{"response": "single_tuned", "q": 30.0}])
    up = _level(d, +30e3)
    down = _level(d, -30e3)
    q, f0 = 30.0, IF_HZ
    # universal resonance curve (Terman, Radio Engineers' Handbook, 1943, sec. 3; from memory)
    curve = lambda f: -10 * math.log10(1 + (q * (f / f0 - f0 / f)) ** 2)  # noqa: E731
    # measured deviation 4.4e-5 dB; tolerance 5e-4 dB (the two sides differ by 1.2 dB)
    assert up == pytest.approx(-20 + curve(f0 - 30e3), abs=5e-4)
    assert down == pytest.approx(-20 + curve(f0 + 30e3), abs=5e-4)
    assert up < down


# measured deviation from the formula: fast path 1e-5 dB, exact path up to 0.017 dB (at Ω = 3, 13.5 kHz off:
# the matched-z stages tilt by about 0.0013 dB/kHz); tolerances 1e-4 and 0.15 dB
@pytest.mark.parametrize("path, tol_db", [("fast", 1e-4), ("exact", 0.15)])
def test_chebyshev_ripple_band_and_skirt_through_the_chain(path, tol_db):
    # source: the Chebyshev attenuation and the elliptic degree equation, see tests/helpers_filters.py
    d = _design([{"response": "chebyshev", "order": 3, "bandwidth": "9k", "ripple_db": 0.5}])
    ref = _level(d, 0.0, path)   # odd order: 0 dB at the centre
    for omega in (-2.0, -1.0, 1.0, 2.0, 3.0):
        offset = IF_HZ - if_freq(omega, 9e3, IF_HZ)   # high-side LO: RF tune + d mixes to IF − d
        att = ref - _level(d, offset, path)
        assert att == pytest.approx(chebyshev_att_db(3, 0.5, omega), abs=tol_db), (omega, att)
    # the ripple band edges (Ω = ±1) are the 0.5 dB points; Ω = 2: 19.22 dB
    assert chebyshev_att_db(3, 0.5, 2.0) == pytest.approx(19.22, abs=0.005)


# measured deviation: fast path 2e-4 dB, exact path 7e-4 dB (ripple edges and stopband edge); tolerances
# 2e-3 and 0.01 dB
@pytest.mark.parametrize("path, tol_db", [("fast", 2e-3), ("exact", 0.01)])
def test_elliptic_ripple_band_and_stopband_floor_through_the_chain(path, tol_db):
    # the narrow preset's stage: order 4, 0.5 dB ripple over 5 kHz, 60 dB floor from Ωs = 2.683 on
    d = _design([{"response": "elliptic", "order": 4, "bandwidth": "5k", "ripple_db": 0.5, "stopband_db": 60}])
    ws = elliptic_stopband_edge(4, 0.5, 60.0)
    ref = _level(d, 0.0, path)   # even order: the centre is a ripple minimum, 0.5 dB down like the band edges

    def rel_att(omega):
        return ref - _level(d, IF_HZ - if_freq(omega, 5e3, IF_HZ), path)

    for omega in (-1.0, 1.0):
        assert rel_att(omega) == pytest.approx(0.0, abs=tol_db), omega
    for omega in (-ws, ws):     # the stopband edge: As − Ap re the centre
        assert rel_att(omega) == pytest.approx(60.0 - 0.5, abs=tol_db), omega
    for omega in (1.5 * ws, -3.0 * ws):   # beyond it never less (59.89 and 71.38 dB here)
        assert rel_att(omega) >= 60.0 - 0.5 - tol_db, omega
