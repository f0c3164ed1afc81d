"""Time alignment of outputs (sdrx.compare.align)."""

import numpy as np
import pytest
from scipy import signal

from sdrx.compare.align import align, estimate_lag

FS = 48000.0


@pytest.fixture
def rng():
    return np.random.default_rng(7)


def _xcorr_peak_lag(a, b):
    a = a - a.mean()
    b = b - b.mean()
    r = signal.correlate(a, b, mode="full")
    lags = signal.correlation_lags(a.size, b.size, mode="full")
    return int(lags[np.argmax(r)])


def test_filters_of_different_group_delay_align_to_zero_lag(rng):
    programme = signal.sosfilt(signal.butter(4, 3000, fs=FS, output="sos"), rng.standard_normal(int(2 * FS)))
    # three "receivers": Butterworth low-passes of different order and width (different group delays)
    first = signal.sosfilt(signal.butter(2, 4500, fs=FS, output="sos"), programme)
    outs = [
        first,
        signal.sosfilt(signal.butter(8, 2500, fs=FS, output="sos"), programme),
        np.concatenate([np.zeros(137), first[:-137]]),  # the first, 137 samples later
    ]
    al = align(outs, FS)
    assert al.lags[2] == 137
    cut = [al.cut(i, x) for i, x in enumerate(outs)]
    assert len({c.size for c in cut}) == 1
    for c in cut[1:]:
        # after alignment the cross-correlation peaks at zero lag, within one sample
        assert abs(_xcorr_peak_lag(c, cut[0])) <= 1


def test_lag_of_butterworth_matches_its_group_delay(rng):
    # source: Butterworth group delay at DC, tau(0) = 1/sin(pi/(2n)) / wc = sum_k -Re(p_k)/|p_k|^2 over the
    # Butterworth poles (Williams & Taylor, Electronic Filter Design Handbook, 4th ed. (2006), ch. 2 (from
    # memory)); a digital
    # filter at fc << fs approximates the analog prototype
    n, fc = 5, 1500.0
    x = signal.sosfilt(signal.butter(4, 400, fs=FS, output="sos"), rng.standard_normal(int(2 * FS)))
    y = signal.sosfilt(signal.butter(n, fc, fs=FS, output="sos"), x)
    tau = 1 / np.sin(np.pi / (2 * n)) / (2 * np.pi * fc)
    assert abs(estimate_lag(y, x, 2000) - tau * FS) <= 2.0


def test_negative_lag_cuts_the_reference(rng):
    x = rng.standard_normal(9000)
    early = x[25:]
    al = align([x[:-25], early], FS)
    assert al.lags == (0, -25)
    assert al.starts == (25, 0)
    np.testing.assert_array_equal(al.cut(0, x[:-25]), al.cut(1, early))


def test_expected_delays_keep_a_tone_from_locking_a_period_off(rng):
    # a 1 kHz tone (48 samples a period) plus a little noise, the second copy 13 samples late
    n = int(FS)
    t = np.arange(n + 13) / FS
    x = np.cos(2 * np.pi * 1000 * t) + 0.05 * rng.standard_normal(t.size)
    ref, late = x[13:], x[:-13]
    # the designs say the second chain is 12.6 samples slower; the search stays within 0.25 ms of that
    al = align([ref, late], FS, expected_s=[0.0, 12.6 / FS])
    assert al.lags == (0, 13)
    # why the window matters: one tone period away the cross-correlation has another peak
    assert estimate_lag(late, ref, 10, centre=13 - 48) == 13 - 48
