"""AGC through the whole Receiver: range, attack, release and hang, measured on the running chain.

The gain trace is read by wrapping the receiver's AGC (``rx.backend.agc.process``
returns the total gain in dB per channel-rate sample); levels are stepped in
the capture itself. Expected times come from the first-order loop the spec
describes (gain error decays as exp(−t/τ), τ = attack_ms or release_ms).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.chain import design_chain
from sdrx.receiver import Receiver

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import am_station, carrier, iq_info, run_receiver, sine_fit  # noqa: E402

FS = 240e3
CENTER = 1.0e6
TUNE = 1.0e6
INFO = iq_info(FS, CENTER)


def _spy_gain(rx):
    """Record the AGC's per-sample gain (dB) as the receiver runs."""
    trace = []
    rx.backend.agc.trace = trace   # the AGC keeps each block's total gain (dB) in this list
    return trace


def _stepped_carrier(levels_s):
    """Unmodulated carrier at TUNE, phase-continuous, with a level per (level_dbfs, seconds) piece."""
    parts, start = [], 0
    for level, sec in levels_s:
        n = int(round(sec * FS))
        parts.append(carrier(TUNE, level, FS, CENTER, n, start=start))
        start += n
    return np.concatenate(parts)


def _gain_trace(design, x, block=24000):
    rx = Receiver(design, INFO, TUNE, path="fast")
    trace = _spy_gain(rx)
    for i in range(0, len(x), block):
        rx.process(np.asarray(x[i:i + block], np.complex64))
    rx.flush()
    n_ch = int(len(x) * rx.fs_ch / FS) - int(0.002 * rx.fs_ch)   # leave out the zero-padded flush
    return np.concatenate(trace)[:n_ch], rx.fs_ch


def test_settled_audio_level_within_3_db_over_a_60_db_carrier_range():
    # release shortened so that the weakest carrier settles within the run; the range is what is tested
    d = design_chain({"agc": {"release_ms": 40, "attack_ms": 5}})
    n = int(0.35 * FS)
    amps = {}
    for level in (-10.0, -20.0, -30.0, -40.0, -50.0, -60.0, -70.0):
        x = am_station(TUNE, level, 0.3, 1000.0, FS, CENTER, n)   # source: 1 kHz at 30 % — common practice
        audio, rx = run_receiver(d, INFO, TUNE, x)
        seg = audio[int(0.25 * 48000):int(0.35 * 48000)]
        amps[level] = 20 * math.log10(sine_fit(seg, 48000.0, 1000.0)[0])
    ref = amps[-40.0]
    for level, a in amps.items():
        assert a == pytest.approx(ref, abs=3.0), (level, a, ref)   # issue 3: settled audio within ±3 dB over 60 dB


def test_attack_reaches_within_2_db_of_the_final_gain_in_3_attack_times():
    attack_ms = 5.0
    d = design_chain({"agc": {"attack_ms": attack_ms, "release_ms": 300}})
    t_step = 0.08
    x = _stepped_carrier([(-50.0, t_step), (-30.0, 0.06)])
    g, fs_ch = _gain_trace(d, x)
    k = int(round(t_step * fs_ch))
    before = g[k - 10]
    assert np.ptp(g[k - int(0.01 * fs_ch):k - 5]) < 0.05     # settled before the step
    final = before - 20.0                                    # linear chain: 20 dB more carrier, 20 dB less gain
    assert g[-int(0.005 * fs_ch):].mean() == pytest.approx(final, abs=0.1)
    within = np.nonzero(np.abs(g[k:] - final) <= 2.0)[0][0] / fs_ch
    assert within <= 3 * attack_ms * 1e-3                    # issue 3 requirement
    # first-order loop: 20·exp(−t/τ) = 2 at t = τ·ln 10 (11.5 ms for τ = 5 ms)
    assert within == pytest.approx(attack_ms * 1e-3 * math.log(10.0), rel=0.25)


@pytest.mark.parametrize("release_ms", [300.0, 100.0])
def test_release_time_constant_follows_release_ms(release_ms):
    d = design_chain({"agc": {"attack_ms": 5, "release_ms": release_ms}})
    t_step = 0.08
    after = 3.5 * release_ms * 1e-3
    x = _stepped_carrier([(-30.0, t_step), (-50.0, after)])
    g, fs_ch = _gain_trace(d, x)
    k = int(round(t_step * fs_ch))
    final = g[k - 10] + 20.0
    deficit = final - g[k:]
    t = np.arange(len(deficit)) / fs_ch
    use = (deficit < 16.0) & (deficit > 1.0)
    slope, _ = np.polyfit(t[use], np.log(deficit[use]), 1)
    tau = -1.0 / slope
    assert tau == pytest.approx(release_ms * 1e-3, rel=0.2)   # issue 3: release follows release_ms within 20 %


def test_hang_holds_the_gain_before_release():
    hang_ms = 100.0
    d = design_chain({"agc": {"attack_ms": 5, "release_ms": 100, "hang_ms": hang_ms}})
    t_step = 0.08
    x = _stepped_carrier([(-30.0, t_step), (-50.0, 0.25)])
    g, fs_ch = _gain_trace(d, x)
    k = int(round(t_step * fs_ch))
    before = g[k - 10]
    held = g[k:k + int(0.9 * hang_ms * 1e-3 * fs_ch)]
    assert np.max(np.abs(held - before)) < 0.05
    assert g[k + int(2 * hang_ms * 1e-3 * fs_ch)] > before + 5.0


def test_held_agc_keeps_its_gain_and_the_level_reading():
    d = design_chain("medium")
    x = _stepped_carrier([(-30.0, 0.05), (-50.0, 0.05)])
    rx = Receiver(d, INFO, TUNE, path="fast", agc_hold_gain_db=10.0)
    trace = _spy_gain(rx)
    rx.process(np.asarray(x, np.complex64))
    rx.flush()
    g = np.concatenate(trace)
    assert np.ptp(g) == 0.0
    assert g[0] == pytest.approx(10.0 + sum(st.gain_db for st in d.stages if not st.agc))
    lv = rx.carrier_levels_dbfs(0.0)
    assert lv[1] == pytest.approx(-30.0, abs=0.1) and lv[7] == pytest.approx(-50.0, abs=0.1)


def test_excerpt_settles_to_the_whole_run_when_it_starts_between_control_intervals():
    # An excerpt starting 30 000 channel samples in (not a multiple of the 64-sample control interval) must
    # settle to the same audio as the whole run over the same span: the AGC's steady state on a modulated
    # carrier depends on where its intervals fall on the modulation, so they stay on the capture's grid.
    # (Before, the excerpt's AGC kept a different gain for good: 0.2 dB louder, 33 dB SNR against the run.)
    # common practice: an excerpt of a recording plays as that span of the whole
    fs, tune = 240e3, 1000e3
    info = iq_info(fs, tune)
    d = design_chain("medium")
    x = am_station(tune, -30.0, 0.5, 1000.0, fs, tune, int(0.7 * fs))
    first = 75000                                # 0.3125 s: channel sample 30 000 = 468.75 intervals
    whole, _ = run_receiver(d, info, tune, x)
    part, _ = run_receiver(d, info, tune, x[first:], first_sample=first)
    a0 = first * 48000 // int(fs)                # audio sample of the excerpt's start (exact here)
    ref = whole[a0:a0 + len(part)]
    s = slice(int(0.15 * 48000), len(part) - 200)   # after the excerpt's start transient
    snr_db = 10 * math.log10(np.sum(ref[s] ** 2) / np.sum((part[s] - ref[s]) ** 2))
    assert snr_db > 80.0


@pytest.mark.parametrize("block", [1000, 7919])
def test_agc_grid_offset_is_block_invariant(block):
    from sdrx.chain.spec import AgcSpec
    from sdrx.dsp.agc import Agc

    rng = np.random.default_rng(3)
    u = (0.01 * (1 + 0.5 * np.cos(2 * np.pi * np.arange(20000) / 96.0))
         + 1e-4 * rng.standard_normal(20000)).astype(complex)
    one = Agc(AgcSpec(), 96000.0, 0.0, 0.0, grid_offset=37).process(u)[0]
    agc = Agc(AgcSpec(), 96000.0, 0.0, 0.0, grid_offset=37)
    many = np.concatenate([agc.process(u[i:i + block])[0] for i in range(0, len(u), block)])
    np.testing.assert_array_equal(many, one)
