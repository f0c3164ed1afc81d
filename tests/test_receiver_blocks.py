"""Block invariance of the whole chain: any block split gives the identical audio (np.array_equal)."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.chain import design_chain

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import am_station, complex_noise, iq_info, run_receiver  # noqa: E402

FS = 240e3
CENTER = 1.0e6
INFO = iq_info(FS, CENTER)


def _capture(seconds=0.12):
    rng = np.random.default_rng(11)
    n = int(seconds * FS)
    x = am_station(1.0e6, -25.0, 0.8, 1000.0, FS, CENTER, n)
    x += am_station(1.01e6, -30.0, 0.5, 2000.0, FS, CENTER, n, phase=0.7)
    x += complex_noise(rng, 1e-6, n)
    return x.astype(np.complex64)


CHAINS = {
    "medium": "medium",
    "narrow": "narrow",
    "diode_hang": {"detector": {"kind": "diode", "rc_us": 60}, "agc": {"hang_ms": 20}},
    "synchronous": {"detector": {"kind": "synchronous"}},
}


@pytest.mark.parametrize("name", list(CHAINS))
@pytest.mark.parametrize("path", ["fast", "exact"])
def test_blocks_of_1000_7919_and_whole_give_identical_audio(name, path):
    d = design_chain(CHAINS[name])
    x = _capture(0.12 if path == "fast" else 0.06)
    whole, _ = run_receiver(d, INFO, 1.0e6, x, path=path)
    assert len(whole) == int(len(x) * 48000 / FS)
    for block in (1000, 7919):
        a, _ = run_receiver(d, INFO, 1.0e6, x, path=path, block=block)
        assert np.array_equal(a, whole), (path, name, block)


def test_block_of_one_sample_at_the_start():
    # the smallest block: one sample at a time for the first 3000 samples, then the rest
    d = design_chain("medium")
    x = _capture(0.05)
    whole, _ = run_receiver(d, INFO, 1.0e6, x)
    from sdrx.receiver import Receiver

    rx = Receiver(d, INFO, 1.0e6)
    parts = [rx.process(x[i:i + 1]) for i in range(3000)]
    parts += [rx.process(x[3000:]), rx.flush()]
    assert np.array_equal(np.concatenate(parts), whole)


def test_stats_do_not_depend_on_blocks():
    d = design_chain("medium")
    x = _capture(0.12)
    _, rx1 = run_receiver(d, INFO, 1.0e6, x)
    _, rx2 = run_receiver(d, INFO, 1.0e6, x, block=7919)
    assert rx1.stats() == rx2.stats()
    assert rx1.warnings == rx2.warnings


STAGES = {
    "blanker": {"blanker": {"enabled": True}},
    "notch_auto": {"notch": {"auto": True, "steady_s": 0.5}},
    "notch_fixed": {"notch": {"frequencies": [1500, 3000]}},
    "sync_lower": {"detector": {"kind": "synchronous", "sideband": "lower"}},
}


@pytest.mark.parametrize("name", list(STAGES))
@pytest.mark.parametrize("path", ["fast", "exact"])
def test_optional_stages_keep_the_audio_independent_of_blocks(name, path):
    # the blanker and the auto notch hold samples back (their look-ahead) and return them at the end
    seconds = 0.9 if path == "fast" else 0.15
    x = _capture(seconds)
    n = len(x)
    x = x + am_station(1.0015e6, -35.0, 0.0, 1000.0, FS, CENTER, n).astype(np.complex64)   # a 1.5 kHz beat
    x[np.arange(3000, n, 23000)] += 0.5                                                   # impulses
    d = design_chain(STAGES[name])
    whole, rx = run_receiver(d, INFO, 1.0e6, x, path=path)
    assert len(whole) == int(n * 48000 / FS)
    for block in (1000, 7919):
        a, rx2 = run_receiver(d, INFO, 1.0e6, x, path=path, block=block)
        assert np.array_equal(a, whole), (path, name, block)
        assert rx2.stats() == rx.stats()
