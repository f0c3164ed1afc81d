"""Fidelity: SINAD with the default chain, envelope-detector THD, diode diagonal clipping.

Audio is measured after the Receiver's own delay compensation, skipping the
first 0.1 s (AGC and filter settling). SINAD and THD come from least-squares
sine fits (helpers_rx; source: IEEE Std 1241 sine-fit method).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.chain import design_chain
from sdrx.dsp.detectors import diagonal_clipping_limit_s

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import am_station, complex_noise, iq_info, run_receiver, sinad_db, thd  # noqa: E402

FS = 240e3
CENTER = 1.0e6
TUNE = 1.0e6
INFO = iq_info(FS, CENTER)
AFS = 48000.0
FM = 1000.0
SKIP_S = 0.1


def _station(depth, seconds, level_dbfs=-20.0, cn_db=None, rng=None):
    n = int(round(seconds * FS))
    x = am_station(TUNE, level_dbfs, depth, FM, FS, CENTER, n)
    if cn_db is not None:
        # carrier-to-noise ratio defined in a 9 kHz noise bandwidth (the DSB AM emission width for
        # 4.5 kHz audio; source: ITU-R BS.639): noise density N0 = C / (10^(CN/10) · 9 kHz),
        # complex white noise over the capture's fs has total power N0 · fs.
        c = 10 ** (level_dbfs / 10)
        n0 = c / (10 ** (cn_db / 10) * 9e3)
        x = x + complex_noise(rng, n0 * FS, n)
    return x


def _audio_tail(audio):
    return audio[int(SKIP_S * AFS):]


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_sinad_of_a_30_percent_station_at_60_db_cn_with_the_default_chain(path, rng):
    # bench test signal 1 kHz at 30 % modulation (common practice)
    x = _station(0.3, 0.3, cn_db=60.0, rng=rng)
    audio, rx = run_receiver(design_chain("medium"), INFO, TUNE, x, path=path)
    assert len(audio) == int(0.3 * AFS)
    s = sinad_db(_audio_tail(audio), AFS, FM)
    assert s >= 45.0, s   # issue 3 requirement


def test_sinad_falls_with_carrier_to_noise(rng):
    d = design_chain("medium")
    hi = sinad_db(_audio_tail(run_receiver(d, INFO, TUNE, _station(0.3, 0.3, cn_db=50.0, rng=rng))[0]), AFS, FM)
    lo = sinad_db(_audio_tail(run_receiver(d, INFO, TUNE, _station(0.3, 0.3, cn_db=30.0, rng=rng))[0]), AFS, FM)
    # above threshold the envelope detector is linear in noise: 20 dB less C/N, about 20 dB less SINAD
    # source: AM detection above threshold, Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2 (from
    # memory) (figure of merit m²/(2+m²))
    assert hi - lo == pytest.approx(20.0, abs=2.0)


@pytest.fixture
def rng():
    return np.random.default_rng(20240603)


def _chain(detector, agc=False):
    return design_chain({"preselector": {"kind": "none"}, "agc": {"enabled": agc}, "detector": detector})


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_ideal_envelope_detector_thd_at_80_percent_depth_is_below_1_percent(path):
    x = _station(0.8, 0.2)
    audio, _ = run_receiver(_chain({"kind": "envelope"}), INFO, TUNE, x, path=path)
    assert thd(_audio_tail(audio), AFS, FM) <= 0.01   # issue 3 requirement (ideal |u| of a linear IF)


def test_diode_detector_rc_above_the_diagonal_clipping_limit_clips_and_warns():
    m = 0.8
    # source: diagonal clipping, Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2 (from memory)
    limit = math.sqrt(1 - m * m) / (2 * math.pi * FM * m)
    assert diagonal_clipping_limit_s(m, FM) == pytest.approx(limit, rel=1e-12)
    assert limit == pytest.approx(119.4e-6, rel=1e-3)
    rc_us = 2 * limit * 1e6
    audio, rx = run_receiver(_chain({"kind": "diode", "rc_us": rc_us}), INFO, TUNE, _station(m, 0.2))
    assert thd(_audio_tail(audio), AFS, FM) > 0.05
    assert any("diagonal-clipping" in w for w in rx.warnings), rx.warnings


def test_diode_detector_rc_well_below_the_limit_stays_clean():
    m = 0.8
    # the warning judges RC against the audio bandwidth (4.5 kHz), whose limit is sqrt(1−m²)/(2π·4.5k·m) ≈ 26.5 µs
    rc_us = 0.5 * math.sqrt(1 - m * m) / (2 * math.pi * 4500.0 * m) * 1e6
    # 0.6 s: the summary's depth estimate (90th percentile of 50 ms windows) then ignores the start-up window
    audio, rx = run_receiver(_chain({"kind": "diode", "rc_us": rc_us}), INFO, TUNE, _station(m, 0.6))
    assert thd(_audio_tail(audio), AFS, FM) <= 0.01
    assert not any("diagonal-clipping" in w for w in rx.warnings), rx.warnings


def test_diode_clipping_grows_with_rc():
    m = 0.8
    limit_us = math.sqrt(1 - m * m) / (2 * math.pi * FM * m) * 1e6   # source: diagonal clipping (same source)
    values = []
    for factor in (0.9, 2.0, 4.0):
        audio, _ = run_receiver(_chain({"kind": "diode", "rc_us": factor * limit_us}), INFO, TUNE, _station(m, 0.2))
        values.append(thd(_audio_tail(audio), AFS, FM))
    # just inside the limit the capacitor still follows the envelope; beyond it clipping grows with RC
    assert values[0] < 0.01 < 0.05 < values[1] < values[2]


def test_synchronous_detector_recovers_the_tone(rng):
    x = _station(0.8, 0.3, cn_db=60.0, rng=rng)
    audio, _ = run_receiver(_chain({"kind": "synchronous"}), INFO, TUNE, x)
    tail = audio[int(0.2 * AFS):]
    assert thd(tail, AFS, FM) <= 0.01
    assert sinad_db(tail, AFS, FM) >= 40.0
