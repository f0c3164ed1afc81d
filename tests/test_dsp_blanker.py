"""The noise blanker stage on its own: detection, the AR fill, block invariance, long runs left alone."""

from __future__ import annotations

import numpy as np
import pytest

from sdrx.chain.spec import BlankerSpec
from sdrx.dsp.blanker import AR_ORDER, NoiseBlanker

from helpers_rx import feed_blocks

FS = 240e3
ON = BlankerSpec(enabled=True)


@pytest.fixture
def rng():
    return np.random.default_rng(20260110)


def _stations(n, rng, k=3):
    """k carriers at random offsets and phases across the band (a wideband capture), plus a little noise."""
    t = np.arange(n)
    f = rng.uniform(-0.45, 0.45, k)
    a = rng.uniform(0.05, 0.3, k)
    x = sum(a[i] * np.exp(1j * (2 * np.pi * f[i] * t + rng.uniform(0, 2 * np.pi))) for i in range(k))
    return x + 1e-6 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def _blank(x, spec=ON, block=None, first_sample=0):
    nb = NoiseBlanker(spec, FS, first_sample)
    return feed_blocks(nb, x, block), nb


def test_pulses_are_found_counted_and_filled_as_the_stations_would_have_run_on(rng):
    n = 60000
    clean = _stations(n, rng)
    x = clean.copy()
    pos = np.array([5000, 17000, 29000, 41000, 53000])
    x[pos] += 30.0 * np.exp(2j * np.pi * rng.random(len(pos)))        # +40 dB impulses
    y, nb = _blank(x)
    assert len(y) == n
    assert nb.pulses == len(pos) and nb.not_blanked == 0
    half = int(round(ON.width_us * 1e-6 * FS / 2))
    assert nb.blanked == len(pos) * (2 * half + 1)
    gap = np.zeros(n, bool)
    for p in pos:
        gap[p - half:p + half + 1] = True
    # every sample outside the gaps passes untouched
    assert np.array_equal(y[~gap], x[~gap])
    # a sum of k sinusoids is an AR(k) process exactly (physical identity: each is the root of a
    # first-order recursion), so an AR(32) model fills the gaps to the noise floor ...
    err = np.max(np.abs(y[gap] - clean[gap]))
    assert err < 1e-4, err
    # ... where a straight line between the gaps' neighbours misses the turning stations by their size
    lin = x.copy()
    for p in pos:
        s, e = p - half - 1, p + half + 1
        lin[s + 1:e] = np.interp(np.arange(s + 1, e), [s, e], [x[s].real, x[e].real]) + 1j * np.interp(
            np.arange(s + 1, e), [s, e], [x[s].imag, x[e].imag])
    assert np.max(np.abs(lin[gap] - clean[gap])) > 100 * err


@pytest.mark.parametrize("block", [1, 7919, 10 ** 6])
def test_blocks_of_1_a_prime_and_more_than_the_signal_give_identical_output(rng, block):
    n = 30000 if block == 1 else 90000
    x = _stations(n, rng).astype(np.complex64)
    pos = rng.integers(0, n, 12)
    x[pos] += 20.0
    whole, nb1 = _blank(x)
    split, nb2 = _blank(x, block=block)
    assert np.array_equal(whole, split)
    assert (nb1.pulses, nb1.blanked) == (nb2.pulses, nb2.blanked)
    assert whole.dtype == np.complex64


def test_without_pulses_the_signal_passes_bit_for_bit(rng):
    x = _stations(50000, rng)
    y, nb = _blank(x)
    assert np.array_equal(y, x) and nb.pulses == 0


def test_a_signal_coming_up_is_no_impulse(rng):
    # a carrier switching on 30 dB up in the middle of a level segment stays over the threshold for far
    # longer than any pulse: it is left alone and counted apart, never blanked away
    n = 20000
    x = _stations(n, rng, k=1) * 0.01
    x[10280:] += 3.0 * np.exp(2j * np.pi * 0.1 * np.arange(n - 10280))   # 40 samples before its segment ends
    y, nb = _blank(x)
    assert np.array_equal(y, x)
    assert nb.pulses == 0 and nb.not_blanked >= 1


def test_real_captures_are_filled_as_well(rng):
    n = 40000
    t = np.arange(n)
    clean = 0.2 * np.cos(2 * np.pi * 0.21 * t) + 0.1 * np.cos(2 * np.pi * 0.33 * t + 1.0)
    x = clean.copy()
    x[[9000, 27000]] += [-15.0, 15.0]
    y, nb = _blank(x)
    assert nb.pulses == 2
    assert np.max(np.abs(y - clean)) < 1e-6


def test_an_excerpt_finds_the_same_pulses_on_the_capture_grid(rng):
    # level segments lie on the whole capture's grid: an excerpt starting part-way into a segment
    # blanks the pulses after its first segment exactly as the whole run did
    n = 60000
    x = _stations(n, rng)
    x[[20000, 40000]] += 25.0
    whole, _ = _blank(x)
    start = 12345
    part, nb = _blank(x[start:], first_sample=start)
    assert nb.pulses == 2
    seg = int(round(ON.level_ms * 1e-3 * FS))
    k = (start // seg + 1) * seg - start + AR_ORDER
    assert np.array_equal(part[k:], whole[start + k:])
