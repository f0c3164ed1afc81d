"""A capture's spectrogram (waterfall picture) on a fixed column grid, computed in one streaming pass.

Columns lie on a grid of ``column`` capture samples from the excerpt's
first sample; each column is the average power spectrum of up to
``frames`` (4) consecutive Hann-windowed frames of ``nfft`` samples from the
column's start (a sampled picture: a burst shorter than a column may fall
between the frames). Because the grid is fixed by the excerpt (not by how it is
read), segments computed apart and put side by side give the same picture
as one pass over the whole excerpt.

Scaling: P[k] = c·|Σ w[n]·x[n]·e^{−j2πkn/N}|² / (Σ w[n])², c = 1 for I/Q and
4 for real captures, so that a carrier of amplitude A centred on a bin
reads 20·log10(A) dBFS at its peak (peak scaling; up to 1.4 dB less between
bins, the Hann window's scalloping loss: F. J. Harris, "On the use of
windows for harmonic analysis with the DFT", Proc. IEEE 66 (1978), table 1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

__all__ = ["SpectrogramPlan", "plan_spectrogram", "SpectrogramAccumulator", "spectrogram"]

MAX_COLUMNS = 1200
MAX_FRAMES = 4
_BINS_PER_CHANNEL = 8
_NICE_S = (0.05, 0.1, 0.2, 0.25, 0.5, 1, 2, 5, 10, 15, 20, 30, 60, 120, 300, 600, 1200, 1800, 3600)
_FLOOR = 1e-20   # -200 dB: empty bins of a noiseless capture


@dataclass(frozen=True)
class SpectrogramPlan:
    """Sizes of a spectrogram over an excerpt.

    Attributes
    ----------
    fs : float
    kind : str
        "iq" or "real".
    center_hz : float or None
    first, count : int
        The excerpt, capture samples.
    nfft, column, frames : int
        Frame length, column length (capture samples) and frames per column.
    """

    fs: float
    kind: str
    center_hz: object
    first: int
    count: int
    nfft: int
    column: int
    frames: int

    @property
    def n_columns(self) -> int:
        return max(1, -(-self.count // self.column)) if self.count >= self.nfft else 0

    def frames_in(self, c: int) -> int:
        """Frames of column ``c`` (the last column of the excerpt may hold fewer)."""
        left = self.count - c * self.column
        return max(0, min(self.frames, left // self.nfft))

    @property
    def freqs_hz(self) -> np.ndarray:
        """Frequency of every bin, Hz (absolute RF)."""
        if self.kind == "iq":
            return self.center_hz + (np.arange(self.nfft) - self.nfft // 2) * (self.fs / self.nfft)
        return np.arange(self.nfft // 2 + 1) * (self.fs / self.nfft)

    @property
    def times_s(self) -> np.ndarray:
        """Start of every column, seconds into the capture."""
        return (self.first + np.arange(self.n_columns) * self.column) / self.fs

    def to_json(self) -> dict:
        return {"nfft": int(self.nfft), "rbw_hz": float(self.fs / self.nfft), "column_s": float(self.column / self.fs),
                "frames_per_column": int(self.frames), "columns": int(self.n_columns)}


def plan_spectrogram(info, first: int, count: int, spacing_hz: float, segment_samples=None,
                     max_columns: int = MAX_COLUMNS) -> SpectrogramPlan:
    """Frame length about spacing/8 per bin; column length the shortest round duration giving at most
    ``max_columns`` columns that divides ``segment_samples`` (so that no column straddles two segments).

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> info = SimpleNamespace(fs=2.4e6, kind="iq", center_hz=1.2e6)
    >>> p = plan_spectrogram(info, 0, 24_000_000, 10e3, 144_000_000)
    >>> p.nfft, p.column / info.fs, p.frames, p.n_columns
    (2048, 0.01, 4, 1000)
    """
    fs = float(info.fs)
    nfft = 1 << max(4, math.ceil(math.log2(fs * _BINS_PER_CHANNEL / spacing_hz)))
    nfft = min(nfft, 1 << 16)
    least = max(nfft, math.ceil(count / max_columns))
    column = None
    for s in (0.01, 0.02) + _NICE_S:
        n = int(round(s * fs))
        if n < least or abs(n - s * fs) > 1e-6 * fs:
            continue
        if segment_samples is None or segment_samples % n == 0:
            column = n
            break
    if column is None:
        column = int(segment_samples) if segment_samples else max(least, count)
    frames = max(1, min(MAX_FRAMES, column // nfft))
    return SpectrogramPlan(fs, info.kind, info.center_hz, int(first), int(count), nfft, column, frames)


class SpectrogramAccumulator:
    """Columns of a spectrogram from blocks of samples, for the part ``[start, end)`` of the excerpt.

    Parameters
    ----------
    plan : SpectrogramPlan
    start, end : int
        Absolute capture samples; columns whose start lies in this span are
        computed (``start`` on the column grid).
    """

    def __init__(self, plan: SpectrogramPlan, start: int, end: int):
        self.plan = plan
        c0 = -(-(start - plan.first) // plan.column)
        c1 = -(-(end - plan.first) // plan.column)
        self.columns = range(max(0, c0), min(plan.n_columns, c1))
        self._win = np.hanning(plan.nfft + 1)[:-1].astype(np.float32)
        scale = 1.0 if plan.kind == "iq" else 4.0
        self._scale = scale / float(np.sum(self._win.astype(np.float64))) ** 2
        n_bins = plan.nfft if plan.kind == "iq" else plan.nfft // 2 + 1
        self.db = np.full((len(self.columns), n_bins), 10 * math.log10(_FLOOR), np.float32)
        self._col = self.columns.start
        self._buf = []
        self._have = 0

    @property
    def complete(self) -> bool:
        """Every column of ``[start, end)`` is computed."""
        return self._col >= self.columns.stop

    def _span(self, c: int):
        p = self.plan
        s = p.first + c * p.column
        return s, s + p.frames_in(c) * p.nfft

    def feed(self, block: np.ndarray, block_start: int) -> None:
        """Samples ``block`` beginning at absolute sample ``block_start``."""
        pos = block_start
        end = block_start + len(block)
        self._whole_columns(block, block_start)
        while self._col < self.columns.stop:
            s, e = self._span(self._col)
            if e <= s:
                self._col += 1
                continue
            lo, hi = max(s + self._have, pos), min(e, end)
            if hi <= lo:
                if e <= pos:   # the column lies before this block (never filled): move on
                    self._col += 1
                    self._buf, self._have = [], 0
                    continue
                return
            self._buf.append(block[lo - block_start:hi - block_start])
            self._have += hi - lo
            if s + self._have < e:
                return
            self._finish(np.concatenate(self._buf))
            self._buf, self._have = [], 0
            self._col += 1

    def _whole_columns(self, block: np.ndarray, block_start: int) -> None:
        """Every column from the current one on whose whole period lies inside the block, in one array
        operation (a block holds dozens: one FFT call, not one each; the same values as one at a time)."""
        p = self.plan
        s, _ = self._span(self._col)
        if self._have or s < block_start:
            return
        off = s - block_start
        k = min((len(block) - off) // p.column, self.columns.stop - self._col)
        while k and p.frames_in(self._col + k - 1) < p.frames:      # the excerpt's short last column
            k -= 1
        if k <= 0:
            return
        x = block[off:off + k * p.column].reshape(k, p.column)[:, :p.frames * p.nfft]
        i = self._col - self.columns.start
        self.db[i:i + k] = self._levels(x.reshape(k, p.frames, p.nfft))
        self._col += k

    def _finish(self, x: np.ndarray) -> None:
        self.db[self._col - self.columns.start] = self._levels(x.reshape(1, -1, self.plan.nfft))[0]

    def _levels(self, frames: np.ndarray) -> np.ndarray:
        """dBFS per column of ``frames`` (columns, frames, nfft): the frames' mean power spectrum."""
        p = self.plan
        seg = frames * self._win
        spec = sfft.fft(seg, axis=2) if p.kind == "iq" else sfft.rfft(seg, axis=2)   # single precision in, out
        power = np.mean(spec.real.astype(np.float64) ** 2 + spec.imag.astype(np.float64) ** 2, axis=1)
        power = power * self._scale
        if p.kind == "iq":
            power = np.fft.fftshift(power, axes=1)
        return (10.0 * np.log10(np.maximum(power, _FLOOR))).astype(np.float32)


def spectrogram(reader, plan: SpectrogramPlan, progress=None) -> np.ndarray:
    """The whole excerpt's spectrogram in one pass: array (columns, bins) of dBFS.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.capture import open_writer, open_capture
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.sigmf-meta"
    >>> fs = 96e3
    >>> x = 0.1 * np.exp(2j * np.pi * 12e3 * np.arange(96000) / fs)
    >>> with open_writer(p, fs=fs, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
    ...     _ = w.write(x.astype(np.complex64))
    >>> r = open_capture(p)
    >>> sp = plan_spectrogram(r.info, 0, 96000, 3e3)
    >>> db = spectrogram(r, sp)
    >>> k = int(np.argmax(db[0])); float(sp.freqs_hz[k]), round(float(db[0, k]), 1)
    (1012000.0, -20.0)
    """
    acc = SpectrogramAccumulator(plan, plan.first, plan.first + plan.count)
    pos = plan.first
    for block in reader.blocks(1 << 20, start_s=plan.first / plan.fs, duration_s=plan.count / plan.fs):
        acc.feed(block, pos)
        pos += len(block)
        if progress is not None:
            progress(pos - plan.first, plan.count)
    return acc.db
