"""Segments of a band run: the settling time from the chain's time constants, and the segment grid."""

import math

import pytest
from hypothesis import given, settings, strategies as st

from helpers_rx import iq_info
from sdrx.band.plan import SETTLE_DB, cut_period, grid_period, plan_segments, settle_time_s
from sdrx.chain import design_chain
from sdrx.errors import ParameterError
from sdrx.receiver import Receiver

LN = math.log(10 ** (SETTLE_DB / 20))   # a natural response falls by SETTLE_DB after LN time constants


def test_settle_time_of_the_agc():
    # the medium chain's slowest part is the AGC release, 30 ms (the hang adds to it)
    assert settle_time_s(design_chain("medium")) == pytest.approx(0.030 * LN)
    assert settle_time_s(design_chain({"agc": {"hang_ms": 200}})) == pytest.approx(0.230 * LN)


def test_settle_time_without_agc_is_the_audio_high_pass():
    # source: Butterworth poles s_k = ωc·exp(jπ(2k+n−1)/(2n)); the pair nearest the jω axis has
    # |Re s| = ωc·sin(π/(2n)) (any filter-design text), so τ = 1/(2π·80 Hz·sin(π/4)) for order 2
    d = design_chain({"agc": {"enabled": False}})
    tau = 1 / (2 * math.pi * 80.0 * math.sin(math.pi / 4))
    assert settle_time_s(d) == pytest.approx(tau * LN, rel=1e-9)


def test_settle_time_of_a_slow_diode():
    d = design_chain({"agc": {"enabled": False}, "detector": {"kind": "diode", "rc_us": 5000}})
    assert settle_time_s(d) == pytest.approx(5e-3 * LN)


def test_grids_at_2_4_msps():
    info = iq_info(2.4e6, 1.2e6)
    rx = Receiver(design_chain("medium"), info, 1e6)
    g, c = grid_period([rx]), cut_period([rx])
    # channelizer hop 11200, channel sample 25, audio sample 50, 10 ms window 24000 samples
    assert g == math.lcm(11200, 25, 50, 24000) == 168000   # 0.07 s
    assert c == 24000
    diode = Receiver(design_chain({"detector": {"kind": "diode"}}), info, 1e6)
    assert grid_period([diode]) == math.lcm(168000, 4096 * 25)   # the detector's 4096-sample blocks


@settings(max_examples=60, deadline=None)
@given(first=st.integers(0, 10**6), count=st.integers(1, 10**6), seg=st.integers(1, 2 * 10**5),
       over=st.integers(0, 3 * 10**5), grid=st.integers(1, 5000), cut=st.integers(1, 5000))
def test_segments_cover_the_excerpt_on_their_grids(first, count, seg, over, grid, cut):
    segs = plan_segments(first, count, 1.0, float(seg), float(over), grid, cut)
    assert segs[0].start == first and segs[-1].end == first + count
    assert [s.last for s in segs] == [False] * (len(segs) - 1) + [True]
    for a, b in zip(segs, segs[1:]):
        assert a.end == b.start
    for s in segs:
        assert (s.start - first) % cut == 0
        assert (s.warm - first) % grid == 0
        assert first <= s.warm <= s.start
        # enough overlap (or from the excerpt's start), and not a grid period more than needed
        assert s.warm == first or s.start - s.warm >= over
        assert s.start - s.warm < over + grid


def test_one_segment_when_not_split():
    (s,) = plan_segments(5, 100, 10.0, None, 3.0, 7, 3)
    assert (s.warm, s.start, s.end, s.last) == (5, 5, 105, True)


@pytest.mark.parametrize("bad", [-1.0, float("nan"), "x"])
def test_bad_segment_length(bad):
    with pytest.raises(ParameterError, match="--segment"):
        plan_segments(0, 100, 10.0, bad, 1.0, 1, 1)
