"""A deterministic streaming WAV / RF64 writer (16-bit PCM or 32-bit float).

sdrx writes WAV headers itself rather than through libsndfile because
libsndfile stamps float files with a PEAK chunk holding the time of writing,
and sdrx promises byte-identical outputs for identical inputs. Files are
checked against soundfile (libsndfile) in the tests.

Layout (little-endian, EBU Tech 3306 for RF64)::

    RIFF <size> WAVE  [JUNK 28 | ds64 28]  [LIST INFO ...]  fmt  [fact]  data <size> samples

When the final size is not known in advance a 28-byte ``JUNK`` chunk is
reserved; at close, if the file exceeds the 4 GiB limit of RIFF sizes, the
header is rewritten as ``RF64`` and ``JUNK`` becomes the ``ds64`` chunk that
holds the 64-bit sizes. Otherwise the file stays a plain WAV.
"""

from __future__ import annotations

import contextlib
import struct
from pathlib import Path

import numpy as np

from ..errors import OutputError, ParameterError
from ..fileset import OutputSet

__all__ = ["AtomicFile", "WavStream", "AtomicWriter", "WavStreamWriter", "RIFF_LIMIT"]

RIFF_LIMIT = 0xFFFFFFFF  # largest size a 32-bit RIFF size field holds
_FORMATS = {"pcm16": (1, 16, np.dtype("<i2")), "float32": (3, 32, np.dtype("<f4"))}


class AtomicFile:
    """A binary file written under a temporary name and renamed onto ``path`` when committed.

    Parameters
    ----------
    path : str or Path
        The final path.
    outputs : OutputSet, optional
        The set the file belongs to: :meth:`commit` then only closes the
        file, and the set renames it with the others. Without one the file
        is a set of its own, renamed by :meth:`commit`.

    Notes
    -----
    A write the file system refuses (a full disk) raises
    :class:`~sdrx.errors.OutputError` naming the final path, and the
    temporary is removed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x.bin"
    >>> a = AtomicFile(p); a.write(b"ok"); a.commit()
    >>> p.read_bytes()
    b'ok'
    """

    def __init__(self, path, outputs=None):
        self.path = Path(path)
        self._own = outputs is None
        self.outputs = OutputSet(self.path) if outputs is None else outputs
        self.tmp = self.outputs.add(self.path)
        try:
            self.file = open(self.tmp, "r+b")
        except OSError as exc:
            self.outputs.abort()
            raise OutputError(f"{self.path}: cannot write ({exc.strerror})") from None
        self.done = False

    def write(self, data) -> None:
        """Append bytes (or a buffer)."""
        try:
            self.file.write(data)
        except OSError as exc:
            self.abort()
            raise OutputError(f"{self.path}: cannot write ({exc.strerror}); nothing was left under that name") from None

    def commit(self) -> None:
        """Close; rename onto the final path (or leave that to the set the file belongs to)."""
        if self.done:
            return
        self.done = True
        try:
            self.file.close()
        except OSError as exc:
            self.outputs.abort()
            raise OutputError(f"{self.path}: cannot write ({exc.strerror}); nothing was left under that name") from None
        if self._own:
            self.outputs.commit()

    def abort(self) -> None:
        """Close and remove the temporary file (and the set's others); the final path is left as it was."""
        if not self.done:
            self.done = True
            with contextlib.suppress(OSError):
                self.file.close()
        self.outputs.abort()


def _info_chunk(tags: dict) -> bytes:
    body = b""
    for key, text in tags.items():
        data = str(text).encode("utf-8") + b"\0"
        if len(data) % 2:
            data += b"\0"
        body += key.encode("ascii") + struct.pack("<I", len(data)) + data
    if not body:
        return b""
    body = b"INFO" + body
    return b"LIST" + struct.pack("<I", len(body)) + body


class WavStream:
    """Write interleaved frames to ``path`` as WAV (or RF64 when over 4 GiB), atomically.

    Parameters
    ----------
    path : Path
        Final path (validated by the caller with ``check_output``).
    fs : float
        Sample rate; must be a whole number of Hz (WAV stores an integer).
    channels : int
        1 or 2.
    sample_format : str
        ``"pcm16"`` or ``"float32"``.
    expected_frames : int or None
        Frames that will be written, when known: picks plain WAV or RF64 at
        once. None reserves room to decide at close from the actual size.
    info : dict, optional
        RIFF INFO tags (``ICMT`` comment, ``IART`` artist, ``ISFT`` software,
        ``ICRD`` date) written in a LIST chunk before the data.
    outputs : OutputSet, optional
        The set of outputs the file belongs to (see :class:`AtomicFile`).

    Raises
    ------
    ParameterError
        Sample rate not a positive whole number, bad format or channels.
    OutputError
        More data written than a plain WAV can hold when ``expected_frames``
        said it would fit.
    """

    def __init__(self, path, fs, channels: int, sample_format: str, *, expected_frames=None, info=None,
                 outputs=None):
        if sample_format not in _FORMATS:
            raise ParameterError(f"sample_format: {sample_format!r} not one of {', '.join(_FORMATS)}")
        if channels not in (1, 2):
            raise ParameterError(f"channels: must be 1 or 2, got {channels!r}")
        rate = float(fs)
        # a rate computed as a quotient (2.4e6 / 150) may miss the integer by float rounding
        if not (rate > 0 and abs(rate - round(rate)) <= 1e-9 * rate and rate <= 0xFFFFFFFF):
            raise ParameterError(f"{path}: WAV needs a whole positive number of samples per second, got {fs!r}")
        self.path = Path(path)
        self.fs = int(round(rate))
        self.channels = channels
        self.tag, self.bits, self.dtype = _FORMATS[sample_format]
        self.block_align = channels * self.bits // 8
        self.frames = 0
        self._info = _info_chunk(info or {})
        if expected_frames is None:
            self._layout = "reserve"
        else:
            big = self._riff_size(int(expected_frames) * self.block_align, reserve=False) > RIFF_LIMIT
            self._layout = "rf64" if big else "wav"
        self._header_len = len(self._header(0))
        self._file = AtomicFile(self.path, outputs)
        self._file.write(self._header(0))

    # --- header ----------------------------------------------------------------
    def _fmt(self) -> bytes:
        body = struct.pack("<HHIIHH", self.tag, self.channels, self.fs, self.fs * self.block_align,
                           self.block_align, self.bits)
        if self.tag == 3:
            body += struct.pack("<H", 0)
        return b"fmt " + struct.pack("<I", len(body)) + body

    def _fixed_len(self, reserve: bool) -> int:
        n = 12 + (36 if reserve else 0) + len(self._info) + len(self._fmt()) + 8
        if self.tag == 3:
            n += 12
        return n

    def _riff_size(self, data_bytes: int, reserve: bool) -> int:
        return self._fixed_len(reserve) - 8 + data_bytes

    def _header(self, data_bytes: int, final: bool = False) -> bytes:
        frames = data_bytes // self.block_align
        reserve = self._layout in ("reserve", "rf64")
        riff_size = self._riff_size(data_bytes, reserve)
        rf64 = self._layout == "rf64" or (final and self._layout == "reserve" and riff_size > RIFF_LIMIT)
        if rf64:
            out = b"RF64" + struct.pack("<I", 0xFFFFFFFF) + b"WAVE"
            out += b"ds64" + struct.pack("<I", 28) + struct.pack("<QQQI", riff_size, data_bytes, frames, 0)
        else:
            out = b"RIFF" + struct.pack("<I", riff_size) + b"WAVE"
            if reserve:
                out += b"JUNK" + struct.pack("<I", 28) + bytes(28)
        out += self._info + self._fmt()
        if self.tag == 3:
            out += b"fact" + struct.pack("<II", 4, 0xFFFFFFFF if rf64 else frames)
        out += b"data" + struct.pack("<I", 0xFFFFFFFF if rf64 else data_bytes)
        return out

    # --- data --------------------------------------------------------------------
    def write_codes(self, codes: np.ndarray) -> None:
        """Append interleaved codes of the file's sample type (int16 or float32 little-endian)."""
        if self._file.done:
            raise OutputError(f"{self.path}: writer is closed")
        c = np.ascontiguousarray(codes, dtype=self.dtype)
        if c.size % self.channels:
            raise ParameterError(f"{self.path}: {c.size} values are not whole frames of {self.channels} channels")
        new_frames = self.frames + c.size // self.channels
        if self._layout == "wav" and self._riff_size(new_frames * self.block_align, False) > RIFF_LIMIT:
            raise OutputError(
                f"{self.path}: more samples than announced; a plain WAV cannot exceed 4 GiB"
            )
        self._file.write(memoryview(c).cast("B"))
        self.frames = new_frames

    def close(self) -> None:
        """Finish the header and rename the file into place."""
        if self._file.done:
            return
        try:
            header = self._header(self.frames * self.block_align, final=True)
            assert len(header) == self._header_len
            self._file.file.seek(0)
            self._file.write(header)
        except BaseException:
            self._file.abort()
            raise
        self._file.commit()

    def abort(self) -> None:
        """Remove the temporary file; nothing appears under the final name."""
        self._file.abort()


class AtomicWriter:
    """Context manager over an output: ``close()`` on a normal exit, ``abort()`` on an exception.

    Subclasses set ``self._closed = False`` and provide ``close`` and ``abort``.
    """

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            self.close()
        else:
            self.abort()
        return False

    def close(self) -> None:  # pragma: no cover - abstract
        raise NotImplementedError

    def abort(self) -> None:  # pragma: no cover - abstract
        raise NotImplementedError


class WavStreamWriter(AtomicWriter):
    """A writer whose output is one :class:`WavStream` held in ``self._stream``."""

    def close(self) -> None:
        """Finish the header and rename the file into place."""
        if self._closed:
            return
        self._closed = True
        self._stream.close()

    def abort(self) -> None:
        """Remove the temporary file; nothing appears under the final name."""
        self._closed = True
        self._stream.abort()
