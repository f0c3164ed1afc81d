"""The block reader every capture format shares: excerpt by seeking, blocks, finiteness check."""

from __future__ import annotations

import math
from typing import Iterator

import numpy as np

from ..errors import CaptureError, ParameterError
from ..limits import MAX_FLOAT_SAMPLE
from ..units import parse_seconds
from .meta import CaptureInfo

__all__ = ["CaptureReader", "DEFAULT_BLOCK"]

DEFAULT_BLOCK = 65536


class CaptureReader:
    """Streaming reader of one capture; subclasses supply ``_open`` and ``_read``.

    Parameters
    ----------
    info : CaptureInfo
        Metadata of the capture.
    may_hold_nonfinite : bool
        True for float sample formats, whose blocks are checked for NaN/inf.

    Notes
    -----
    ``blocks`` opens the file, seeks to the first sample of the excerpt and
    reads consecutive blocks; nothing before the excerpt is read. Each sample
    is converted on its own (no state across samples), so the samples do not
    depend on the block size.

    Subclass hooks: ``_open()`` returns an object with ``close()``;
    ``_seek(handle, first)`` positions it; ``_read(handle, count)`` returns
    ``count`` converted samples (float32 or complex64); ``_open_excerpt``
    and ``_finish`` may check what a whole read saw (a hash).
    """

    def __init__(self, info: CaptureInfo, *, may_hold_nonfinite: bool):
        self.info = info
        self._check_finite = may_hold_nonfinite

    def __repr__(self) -> str:
        i = self.info
        return f"<{type(self).__name__} {i.path} {i.kind} {i.datatype} fs={i.fs:g} samples={i.samples}>"

    # --- excerpt -----------------------------------------------------------------
    def sample_range(self, start_s=0.0, duration_s=None) -> tuple:
        """First sample and sample count of an excerpt.

        Parameters
        ----------
        start_s : float or str
            Start, seconds into the capture (rounded to the nearest sample).
        duration_s : float, str or None
            Length, seconds; None for the rest of the capture.

        Returns
        -------
        (int, int)
            ``(first, count)``.

        Raises
        ------
        CaptureError
            If the capture holds no samples, the start lies at or past its
            end, or the excerpt runs past its end (the message gives both
            lengths; half a sample of rounding is allowed).
        ParameterError
            If start or duration is not a valid number of seconds.
        """
        info = self.info
        start = parse_seconds(0.0 if start_s is None else start_s, "--start")
        if info.samples == 0:
            raise CaptureError(f"{info.path}: the capture holds no samples")
        if start * info.fs >= info.samples - 0.5:
            raise CaptureError(
                f"{info.path}: --start {start:g} s is past the end of the capture ({info.seconds:.6g} s)"
            )
        first = int(round(start * info.fs))
        avail = info.samples - first
        if duration_s is None:
            return first, avail
        dur = parse_seconds(duration_s, "--duration", allow_zero=False)
        if dur * info.fs > avail + 1.0:
            raise CaptureError(
                f"{info.path}: --duration {dur:g} s from --start {start:g} s runs to {start + dur:.6g} s, past "
                f"the end of the capture ({info.seconds:.6g} s); at most {avail / info.fs:.6g} s from there"
            )
        count = min(avail, max(1, int(round(dur * info.fs))))
        return first, count

    # --- blocks ------------------------------------------------------------------
    def blocks(self, block_size: int = DEFAULT_BLOCK, start_s=0.0, duration_s=None) -> Iterator[np.ndarray]:
        """Iterate over the excerpt in blocks of ``block_size`` samples (the last may be shorter).

        Parameters
        ----------
        block_size : int
            Samples per block, at least 1.
        start_s, duration_s
            The excerpt, as in :meth:`sample_range`.

        Returns
        -------
        iterator of ndarray
            float32 (real) or complex64 (I/Q) blocks, integer full scale 1.0.

        Raises
        ------
        CaptureError
            Start past the end (at once); a NaN or inf sample (when reached,
            naming the file and the sample index).
        """
        if isinstance(block_size, bool) or not isinstance(block_size, (int, np.integer)) or block_size < 1:
            raise ParameterError(f"block_size: must be a whole number of samples >= 1, got {block_size!r}")
        first, count = self.sample_range(start_s, duration_s)
        return self._iterate(int(block_size), first, count)

    def read(self, start_s=0.0, duration_s=None) -> np.ndarray:
        """The whole excerpt as one array (for short excerpts; memory grows with length)."""
        first, count = self.sample_range(start_s, duration_s)
        parts = list(self._iterate(max(1, count), first, count))
        if not parts:
            return np.zeros(0, dtype=np.complex64 if self.info.kind == "iq" else np.float32)
        return parts[0] if len(parts) == 1 else np.concatenate(parts)

    def _iterate(self, block_size: int, first: int, count: int):
        if count <= 0:
            return
        handle = self._open_excerpt(first, count)
        try:
            self._seek(handle, first)
            pos = first
            end = first + count
            while pos < end:
                n = min(block_size, end - pos)
                block = self._read(handle, n)
                if block.shape[0] != n:
                    raise CaptureError(
                        f"{self.info.data_path}: ended after {pos + block.shape[0]} samples; "
                        f"expected {self.info.samples}"
                    )
                if self._check_finite:
                    self._assert_finite(block, pos)
                yield block
                pos += n
            self._finish(handle)
        finally:
            handle.close()

    def _assert_finite(self, block: np.ndarray, pos: int) -> None:
        # two cheap reductions: NaN propagates through max and min, inf and huge values show in them
        flat = block.view(np.float32) if block.dtype == np.complex64 else block
        if flat.size == 0:
            return
        hi, lo = float(flat.max()), float(flat.min())
        if math.isfinite(hi) and math.isfinite(lo) and max(hi, -lo) <= MAX_FLOAT_SAMPLE:
            return
        with np.errstate(invalid="ignore"):
            bad = np.flatnonzero(~(np.abs(block) <= MAX_FLOAT_SAMPLE))
        i = pos + int(bad[0])
        v = block[bad[0]]
        if bool(np.isnan(v)):
            what = "NaN"
        elif not bool(np.isfinite(v)):
            what = "infinite" + (" or beyond ±3.4e38" if "64" in self.info.datatype else "")
        else:
            what = f"{abs(complex(v)):.3g}, beyond {MAX_FLOAT_SAMPLE:g} (full scale is 1.0)"
        raise CaptureError(
            f"{self.info.data_path}: sample {i} (t = {i / self.info.fs:.6f} s) is {what}; "
            f"{int(bad.size)} such value(s) in this block"
        )

    # --- hooks -------------------------------------------------------------------
    def _open(self):  # pragma: no cover - abstract
        raise NotImplementedError

    def _open_excerpt(self, first: int, count: int):
        """Open for reading ``count`` samples from ``first`` (default: :meth:`_open`)."""
        return self._open()

    def _finish(self, handle) -> None:
        """Called once every block of an excerpt was read (default: nothing; may raise)."""

    def _seek(self, handle, first: int) -> None:  # pragma: no cover - abstract
        raise NotImplementedError

    def _read(self, handle, count: int) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError
