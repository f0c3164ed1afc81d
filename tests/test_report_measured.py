"""Measured selectivity (test carriers through the Receiver, AGC held: the single-signal method of ITU-R SM.332).

Two kinds of check, named for what they are:
- the *exact* path really measures: real RF at the IF sample rate, a multiplying mixer, matched-z stages,
  the channelizer around +IF. Its measured response, bandwidths, shape factor and rejections are checked
  against the analog design (whose prototypes are checked against the handbook formulas in
  test_chain_prototypes.py, test_chain_design.py and test_selectivity.py), and its measured band edges are
  checked by measuring the chain again at the reported edges, which does not use the design at all;
- the *fast* path applies the design's own correction in its channelizer, so its agreement with the design
  is a consistency check of the plumbing (which channel, which side, which level), tight because the
  agreement is exact by construction.
"""

import functools

import numpy as np
import pytest

from sdrx.analysis import selectivity as sel
from sdrx.chain import design_chain

TUNE = 1000e3
SPACING = 10e3
LEVELS = ("3", "6", "40", "60")


@functools.lru_cache(maxsize=None)   # the designs and figures are immutable: measure each preset once
def _figures(preset, path):
    d = design_chain(preset)
    des = sel.designed_figures(d, TUNE, SPACING)
    return d, des, sel.measured_figures(d, TUNE, SPACING, des, path=path, points=13)


def _response_arrays(d, mea):
    offs = np.array([o for o, _ in mea.response])
    got = np.array([v for _, v in mea.response])
    return offs, got, sel.relative_response_db(d, TUNE, TUNE + offs)


# The exact path's matched-z stages tilt the response slightly, linearly in the offset from the carrier (odd
# about the tune and about the image): measured 1.31e-6 dB/Hz (wide), 0.78e-6 (medium), 0.45e-6 (narrow), i.e.
# 0.040 / 0.024 / 0.008 dB at 3 channels. Tolerance: 1e-3 dB plus ten times that tilt at each offset.
EXACT_TILT_DB_PER_HZ = {"wide": 1.31e-6, "medium": 0.78e-6, "narrow": 0.45e-6}
# Relative bandwidth deviation measured on the exact path, largest over the presets: 2.2e-5 (3 dB), 1.5e-5
# (6 dB), 3.8e-5 (40 dB), 9.1e-5 (60 dB); shape factor 8.7e-5. Tolerances ten times that (a 1 % error fails).
EXACT_BANDWIDTH_REL = {"3": 2.2e-4, "6": 1.5e-4, "40": 3.8e-4, "60": 9.1e-4}
EXACT_SHAPE_REL = 8.7e-4


@pytest.mark.parametrize("preset", ["wide", "medium", "narrow"])
def test_exact_path_measures_the_designed_selectivity(preset):
    d, des, mea = _figures(preset, "exact")
    offs, got, want = _response_arrays(d, mea)
    image_off = d.image_hz(TUNE) - TUNE
    dist = np.minimum(np.abs(offs), np.abs(offs - image_off))
    tol = 1e-3 + 10 * EXACT_TILT_DB_PER_HZ[preset] * dist
    keep = want >= -100.0     # below that the exact path's float32 rounding floor
    assert keep.sum() >= 20
    assert np.all(np.abs(got - want)[keep] <= tol[keep]), np.max((np.abs(got - want) - tol)[keep])
    for k in LEVELS:
        assert mea.bandwidth_hz[k] == pytest.approx(des.bandwidth_hz[k], rel=EXACT_BANDWIDTH_REL[k]), k
    assert mea.shape_factor == pytest.approx(des.shape_factor, rel=EXACT_SHAPE_REL)
    for k, rej in des.adjacent_rejection_db.items():
        assert mea.adjacent_rejection_db[k] == pytest.approx(
            rej, abs=1e-3 + 10 * EXACT_TILT_DB_PER_HZ[preset] * abs(float(k))), k
    assert mea.image_rejection_db == pytest.approx(des.image_rejection_db, abs=1e-3)


@pytest.mark.parametrize("preset", ["wide", "narrow"])
def test_exact_path_measured_edges_are_where_the_chain_is_x_db_down(preset):
    # measure the chain once more with carriers at the band edges it reported: each must read its level
    # below the carrier on tune (measured deviation up to 9e-5 dB; tolerance 1e-3 dB)
    d, _, mea = _figures(preset, "exact")
    edges = [e for k in LEVELS for e in mea.edges_hz[k]]
    lv = sel.measure_levels_dbfs(d, TUNE, TUNE + np.array([0.0] + edges), SPACING, path="exact")
    expected = [-float(k) for k in LEVELS for _ in range(2)]
    np.testing.assert_allclose(lv[1:] - lv[0], expected, rtol=0, atol=1e-3)


@pytest.mark.parametrize("preset", ["wide", "medium", "narrow"])
def test_fast_path_is_consistent_with_the_design(preset):
    # consistency check: the fast path's channelizer applies the design's correction, so it must reproduce the
    # design to the channelizer's accuracy: measured 0.0015 dB at most to -80 dB (tolerance 0.015 dB), bandwidths
    # 1.8e-5 relative at most (tolerance 2e-4), rejections 1e-5 dB (tolerance 1e-3 dB)
    d, des, mea = _figures(preset, "fast")
    offs, got, want = _response_arrays(d, mea)
    keep = want >= -80.0
    assert keep.sum() >= 10
    np.testing.assert_allclose(got[keep], want[keep], rtol=0, atol=0.015)
    for k, rej in des.adjacent_rejection_db.items():
        if rej <= 80:
            assert mea.adjacent_rejection_db[k] == pytest.approx(rej, abs=1e-3), k
    assert mea.image_rejection_db == pytest.approx(des.image_rejection_db, abs=1e-3)
    for k in LEVELS:
        assert mea.bandwidth_hz[k] == pytest.approx(des.bandwidth_hz[k], rel=2e-4), k
    assert mea.shape_factor == pytest.approx(des.shape_factor, rel=2e-4)


def test_measured_level_tracks_carrier_level():
    """The detector reads 20 log10(A) + constant gain: 20 dB less carrier, 20 dB less level (AGC held)."""
    d = design_chain("medium")
    a = sel.measure_levels_dbfs(d, TUNE, [TUNE], SPACING, amplitude=0.1)[0]
    b = sel.measure_levels_dbfs(d, TUNE, [TUNE], SPACING, amplitude=0.01)[0]
    # physical identity: a linear chain with its gain held (measured deviation 1.6e-7 dB; tolerance 2e-6 dB)
    assert a - b == pytest.approx(20.0, abs=2e-6)
