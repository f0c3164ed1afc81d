"""The report's measured AGC figures (``measured.agc``) against what the chain's design implies.

- The characteristic of a linear chain is flat where the AGC has gain in
  hand and falls (or rises) 1 dB per dB where the gain is at its limit: the
  knees lie where the gain needed to hold the reference reaches
  ``max_gain_db`` / ``min_gain_db`` (a physical identity of a linear chain).
- Attack and release: the documented loop model solved independently
  (tests/helpers_agc.py).
- Ripple: a 100 Hz modulation of depth m leaves the carrier filter as a level
  ripple r = m/(1 + (ωτ_f)²) (two RC sections), which a loop of time
  constant τ passes as 1/√(1 + (ωτ)²) (first-order low-pass; RC network
  response).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sdrx.analysis import agc_figures as af
from sdrx.chain import design_chain

from helpers_agc import agc_model_step

TUNE = 1.0e6


def _h_db(d):
    return 20 * math.log10(abs(d.rf_response(TUNE, TUNE)[0]))


@pytest.fixture(scope="module")
def medium():
    d = design_chain("medium")
    return d, af.measure_agc(d, TUNE)


def test_characteristic_is_flat_inside_the_gain_range_and_one_to_one_outside(medium):
    d, m = medium
    curve = dict((lv, db) for lv, db in m["characteristic"])
    knee_low = d.agc.reference_dbfs - d.fixed_gain_db - _h_db(d) - d.agc.max_gain_db
    knee_high = d.agc.reference_dbfs - d.fixed_gain_db - _h_db(d) - d.agc.min_gain_db
    for lv, db in curve.items():
        expected = min(0.0, lv - knee_low) + max(0.0, lv - knee_high)
        assert db == pytest.approx(expected, abs=0.01), lv     # measured within 0.002 dB
    # the range's edges, interpolated linearly between 5 dB steps across a knee: within 0.3 dB
    lo3, hi3 = m["range_dbfs"]["3"]
    assert lo3 == pytest.approx(knee_low - 3.0, abs=0.3)
    assert hi3 == pytest.approx(min(0.0, knee_high + 3.0), abs=0.3)
    lo10, hi10 = m["range_dbfs"]["10"]
    assert lo10 == pytest.approx(knee_low - 10.0, abs=0.3) and hi10 == 0.0   # full scale bounds the top
    assert m["range_db"]["3"] == pytest.approx(hi3 - lo3, abs=0.1)


@pytest.mark.parametrize("before, after, key", [(-40.0, -20.0, "attack_ms"), (-20.0, -40.0, "release_ms")])
def test_attack_and_release_times_follow_the_model(medium, before, after, key):
    d, m = medium
    sp = d.agc
    h = _h_db(d)
    ref = sp.reference_dbfs - d.fixed_gain_db
    t = np.arange(0, 0.4, 1e-5)
    g0 = ref - (before + h)
    g = agc_model_step(t, before + h, after + h, g0, ref, sp.carrier_filter_ms * 1e-3,
                       sp.attack_ms * 1e-3, sp.release_ms * 1e-3)
    final = ref - (after + h)
    off = np.nonzero(np.abs(g - final) > 2.0)[0]
    expected_ms = 1e3 * t[off[-1] + 1]
    # the loop acts once per 0.67 ms control interval on the interval's mean: within 2 ms (measured 0.6)
    assert m[key] == pytest.approx(expected_ms, abs=2.0)


def test_ripple_on_a_100_hz_modulation_follows_the_filters():
    tau_f, tau = 0.01, 0.025
    d = design_chain({"agc": {"carrier_filter_ms": tau_f * 1e3, "attack_ms": tau * 1e3, "release_ms": tau * 1e3}})
    w = 2 * math.pi * 100.0
    r = 0.8 / (1 + (w * tau_f) ** 2)
    expected = 20 * math.log10((1 + r) / (1 - r)) / math.sqrt(1 + (w * tau) ** 2)
    # the discrete loop (0.67 ms intervals) against the continuous first-order model: within 10 %
    assert af.ripple_db(d, TUNE) == pytest.approx(expected, rel=0.1)


def test_a_chain_without_agc_has_no_times():
    d = design_chain({"agc": {"enabled": False}})
    m = af.measure_agc(d, TUNE)
    assert m["attack_ms"] is None and m["release_ms"] is None and m["ripple_db"] is None
    # no AGC: the output follows the input 1 dB per dB everywhere
    curve = m["characteristic"]
    assert all(db == pytest.approx(lv - af.REFERENCE_DBFS, abs=0.01) for lv, db in curve)
