"""FFT overlap-save channelizer: cut channels out of a wide capture at a low rate.

Each channel is a complex FIR of P+1 taps centred on its frequency, whose
response is a flat window times a response the caller supplies (the
preselector, the mixer factor and the IF stages' smooth remainder, in the
fast path). Segments of N input samples overlap by P; the filtered spectrum
is cut to M bins around the channel and brought back with an M-point inverse
FFT, which decimates by R = N/M. Processing always runs on whole segments
from an internal buffer, so the output does not depend on how the input is
split into blocks.

Notes
-----
Overlap-save: Oppenheim & Schafer, *Discrete-Time Signal Processing*, fast
convolution; frequency-domain decimation by keeping M of N bins.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Callable, Optional, Sequence

import numpy as np
import scipy.fft as sfft
from scipy.signal.windows import tukey

from ..errors import ParameterError
from ..units import format_frequency

__all__ = ["ChannelPlan", "plan_channelizer", "ChannelSpec", "Channelizer", "passband_window"]

TWO_PI = 2.0 * math.pi


@dataclass(frozen=True)
class ChannelPlan:
    """Sizes of an overlap-save channelizer.

    Attributes
    ----------
    fs, fs_ch : float
        Input and output rates, Hz (fs_ch = fs·M/N exactly).
    n_fft, n_out, overlap, hop : int
        N, M, P and L = N − P (input samples).
    ratio : Fraction
        R = N/M = fs/fs_ch.
    f_pass_hz, f_stop_hz : float
        The channel window is flat to f_pass and reaches zero at f_stop.
    """

    fs: float
    fs_ch: float
    n_fft: int
    n_out: int
    overlap: int
    hop: int
    ratio: Fraction
    f_pass_hz: float
    f_stop_hz: float

    @property
    def delay_out(self) -> int:
        """FIR centring delay, in output samples (P / 2R)."""
        return int(Fraction(self.overlap, 2) / self.ratio)

    @property
    def hop_out(self) -> int:
        """Output samples per segment."""
        return int(Fraction(self.hop) / self.ratio)


def plan_channelizer(fs: float, fs_ch: float, *, min_taps_per_ratio: int = 32) -> ChannelPlan:
    """Choose N, M, P for decimating ``fs`` to exactly ``fs_ch``.

    Parameters
    ----------
    fs : float
        Input rate, Hz (rational; integer Hz in practice).
    fs_ch : float
        Output rate, Hz, at most ``fs``.

    Raises
    ------
    ParameterError
        If the ratio fs/fs_ch has no small rational form.

    Examples
    --------
    >>> p = plan_channelizer(2.4e6, 96e3)
    >>> p.n_fft, p.n_out, p.overlap, p.hop_out, p.delay_out
    (12800, 512, 1600, 448, 32)
    """
    if fs_ch > fs:
        raise ParameterError(f"channel rate {format_frequency(fs_ch)} exceeds the input rate {format_frequency(fs)}")
    ratio = (Fraction(fs).limit_denominator(1000) / Fraction(fs_ch).limit_denominator(1000)).limit_denominator(4096)
    p, q = ratio.numerator, ratio.denominator
    if q > 512:
        raise ParameterError(f"sample rate {format_frequency(fs)} has no small ratio to the channel rate {format_frequency(fs_ch)}")
    # P = 2R·m must be an integer: m a multiple of q / gcd(q, 2)
    step = q // math.gcd(q, 2)
    m = step * math.ceil(min_taps_per_ratio / step)
    overlap = int(2 * ratio * m)
    # M a multiple of q, at least 16 m (N >= 8 P), at least 256
    n_out = q * math.ceil(max(16 * m, 256) / q)
    n_fft = int(ratio * n_out)
    hop = n_fft - overlap
    return ChannelPlan(float(fs), float(Fraction(fs).limit_denominator(1000) / ratio), n_fft, n_out, overlap,
                       hop, ratio, 0.36 * fs_ch, 0.5 * fs_ch)


def passband_window(d_hz, f_pass: float, f_stop: float):
    """Flat to f_pass, raised-cosine to zero at f_stop (even in frequency)."""
    a = np.abs(np.asarray(d_hz, dtype=float))
    w = np.zeros(a.shape)
    w[a <= f_pass] = 1.0
    mid = (a > f_pass) & (a < f_stop)
    w[mid] = 0.5 * (1 + np.cos(math.pi * (a[mid] - f_pass) / (f_stop - f_pass)))
    return w


@dataclass(frozen=True)
class ChannelSpec:
    """One channel: centre frequency in the input's frequency axis and its response.

    ``response(d_hz) -> complex`` is evaluated at offsets from the centre
    inside the window; None means 1.
    """

    f_center_hz: float
    response: Optional[Callable] = None
    scale: complex = 1.0


class _ChannelTables:
    """Precomputed per-channel bins, filter values and phase terms."""

    def __init__(self, plan: ChannelPlan, is_complex: bool, ch: ChannelSpec):
        N, M, P = plan.n_fft, plan.n_out, plan.overlap
        fs = plan.fs
        self.k_c = int(round(ch.f_center_hz * N / fs))
        self.eps = (ch.f_center_hz - self.k_c * fs / N) / fs  # residual, cycles per input sample
        # two-sided prototype g from the desired response G(d) on the N-point grid
        d = np.fft.fftfreq(N, 1.0 / fs)
        win = passband_window(d, plan.f_pass_hz, plan.f_stop_hz)
        G = win.astype(complex)
        inside = win > 0
        if ch.response is not None:
            G[inside] = G[inside] * ch.response(d[inside])
        g_circ = np.fft.ifft(G)
        n = np.arange(-P // 2, P // 2 + 1)
        g = g_circ[n % N] * tukey(P + 1, 0.3)
        taps = np.arange(P + 1)
        h = g * np.exp(1j * TWO_PI * ch.f_center_hz * taps / fs)
        H = np.fft.fft(h, N)
        q = np.fft.fftfreq(M, 1.0 / M).astype(int)
        idx = self.k_c + q
        scale = complex(ch.scale) * M / N
        if is_complex:
            ok = (idx >= -(N // 2)) & (idx < N - N // 2)   # bins beyond the band edge would wrap
            self.idx = idx % N
            self.H = np.where(ok, H[self.idx], 0.0) * scale
        else:
            scale *= 2.0  # positive-frequency part of a real signal carries half its amplitude
            ok = (idx >= 0) & (idx <= N // 2)
            self.idx = np.where(ok, idx, 0)
            self.H = np.where(ok, H[self.idx], 0.0) * scale
        R = plan.ratio
        self.keep0 = int(Fraction(P) / R)
        j = np.arange(self.keep0, M)
        self.col_phasor = np.exp(-1j * TWO_PI * self.eps * (j * float(R)))

    def row_phasor(self, starts: np.ndarray, N: int) -> np.ndarray:
        kc_mod = (self.k_c * (starts % N)) % N
        frac = np.mod(self.eps * starts.astype(np.float64), 1.0)
        return np.exp(-1j * TWO_PI * (kc_mod / N + frac))


class Channelizer:
    """Stateful overlap-save channelizer over a stream of input blocks.

    Parameters
    ----------
    plan : ChannelPlan
    is_complex : bool
        Complex (I/Q) input, or real input (real FFT, positive frequencies).
    channels : sequence of ChannelSpec
    first_sample : int
        Absolute index of the first input sample (for phase continuity
        across excerpts).
    batch : int
        Segments transformed together (speed only; the output is the same).
    dtype : numpy dtype, optional
        Working precision of the input buffer (default complex64 / float32).

    Examples
    --------
    >>> import numpy as np
    >>> plan = plan_channelizer(240e3, 48e3)
    >>> ch = Channelizer(plan, True, [ChannelSpec(10e3)])
    >>> n = np.arange(48000)
    >>> y = ch.process(np.exp(2j * np.pi * 11e3 * n / 240e3))[0]
    >>> y = np.concatenate([y, ch.flush()[0]])[plan.delay_out:][:9600]
    >>> bool(np.allclose(y[2000:2010], np.exp(2j * np.pi * 1e3 * np.arange(2000, 2010) / 48e3), atol=1e-6))
    True
    """

    def __init__(self, plan: ChannelPlan, is_complex: bool, channels: Sequence[ChannelSpec],
                 first_sample: int = 0, batch: int = 64, dtype=None):
        self.plan = plan
        self.is_complex = is_complex
        self.tables = [_ChannelTables(plan, is_complex, c) for c in channels]
        if dtype is None:
            dtype = np.complex64 if is_complex else np.float32
        self.dtype = dtype
        self._buf = np.zeros(plan.overlap, dtype)   # P zeros of history before the first sample
        self._next_start = first_sample - plan.overlap  # absolute index of _buf[0]
        self._batch = batch
        self.workers = 2   # threads for each batch of FFTs (scipy.fft releases the GIL)

    def process(self, x: np.ndarray) -> list:
        """Feed input samples; return each channel's new output samples."""
        x = np.asarray(x, dtype=self.dtype)
        self._buf = np.concatenate([self._buf, x]) if len(self._buf) else x.copy()
        return self._run(final=False)

    def flush(self) -> list:
        """Push out everything still buffered (zero-padding the last segment)."""
        P, L = self.plan.overlap, self.plan.hop
        have = len(self._buf) - P
        if have > 0:
            pad = (-have) % L
            self._buf = np.concatenate([self._buf, np.zeros(pad, self.dtype)])
        return self._run(final=True)

    def _run(self, final: bool) -> list:
        plan = self.plan
        N, P, L = plan.n_fft, plan.overlap, plan.hop
        n_seg = (len(self._buf) - P) // L
        outs = [[] for _ in self.tables]
        done = 0
        while done < n_seg:
            b = min(self._batch, n_seg - done)
            base = done * L
            view = np.lib.stride_tricks.sliding_window_view(self._buf[base: base + (b - 1) * L + N], N)[::L]
            if self.is_complex:
                X = sfft.fft(view, axis=1, workers=self.workers)
            else:
                X = sfft.rfft(view, axis=1, workers=self.workers)
            starts = self._next_start + base + np.arange(b, dtype=np.int64) * L
            for t, out in zip(self.tables, outs):
                Y = X[:, t.idx] * t.H
                z = sfft.ifft(Y, axis=1, workers=self.workers)[:, t.keep0:]
                z *= t.col_phasor
                z *= t.row_phasor(starts, N)[:, None]
                out.append(z.reshape(-1))
            done += b
        consumed = n_seg * L
        if consumed:
            self._buf = self._buf[consumed:]
            self._next_start += consumed
        empty = np.zeros(0, np.complex128)
        return [np.concatenate(o).astype(np.complex128) if o else empty for o in outs]
