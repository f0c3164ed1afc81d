"""Streaming rational resampler (polyphase FIR), block-invariant.

Output sample m sits at input time m·down/up. With the FIR h at the
upsampled rate, y[m] = Σ_j h[(m·down mod up) + j·up] · x[m·down // up − j].
The filter is linear phase with a delay that is a whole number of both input
and output samples, so the caller can remove it exactly.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
from scipy import signal

__all__ = ["RationalResampler"]


class RationalResampler:
    """Resample by up/down with a Kaiser-window FIR.

    Parameters
    ----------
    fs_in, fs_out : float
        Rates, Hz; their ratio must be a small fraction.
    taps_per_phase : int
        About this many taps per polyphase branch.

    Examples
    --------
    >>> import numpy as np
    >>> r = RationalResampler(96000.0, 48000.0)
    >>> x = np.sin(2 * np.pi * 1000 * np.arange(9600) / 96000)
    >>> y = np.concatenate([r.process(x), r.process(np.zeros(r.delay_in))])[r.delay_out:][:4800]
    >>> bool(np.allclose(y[100:-100], np.sin(2 * np.pi * 1000 * np.arange(100, 4700) / 48000), atol=1e-3))
    True
    """

    def __init__(self, fs_in: float, fs_out: float, taps_per_phase: int = 48):
        ratio = (Fraction(fs_out).limit_denominator(10000) / Fraction(fs_in).limit_denominator(10000)).limit_denominator(1000)
        self.up, self.down = ratio.numerator, ratio.denominator
        up, down = self.up, self.down
        c = max(1, math.ceil(taps_per_phase / (2 * down)))
        half = up * down * c                  # delay in upsampled samples
        n_taps = 2 * half + 1
        cutoff = 0.45 * min(fs_in, fs_out)
        h = signal.firwin(n_taps, cutoff, window=("kaiser", 8.0), fs=fs_in * up) * up
        K = math.ceil(n_taps / up)
        h = np.concatenate([h, np.zeros(K * up - n_taps)])
        self.poly = h.reshape(K, up).T.copy()  # poly[phase, j] = h[phase + j·up]
        self.K = K
        self.delay_out = half // down          # = up·c output samples
        self.delay_in = half // up             # = down·c input samples
        self._hist = np.zeros(K - 1)           # last K−1 input samples (state)
        self._n_in = 0                         # input samples consumed so far
        self._m = 0                            # next output index

    def process(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        buf = np.concatenate([self._hist, x])
        n_total = self._n_in + len(x)
        # outputs whose newest input index m·down//up is available
        m_end = (n_total * self.up + self.down - 1) // self.down  # m with m·down < n_total·up
        m = np.arange(self._m, m_end)
        if len(m) and self.up == 1:
            # plain decimation: one valid convolution, every down-th sample
            first = int(m[0]) * self.down - (self._n_in - (self.K - 1))
            conv = np.convolve(buf, self.poly[0], mode="valid")
            y = conv[first - (self.K - 1)::self.down][:len(m)]
        elif len(m):
            t = m * self.down
            base = t // self.up - (self._n_in - (self.K - 1))  # index into buf
            phase = t % self.up
            idx = base[:, None] - np.arange(self.K)[None, :]
            y = np.sum(buf[idx] * self.poly[phase], axis=1)
        else:
            y = np.zeros(0)
        self._m = m_end
        self._n_in = n_total
        self._hist = buf[len(buf) - (self.K - 1):] if self.K > 1 else np.zeros(0)
        return y
