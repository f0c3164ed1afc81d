"""The heterodyne notch in the receiver: a whistle under speech, and speech and music left alone.

A carrier 1.5 kHz above the wanted one, 10 dB under it, beats into a 1.5 kHz whistle (and, through the
envelope detector, its harmonics at 3 and 4.5 kHz). Speech is scored against the synthesizer's truth
(helpers_score) with the AGC held (helpers_programme: the present AGC rides speech modulation and
would by itself limit the score to about 30 dB).
"""

from __future__ import annotations

import numpy as np
import pytest

from helpers_programme import carrier, make_capture, receive_audio, receive_scored, speech

TUNE = 1.03e6
LEVEL = -30.0
AUTO = {"notch": {"auto": True}}


@pytest.fixture(scope="module")
def whistle(tmp_path_factory):
    return make_capture(tmp_path_factory.mktemp("whistle"),
                        [speech("Wanted", TUNE, LEVEL), carrier("Beat", TUNE + 1500.0, LEVEL - 10.0)], seconds=4.0)


def test_the_whistle_buries_the_speech_without_a_notch(whistle):
    snr, _, _ = receive_scored("medium", whistle, TUNE)
    assert snr < 0.0, snr


def test_auto_notch_removes_the_whistle_to_30_db(whistle):
    snr, _, rx = receive_scored(AUTO, whistle, TUNE)
    assert snr >= 30.0, snr
    tones = rx.stats()["notch"]["tones"]
    found = sorted(t["freq_hz"] for t in tones)
    # the beat and its harmonics, each from the start of the capture
    for f in (1500.0, 3000.0, 4500.0):
        assert min(abs(g - f) for g in found) < 0.5, (f, found)
    assert all(t["start_s"] == 0.0 for t in tones)


def test_fixed_notches_do_the_same(whistle):
    snr, _, rx = receive_scored({"notch": {"frequencies": ["1.5k", "3k", "4.5k"]}}, whistle, TUNE)
    assert snr >= 30.0, snr
    assert rx.stats()["notch"]["frequencies_hz"] == [1500.0, 3000.0, 4500.0]


@pytest.mark.parametrize("programme", ["speech", "music"])
def test_auto_notch_leaves_a_clean_station_untouched(tmp_path, programme):
    # a clean station's audio is not degraded below 50 dB by the auto notch: here not at all, as
    # neither the speech nor the music programme holds a tone steady (in frequency and level) for 2 s
    st = speech("Wanted", TUNE, LEVEL)
    st["program"] = {"kind": programme}
    clean = make_capture(tmp_path, [st], seconds=4.0)
    plain, _ = receive_audio("medium", clean, TUNE)
    notched, rx = receive_audio(AUTO, clean, TUNE)
    assert rx.stats()["notch"]["tones"] == []
    diff = np.sum((notched - plain) ** 2)
    assert diff == 0.0 or 10 * np.log10(np.sum(plain ** 2) / diff) >= 50.0
