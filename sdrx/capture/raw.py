"""Readers of sample files without a header: headerless raw files and SigMF datasets."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from ..errors import CaptureError
from .base import CaptureReader
from .datatypes import Datatype
from .meta import CaptureInfo

__all__ = ["BinaryReader", "binary_sample_count", "open_raw"]


def binary_sample_count(data_path: Path, dt: Datatype, offset_bytes: int = 0) -> int:
    """Number of samples in a binary sample file, checking that it holds a whole number.

    Raises
    ------
    CaptureError
        If the file is missing or its size (after ``offset_bytes``) is not a
        multiple of the sample size.
    """
    try:
        size = data_path.stat().st_size
    except FileNotFoundError:
        raise CaptureError(f"{data_path}: no such file") from None
    if data_path.is_dir():
        raise CaptureError(f"{data_path}: is a folder, expected a capture file")
    payload = size - offset_bytes
    if payload < 0:
        raise CaptureError(f"{data_path}: {size} bytes, shorter than its {offset_bytes}-byte header")
    if payload % dt.sample_bytes:
        raise CaptureError(
            f"{data_path}: size {payload} bytes is not a whole number of {dt.name} samples "
            f"({dt.sample_bytes} bytes each; {payload % dt.sample_bytes} bytes left over)"
        )
    return payload // dt.sample_bytes


class BinaryReader(CaptureReader):
    """Reader of interleaved binary samples at a byte offset in a file.

    Parameters
    ----------
    info : CaptureInfo
    dt : Datatype
    offset_bytes : int
        Bytes before the first sample (SigMF ``core:header_bytes``; 0 for raw).

    Notes
    -----
    Each block is one ``seek`` + ``numpy.fromfile(count=...)`` of exactly the
    bytes needed and one vectorised conversion (see :class:`Datatype`), so
    memory is bounded by the block size whatever the file size.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.capture import open_capture
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x.cs16"
    >>> np.array([16384, 0, 0, -16384], dtype="<i2").tofile(p)
    >>> r = open_capture(p, datatype="ci16_le", fs="1M", center_hz="1M")
    >>> r.read().tolist()
    [(0.5+0j), -0.5j]
    """

    def __init__(self, info: CaptureInfo, dt: Datatype, offset_bytes: int = 0, sha512=None, meta_path=None):
        super().__init__(info, may_hold_nonfinite=dt.is_float)
        self.dt = dt
        self.offset_bytes = int(offset_bytes)
        self.sha512 = sha512          # hex digest the data file must have (SigMF core:sha512), or None
        self._meta_path = meta_path

    def _open_excerpt(self, first: int, count: int):
        """A read of the whole file carries a SHA-512 of its bytes when ``sha512`` is to be checked.

        The hash is computed on the bytes as they are read (the header bytes
        first), so the check costs no extra pass over the file: about 2 s of
        CPU per GB at the 500 MB/s SHA-512 runs at here, in the reading thread.
        """
        fh = self._open()
        hasher = None
        if self.sha512 is not None and first == 0 and count == self.info.samples:
            hasher = hashlib.sha512(fh.read(self.offset_bytes))
        return _Handle(fh, hasher)

    def _finish(self, handle) -> None:
        if handle.hasher is None:
            return
        got = handle.hasher.hexdigest()
        if got != self.sha512:
            raise CaptureError(
                f"{self.info.data_path}: its SHA-512 {got[:16]}... does not match core:sha512 "
                f"{self.sha512[:16]}... in {self._meta_path} (the data or the metadata was changed or replaced)")

    def _open(self):
        try:
            return open(self.info.data_path, "rb")
        except FileNotFoundError:
            raise CaptureError(f"{self.info.data_path}: no such file") from None

    def _seek(self, handle, first: int) -> None:
        handle.file.seek(self.offset_bytes + first * self.dt.sample_bytes)

    def _read(self, handle, count: int) -> np.ndarray:
        raw = np.fromfile(handle.file, dtype=self.dt.component_dtype, count=count * self.dt.components)
        if handle.hasher is not None:
            handle.hasher.update(raw.view(np.uint8))
        if raw.size % self.dt.components:
            raw = raw[: raw.size - raw.size % self.dt.components]
        return self.dt.decode(raw)


class _Handle:
    """An open sample file and, on a whole read that is checked, the running hash of its bytes."""

    def __init__(self, file, hasher):
        self.file = file
        self.hasher = hasher

    def close(self) -> None:
        self.file.close()


def open_raw(path: Path, dt: Datatype, fs: float, center_hz) -> BinaryReader:
    """Reader of a headerless raw file with datatype, rate and (I/Q) centre given.

    Raises
    ------
    CaptureError
        Missing file, size not a whole number of samples, or I/Q datatype
        without a centre frequency.
    """
    if fs is None:
        raise CaptureError(f"{path}: a headerless raw file needs its sample rate: pass --rate HZ")
    if dt.is_complex and center_hz is None:
        raise CaptureError(f"{path}: I/Q datatype {dt.name} needs a centre frequency: pass --center HZ")
    if not dt.is_complex and center_hz is not None:
        raise CaptureError(
            f"{path}: --center applies to I/Q captures; datatype {dt.name} is real (frequencies are absolute)"
        )
    n = binary_sample_count(path, dt)
    info = CaptureInfo(path=path, data_path=path, fs=fs, center_hz=center_hz, kind=dt.kind,
                       datatype=dt.name, samples=n)
    return BinaryReader(info, dt, 0)
