"""Programme material through the default AGC of every preset, on both paths.

What a listener A/B-ing filters hears first is the AGC: a gain that rides the
modulation (pumping), a level that swings with a fade, a thump at the start.
These tests hold every preset, and a spec that leaves ``[agc]`` out, to the
figures a carrier AGC must reach:

- steady carrier, 80 % speech-like modulation: AGC gain within 0.2 dB
  (1st to 99th percentile after 0.5 s);
- 20 dB fade with a 4 s period, 1 kHz tone at 30 % (the bench test signal,
  common practice): output tone level within 2 dB over 250 ms windows, worst
  window SINAD ≥ 35 dB (IEEE Std 1241 sine-fit SINAD);
- 60 dB step down and 20 dB step up: output back within 3 dB in ≤ 2 s and
  ≤ 0.5 s;
- a speech programme between equal-level stations at ±10 kHz: programme SNR
  ≥ 50 dB (narrow), ≥ 44 dB (medium), scored against the synthesizer's truth
  in the programme's 4.5 kHz band (tests/helpers_score.py);
- a clean start: the first 50 ms peak at most 1 dB above the steady
  programme peak, also for an excerpt.
"""

from __future__ import annotations

import math
import tomllib

import numpy as np
import pytest
from scipy import signal

from sdrx.chain import design_chain
from sdrx.chain.spec import PRESET_DIR
from sdrx.receiver import Receiver, preroll
from sdrx.synth import make_program, synthesize

from helpers_rx import iq_info, sine_fit, sinad_db
from helpers_score import programme_from_truth, programme_snr_db

FS = 240e3
TUNE = 1.0e6
INFO = iq_info(FS, TUNE)
AFS = 48000.0
PATHS = ("fast", "exact")


def _preset(name: str) -> dict:
    return tomllib.loads((PRESET_DIR / f"{name}.toml").read_text(encoding="utf-8"))


def _without_agc(name: str) -> dict:
    raw = _preset(name)
    raw.pop("agc", None)
    return raw


CHAINS = {"wide": "wide", "medium": "medium", "narrow": "narrow", "narrow, no [agc]": _without_agc("narrow")}


def _run(chain, x, path, first_sample=0, trace=False, block=1 << 16, info=INFO):
    rx = Receiver(design_chain(chain), info, TUNE, path=path, first_sample=first_sample)
    gains = []
    if trace:
        rx.backend.agc.trace = gains
    out = [rx.process(x[i:i + block].astype(np.complex64)) for i in range(0, len(x), block)]
    out.append(rx.flush())
    return np.concatenate(out), rx, (np.concatenate(gains) if trace else None)


def _am(level_db, depth, programme):
    """A(t)·(1 + m·p(t)) at the tune (the capture's centre), level_db in dBFS per sample or a scalar."""
    return 10.0 ** (np.asarray(level_db) / 20.0) * (1.0 + depth * programme) * np.exp(0.7j)


def _speech(seconds, seed=5):
    p = make_program({"kind": "speech"}, 16000.0, seed).read(int(seconds * 16000) + 64)
    return signal.resample_poly(p, int(FS // 16000), 1)[:int(seconds * FS)]


def _tone_levels(y, window_s=0.25, skip_s=1.0):
    """Tone level (dB) and SINAD of the 1 kHz tone in each window."""
    w = int(window_s * AFS)
    levels, sinads = [], []
    for i in range(int(skip_s * AFS), len(y) - w + 1, w):
        seg = y[i:i + w]
        levels.append(20 * math.log10(sine_fit(seg, AFS, 1000.0)[0]))
        sinads.append(sinad_db(seg, AFS, 1000.0))
    return np.array(levels), np.array(sinads)


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name", CHAINS)
def test_gain_holds_still_on_speech(name, path):
    seconds = 3.0
    _, rx, g = _run(CHAINS[name], _am(-30.0, 0.8, _speech(seconds)), path, trace=True)
    settle = int(0.5 * rx.fs_ch)
    g = g[settle:int(seconds * rx.fs_ch)]
    spread = np.percentile(g, 99) - np.percentile(g, 1)
    # the carrier filter leaves the speech 100+ Hz above it: measured 0.0005 dB, limit 0.2 dB (the issue)
    assert spread <= 0.2, spread


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name", CHAINS)
def test_level_follows_a_fade(name, path):
    seconds = 5.0
    t = np.arange(int(seconds * FS)) / FS
    level = -40.0 + 10.0 * np.cos(2 * np.pi * t / 4.0)          # 20 dB fade, 4 s period
    y, _, _ = _run(CHAINS[name], _am(level, 0.3, np.cos(2 * np.pi * 1000.0 * t)), path)
    levels, sinads = _tone_levels(y)
    # a loop lag τ leaves a swing of 2·10 dB·ωτ/√(1 + (ωτ)²), ω = 2π/4 s: 1.4 dB for the 40-50 ms of
    # the carrier filter and the loop; the limits are 2 dB and 35 dB (measured about 40 dB)
    assert np.ptp(levels) <= 2.0, levels
    assert sinads.min() >= 35.0, sinads


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name", CHAINS)
@pytest.mark.parametrize("before, after, limit_s", [(-20.0, -80.0, 2.0), (-40.0, -20.0, 0.5)])
def test_level_recovers_after_a_step(name, path, before, after, limit_s):
    t_step, seconds = 0.6, 1.6 if after > before else 2.8
    t = np.arange(int(seconds * FS)) / FS
    y, _, _ = _run(CHAINS[name], _am(np.where(t < t_step, before, after), 0.3,
                                     np.cos(2 * np.pi * 1000.0 * t)), path)
    w = int(0.02 * AFS)
    lv = np.array([20 * math.log10(sine_fit(y[i:i + w], AFS, 1000.0)[0]) for i in range(0, len(y) - w + 1, w)])
    tt = np.arange(len(lv)) * 0.02
    ref = np.median(lv[(tt > 0.3) & (tt < t_step - 0.05)])
    off = np.nonzero((tt >= t_step) & (np.abs(lv - ref) > 3.0))[0]
    back_s = (tt[off[-1]] + 0.02 - t_step) if len(off) else 0.0
    assert back_s <= limit_s, back_s     # measured 0.14 s (down) and 0.06 s (up)


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name", CHAINS)
@pytest.mark.parametrize("start", [0, 31_337])
def test_output_starts_clean(name, path, start):
    seconds = 1.0
    t = np.arange(int(seconds * FS)) / FS
    x = _am(-30.0, 0.3, np.cos(2 * np.pi * 1000.0 * t)) * np.exp(2j * np.pi * 3.0 * t)   # 3 Hz off tune
    y, _, _ = _run(CHAINS[name], x[start:], path, first_sample=start)
    head = np.max(np.abs(y[:int(0.05 * AFS)]))
    steady = np.max(np.abs(y[int(0.4 * AFS):]))
    # the limit: 1 dB over the steady programme peak (measured within ±0.5 dB)
    assert 20 * math.log10(head / steady) <= 1.0


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name", ["wide", "medium", "narrow"])
def test_output_starts_clean_with_the_carrier_on_an_edge_of_the_carrier_search(name, path):
    """The pre-roll searches the band in tiles of preroll.TILE_HZ from its lower edge; a carrier exactly on
    a tile's edge (here 20 kHz below the centre: -120 kHz + 100 kHz) was missed, and the output started at
    full scale (on a 2.4 MS/s capture centred at 1.2 MHz every carrier on a multiple of 100 kHz is there)."""
    seconds = 0.5
    t = np.arange(int(seconds * FS)) / FS
    assert (-FS / 2 + preroll.TILE_HZ) - (TUNE - (TUNE + 20e3)) == 0.0   # the tune sits on a tile edge
    x = _am(-30.0, 0.3, np.cos(2 * np.pi * 1000.0 * t)) * np.exp(-2j * np.pi * 20e3 * t)
    y, _, _ = _run(name, x, path, info=iq_info(FS, TUNE + 20e3))
    head = np.max(np.abs(y[:int(0.05 * AFS)]))
    steady = np.max(np.abs(y[int(0.3 * AFS):]))
    assert 20 * math.log10(head / steady) <= 1.0   # before the fix all six cases failed (+17 dB on the bench capture)


@pytest.fixture(scope="module")
def crowded(tmp_path_factory):
    """A speech station between two equal-level speech stations 10 kHz either side (synthesized)."""
    d = tmp_path_factory.mktemp("crowded")
    text = """
[capture]
kind = "iq"
rate = 240000
center = 1000000
datatype = "cf32_le"
seconds = 3.5
noise_dbfs_per_hz = -140
seed = 7
"""
    for name, f, pitch in (("Wanted", "1000k", 120), ("Below", "990k", 200), ("Above", "1010k", 150)):
        text += f"""
[[station]]
name = "{name}"
frequency = "{f}"
level_dbfs = -30
depth = 0.8
[station.program]
kind = "speech"
pitch = {pitch}
"""
    (d / "crowded.toml").write_text(text, encoding="utf-8")
    synthesize(d / "crowded.toml", d / "crowded.sigmf-meta")
    return d / "crowded.sigmf-meta"


@pytest.mark.parametrize("path", PATHS)
@pytest.mark.parametrize("name, minimum_db", [("narrow", 50.0), ("medium", 44.0)])
def test_speech_between_equal_neighbours(crowded, name, path, minimum_db):
    from sdrx.capture import open_capture
    from sdrx.run import run_receiver

    reader = open_capture(crowded)
    rx = Receiver(design_chain(name), reader.info, TUNE, path=path)
    out = []
    run_receiver(reader, rx, first=0, count=reader.info.samples, sink=out.append)
    y = np.concatenate(out)
    p = programme_from_truth(crowded.with_name("crowded.truth.json"), "Wanted", AFS, 0.0, len(y) / AFS)
    snr = programme_snr_db(y, p, AFS, band_hz=4500.0)
    # measured 54.5 dB (narrow: the elliptic stage's 60 dB stopband lets the neighbours in at -60 dB)
    # and 47 dB (medium: the neighbours' sidebands on its skirts); the AGC held gives the same
    assert snr >= minimum_db, snr


@pytest.mark.parametrize("path", PATHS)
def test_a_strong_carrier_elsewhere_does_not_click_at_the_start(path):
    # a 0 dBFS carrier 80 kHz away, beyond the channels' reach: switching on at the first sample it would
    # put the channelizer's impulse response into the channel (+6 dB over the programme peak before the
    # pre-roll continued every carrier of the band); now the start is as clean as without it
    seconds = 0.6
    t = np.arange(int(seconds * FS)) / FS
    x = _am(-40.0, 0.3, np.cos(2 * np.pi * 400.0 * t)) + np.exp(2j * np.pi * -80e3 * t)
    y, _, _ = _run("narrow", x, path)
    head = np.max(np.abs(y[:int(0.05 * AFS)]))
    steady = np.max(np.abs(y[int(0.3 * AFS):]))
    assert 20 * math.log10(head / steady) <= 1.0
