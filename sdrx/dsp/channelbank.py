"""Many channels from one overlap-save pass: the channelizer vectorised across channels.

A :class:`ChannelBank` holds the precomputed tables (bins, filter values,
phase terms) of any number of channels of one :class:`ChannelPlan` and
runs them together: one FFT of each input segment, then one gather, one
multiply, one batch of inverse FFTs and one phase correction over *all*
channels at once (array operations over a channel axis instead of a Python
loop per channel). Each channel's samples are computed with the same
operations, in the same order, as :class:`~sdrx.dsp.channelizer.Channelizer`
computes them for that channel alone, so a station cut out here equals the
station cut out by its own channelizer.

Notes
-----
Overlap-save with frequency-domain decimation (keep M of N bins, M-point
inverse FFT): Oppenheim & Schafer, *Discrete-Time Signal Processing*, fast
convolution. The tables are those of :class:`Channelizer` (``_ChannelTables``).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.fft as sfft

from .channelizer import ChannelPlan, _ChannelTables

__all__ = ["ChannelBank", "default_batch"]

TWO_PI = 2.0 * math.pi


def default_batch(n_channels: int, n_out: int) -> int:
    """Segments per batch: about 8 MB of complex channel spectra, from 4 to 64 segments.

    Examples
    --------
    >>> default_batch(4, 512), default_batch(408, 512)
    (64, 4)
    """
    return max(4, min(64, (8 << 20) // (16 * n_out * max(1, n_channels))))


class ChannelBank:
    """Stateful overlap-save channelizer for many channels of one plan.

    Parameters
    ----------
    plan : ChannelPlan
    is_complex : bool
        Complex (I/Q) input, or real input (real FFT, positive frequencies).
    tables : sequence of _ChannelTables
        The channels (for instance the ``tables`` of the stations' own
        :class:`~sdrx.dsp.channelizer.Channelizer` objects, so that no table
        is computed twice).
    first_sample : int
        Absolute index of the first input sample (phase continuity).
    batch : int, optional
        Segments transformed together (speed and memory only; the output is
        the same for any value). By default as many as keep a batch's
        channel spectra near 8 MB (:func:`default_batch`).
    dtype : numpy dtype, optional
        Working precision of the input buffer (default complex64 / float32).

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.dsp.channelizer import ChannelSpec, Channelizer, plan_channelizer
    >>> plan = plan_channelizer(240e3, 48e3)
    >>> specs = [ChannelSpec(10e3), ChannelSpec(-30e3)]
    >>> one = [Channelizer(plan, True, [s]) for s in specs]
    >>> bank = ChannelBank(plan, True, [c.tables[0] for c in one])
    >>> x = np.exp(2j * np.pi * 11e3 * np.arange(24000) / 240e3)
    >>> y = bank.process(x)
    >>> [bool(np.array_equal(y[i], c.process(x)[0])) for i, c in enumerate(one)]
    [True, True]
    """

    def __init__(self, plan: ChannelPlan, is_complex: bool, tables, first_sample: int = 0, batch=None,
                 dtype=None):
        self.plan = plan
        self.is_complex = is_complex
        self.tables = list(tables)
        if not self.tables:
            raise ValueError("ChannelBank needs at least one channel")
        keep = {t.keep0 for t in self.tables}
        if len(keep) != 1:
            raise ValueError("ChannelBank: every channel must come from the same plan")
        self.keep0 = keep.pop()
        self.idx = np.stack([t.idx for t in self.tables])              # (C, M)
        self.H = np.stack([t.H for t in self.tables])                  # (C, M)
        self.col_phasor = np.stack([t.col_phasor for t in self.tables])  # (C, M - keep0)
        self.k_c = np.array([t.k_c for t in self.tables], dtype=np.int64)
        self.eps = np.array([t.eps for t in self.tables], dtype=np.float64)
        if dtype is None:
            dtype = np.complex64 if is_complex else np.float32
        self.dtype = dtype
        self._buf = np.zeros(plan.overlap, dtype)
        self._next_start = first_sample - plan.overlap
        self._batch = default_batch(len(self.tables), plan.n_out) if batch is None else int(batch)
        self.workers = 2

    @property
    def n_channels(self) -> int:
        return len(self.tables)

    def process(self, x: np.ndarray) -> np.ndarray:
        """Feed input samples; return the new output samples, shape (channels, n)."""
        x = np.asarray(x, dtype=self.dtype)
        self._buf = np.concatenate([self._buf, x]) if len(self._buf) else x.copy()
        return self._run()

    def flush(self) -> np.ndarray:
        """Push out everything still buffered (zero-padding the last segment)."""
        P, L = self.plan.overlap, self.plan.hop
        have = len(self._buf) - P
        if have > 0:
            pad = (-have) % L
            self._buf = np.concatenate([self._buf, np.zeros(pad, self.dtype)])
        return self._run()

    def _row_phasor(self, starts: np.ndarray) -> np.ndarray:
        # the same elementwise steps as _ChannelTables.row_phasor, for every channel at once: (b, C)
        N = self.plan.n_fft
        kc_mod = (self.k_c[None, :] * (starts[:, None] % N)) % N
        frac = np.mod(self.eps[None, :] * starts.astype(np.float64)[:, None], 1.0)
        return np.exp(-1j * TWO_PI * (kc_mod / N + frac))

    def _run(self) -> np.ndarray:
        plan = self.plan
        N, P, L = plan.n_fft, plan.overlap, plan.hop
        n_seg = (len(self._buf) - P) // L
        hop_out = plan.n_out - self.keep0
        C = self.n_channels
        out = np.empty((C, n_seg * hop_out), np.complex128)
        segs = out.reshape(C, n_seg, hop_out)   # a view: the output by segment
        done = 0
        while done < n_seg:
            b = min(self._batch, n_seg - done)
            base = done * L
            view = np.lib.stride_tricks.sliding_window_view(self._buf[base: base + (b - 1) * L + N], N)[::L]
            if self.is_complex:
                X = sfft.fft(view, axis=1, workers=self.workers)
            else:
                X = sfft.rfft(view, axis=1, workers=self.workers)
            # channels first (C, b, M): each channel's segments lie together for the inverse FFTs
            Y = np.empty((C, b, plan.n_out), np.complex128)
            for s in range(b):
                np.multiply(X[s][self.idx], self.H, out=Y[:, s, :])
            z = sfft.ifft(Y, axis=2, workers=self.workers, overwrite_x=True)[:, :, self.keep0:]
            z *= self.col_phasor[:, None, :]
            starts = self._next_start + base + np.arange(b, dtype=np.int64) * L
            np.multiply(z, self._row_phasor(starts).T[:, :, None], out=segs[:, done:done + b, :])
            done += b
        consumed = n_seg * L
        if consumed:
            self._buf = self._buf[consumed:]
            self._next_start += consumed
        return out
