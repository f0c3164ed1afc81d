"""Distortion: THD against depth and modulating frequency, and the diode detector's diagonal-clipping limit.

source: diagonal clipping of a diode detector with an RC load is absent while RC <= sqrt(1 − m²)/(2π·fm·m)
(Haykin, Communication Systems, AM envelope detection); recomputed here for each case. THD is checked
independently with the tests' own sine-fit THD (helpers_rx.thd, IEEE Std 1241).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.analysis import distortion as dist
from sdrx.analysis.amtest import run_am_test, segment
from sdrx.chain import design_chain

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import thd  # noqa: E402

TUNE = 1000e3
# a wide IF and wide audio, so that only the detector distorts and the harmonics reach the output
WIDE = {"preselector": {"kind": "none"}, "if_stage": [{"response": "butterworth", "order": 2, "bandwidth": "60k"}],
        "audio": {"highpass": "20", "highpass_order": 1, "lowpass": "20k"}}


def _diode(rc_us):
    return design_chain({**WIDE, "detector": {"kind": "diode", "rc_us": rc_us}})


def _onset_hz(rc_s, m):
    return math.sqrt(1 - m * m) / (2 * math.pi * rc_s * m)


def test_onsets_are_the_diagonal_clipping_limit():
    for rc_s, m in ((300e-6, 0.3), (300e-6, 0.8), (100e-6, 0.95)):
        assert dist.clipping_onset_hz(rc_s, m) == pytest.approx(_onset_hz(rc_s, m), rel=1e-12)
    # the worked case: RC 300 µs is clean at 30 % and clips at 80 % for a 1 kHz tone
    assert _onset_hz(300e-6, 0.3) > 1000.0 > _onset_hz(300e-6, 0.8)


def test_rc_300_us_is_clean_at_30_percent_and_clips_at_80():
    d = dist.measure_distortion(_diode(300), TUNE, depths=(0.3, 0.8), freqs_hz=())
    assert d.thd_percent["0.3"] < 0.01
    assert d.thd_percent["0.8"] > 5.0
    assert d.rc_us == 300 and d.clipping_onset_hz["0.8"] == pytest.approx(_onset_hz(300e-6, 0.8), rel=1e-9)
    assert d.limit_rc_us["0.3"] == pytest.approx(math.sqrt(1 - 0.09) / (2 * math.pi * 1e3 * 0.3) * 1e6, rel=1e-9)


@pytest.mark.parametrize("m", [0.3, 0.8, 0.95])
def test_clipping_starts_where_the_limit_says(m):
    rc_s = 300e-6
    f0 = _onset_hz(rc_s, m)
    freqs = (0.7 * f0, 0.95 * f0, 1.1 * f0, 1.4 * f0)
    d = dist.measure_distortion(_diode(300), TUNE, depths=(m,), freqs_hz=freqs)
    got = dict(d.thd_vs_frequency[f"{m:g}"])
    below, above = [got[f] for f in freqs[:2]], [got[f] for f in freqs[2:]]
    assert max(below) < 0.01                    # the capacitor follows the envelope (below 0.003 % here)
    # 10 % beyond the limit the output starts to follow the RC discharge (0.08 to 1.3 % here), then more
    assert above[0] > 0.03 and above[1] > max(0.5, 2 * above[0])


def test_thd_agrees_with_an_independent_sine_fit():
    design = _diode(300)
    audio, fa = run_am_test(design, TUNE, [segment(1000.0, 0.8)], level_dbfs=-40.0)
    ours = dist.measure_distortion(design, TUNE, depths=(0.8,), freqs_hz=()).thd_percent["0.8"]
    assert ours == pytest.approx(100 * thd(audio[0], fa, 1000.0, n_harmonics=9), rel=1e-6)


def test_ideal_envelope_detector_is_clean_at_95_percent():
    d = dist.measure_distortion(design_chain(WIDE), TUNE, depths=(0.95,), freqs_hz=(200.0, 3150.0))
    assert max(v for _, v in d.thd_vs_frequency["0.95"]) < 0.01   # |u| of a linear, symmetric IF
    assert d.rc_us is None and d.clipping_onset_hz == {}


def test_exact_path_distortion():
    d = dist.measure_distortion(_diode(300), TUNE, path="exact", depths=(0.3, 0.8), freqs_hz=())
    fast = dist.measure_distortion(_diode(300), TUNE, path="fast", depths=(0.3, 0.8), freqs_hz=())
    assert d.thd_percent["0.3"] < 0.01
    assert d.thd_percent["0.8"] == pytest.approx(fast.thd_percent["0.8"], rel=0.01)


def test_thd_of_a_known_signal():
    t = np.arange(9600) / 48000.0
    x = 0.2 + np.cos(2 * np.pi * 700 * t) + 0.02 * np.cos(2 * np.pi * 1400 * t + 1) + 0.01 * np.sin(2 * np.pi * 3500 * t)
    assert dist.thd_percent(x, 48000.0, 700.0) == pytest.approx(100 * math.hypot(0.02, 0.01), rel=1e-9)
