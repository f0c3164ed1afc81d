"""Synchronous detection of one sideband, and the carrier loop's lock and offset in the summary.

A station 10 dB stronger 9 kHz above spills its lower sideband into the wanted channel's upper half;
the wanted station's lower sideband alone carries the whole programme and is clear of it. Speech is
scored against the synthesizer's truth (helpers_score) with the AGC held (helpers_programme: the
present AGC rides speech modulation and would by itself limit the score to about 30 dB).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from sdrx.dsp.detectors import SIDEBAND_REJECTION_DB, SIDEBAND_RIPPLE_DB, sideband_sos

from helpers_programme import make_capture, receive_audio, receive_scored, speech

TUNE = 1.03e6
LEVEL = -30.0


def _sync(sideband, **extra):
    return {"detector": {"kind": "synchronous", "sideband": sideband}, **extra}


@pytest.fixture(scope="module")
def crowded(tmp_path_factory):
    return make_capture(tmp_path_factory.mktemp("adj"),
                        [speech("Wanted", TUNE, LEVEL), speech("Above", TUNE + 9e3, LEVEL + 10.0)], seconds=3.0)


def test_lower_sideband_is_12_db_better_than_both_with_a_strong_station_above(crowded):
    both, _, _ = receive_scored(_sync("both"), crowded, TUNE)
    lower, _, rx = receive_scored(_sync("lower"), crowded, TUNE)
    assert lower >= both + 12.0, (both, lower)
    loop = rx.stats()["carrier_loop"]
    assert loop["locked"] and loop["sideband"] == "lower"


@pytest.mark.parametrize("injection", ["high", "low"])
def test_the_loop_reports_lock_and_the_carrier_offset_in_rf_terms(tmp_path, injection):
    # a carrier 6.5 Hz high (a transmitter off its frequency; the RF sense does not depend on the LO
    # side, though a high-side LO inverts the IF envelope)
    cap = make_capture(tmp_path, [speech("Wanted", TUNE, LEVEL, frequency_error=6.5)], seconds=1.0)
    _, rx = receive_audio({"injection": injection, **_sync("lower")}, cap, TUNE)
    loop = rx.stats()["carrier_loop"]
    assert loop["locked"] and loop["lock_fraction"] > 0.95
    assert loop["offset_hz"] == pytest.approx(6.5, abs=0.2)


def test_no_carrier_no_lock(tmp_path):
    # an empty channel: the loop chases noise and says so
    cap = make_capture(tmp_path, [speech("Far", TUNE + 60e3, LEVEL)], seconds=0.5)
    _, rx = receive_audio(_sync("both"), cap, TUNE, level_dbfs=-100.0)
    assert rx.stats()["carrier_loop"]["locked"] is False


def test_sideband_filter_passes_one_side_and_rejects_the_other():
    # consistency check against scipy's elliptic design: pass band within its ripple from 80 Hz to
    # 4.5 kHz on the chosen side, the other side (from 80 Hz on) down by the design's rejection
    fs = 96000.0
    sos = sideband_sos(fs, 80.0, 4500.0, -1)
    f = np.linspace(100.0, 4400.0, 300)
    _, h_pass = signal.sosfreqz(sos, worN=-f, fs=fs, whole=True)
    _, h_stop = signal.sosfreqz(sos, worN=np.linspace(100.0, 20e3, 500), fs=fs, whole=True)
    db_pass = 20 * np.log10(np.abs(h_pass))
    assert db_pass.max() <= 1e-6 and db_pass.min() >= -SIDEBAND_RIPPLE_DB - 1e-6
    assert 20 * np.log10(np.abs(h_stop)).max() <= -SIDEBAND_REJECTION_DB + 1e-6


@pytest.mark.parametrize("sideband", ["lower", "upper"])
def test_one_sideband_starts_without_a_step(sideband):
    # a carrier alone from the first sample: the loop starts on its phase and the sideband filter in
    # its steady state, so the detected output is constant from sample 0 (no start-up transient)
    from sdrx.dsp.detectors import SynchronousDetector

    u = 0.5 * np.exp(1j * 2.1) * np.ones(4800)
    y = SynchronousDetector(96000.0, sideband=sideband).process(u)
    assert np.ptp(y) < 1e-12
