"""The noise blanker in the receiver: speech under impulse noise, both paths, the summary's pulse count.

Speech is scored against the synthesizer's truth (helpers_score). The AGC is held (helpers_programme):
the present AGC rides speech modulation and would by itself limit the score to about 30 dB.
Captures are 240 kS/s, where each of the synthesizer's single-sample impulses at +30 dB over the
carrier carries 20 dB more energy into the 9 kHz channel than at 2.4 MS/s, so they wreck the speech.
"""

from __future__ import annotations

import json

import pytest

from helpers_programme import make_capture, receive_audio, receive_scored, speech

TUNE = 1.03e6
LEVEL = -30.0
ON = {"blanker": {"enabled": True}}


@pytest.fixture(scope="module")
def pulsed(tmp_path_factory):
    # 30 pulses/s at +30 dB over the wanted carrier (the impulse case)
    return make_capture(tmp_path_factory.mktemp("nb"), [speech("Wanted", TUNE, LEVEL)], seconds=3.0,
                        impulse={"rate_per_s": 30, "level_dbfs": LEVEL + 30.0})


def test_impulses_wreck_the_speech_without_the_blanker(pulsed):
    before, _, _ = receive_scored("medium", pulsed, TUNE)
    assert before <= 10.0, before


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_blanker_takes_speech_to_over_35_db(pulsed, path):
    after, _, rx = receive_scored(ON, pulsed, TUNE, path=path)
    assert after >= 35.0, after
    # each impulse found once: the truth counts them (two closer than the blanker's model order
    # would merge into one gap; at 30/s over 3 s that hardly ever happens)
    n_true = pulsed[2]["impulse_noise"]["count"]
    st = rx.stats()["blanker"]
    assert n_true - 2 <= st["pulses"] <= n_true, (st, n_true)
    assert st["not_blanked"] == 0


def test_blanker_leaves_a_clean_station_as_it_was(tmp_path):
    clean = make_capture(tmp_path, [speech("Wanted", TUNE, LEVEL)], seconds=1.5)
    a_off, _ = receive_audio("medium", clean, TUNE)
    a_on, rx = receive_audio(ON, clean, TUNE)
    assert rx.stats()["blanker"]["pulses"] == 0
    assert (a_on == a_off).all()


def test_summary_counts_the_pulses(pulsed, tmp_path):
    from sdrx import receive

    spec = tmp_path / "nb.toml"
    spec.write_text('[blanker]\nenabled = true\nthreshold_db = 20\nwidth_us = 15\n')
    # the capture file written by the fixture, read back through receive()
    cap = next(iter(pulsed[1].path.parent.glob("*.sigmf-meta")))
    s = receive(cap, TUNE, str(spec), tmp_path / "o.wav", summary_path=tmp_path / "o.json", duration_s=1.0)
    on_disk = json.loads((tmp_path / "o.json").read_text())
    assert on_disk["blanker"] == s["blanker"]
    assert s["blanker"]["pulses"] > 15 and s["blanker"]["blanked_s"] > 0
    # off by default: no blanker entry at all
    s2 = receive(cap, TUNE, "medium", tmp_path / "p.wav", duration_s=0.2)
    assert "blanker" not in s2
