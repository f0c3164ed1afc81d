"""Readers of sample files without a header: headerless raw files and SigMF datasets."""

from __future__ import annotations

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

    def __init__(self, info: CaptureInfo, dt: Datatype, offset_bytes: int = 0):
        super().__init__(info, may_hold_nonfinite=dt.is_float)
        self.dt = dt
        self.offset_bytes = int(offset_bytes)

    def _open(self):
        try:
            return open(self.info.data_path, "rb")
        except FileNotFoundError:
            raise CaptureError(f"{self.info.data_path}: no such file") from None

    def _seek(self, handle, first: int) -> None:
        handle.seek(self.offset_bytes + first * self.dt.sample_bytes)

    def _read(self, handle, count: int) -> np.ndarray:
        raw = np.fromfile(handle, dtype=self.dt.component_dtype, count=count * self.dt.components)
        if raw.size % self.dt.components:
            raw = raw[: raw.size - raw.size % self.dt.components]
        return self.dt.decode(raw)


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
