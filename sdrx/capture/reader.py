"""open_capture: pick the reader for a capture file from its name and the options given."""

from __future__ import annotations

from pathlib import Path

from ..errors import CaptureError, ParameterError
from ..units import parse_frequency, validate_fs
from .base import CaptureReader
from .datatypes import parse_datatype
from .meta import check_info
from .raw import open_raw
from .sigmf import is_sigmf_path, open_sigmf
from .sigmf_archive import is_sigmf_archive, open_sigmf_archive
from .soundfiles import SOUNDFILE_SUFFIXES, open_soundfile

__all__ = ["open_capture"]


def open_capture(path, *, datatype=None, fs=None, center_hz=None) -> CaptureReader:
    """Open a capture for reading in blocks.

    Parameters
    ----------
    path : str or Path
        A WAV/RF64/W64 file (``.wav``, ``.rf64``, ``.w64``); either file of a
        SigMF pair (``.sigmf-meta`` / ``.sigmf-data``); a SigMF archive
        (``.sigmf``, read in place); or, when ``datatype``
        is given, a headerless raw file of any name.
    datatype : str, optional
        SigMF datatype of a raw file (``ci16_le``, ``cf32_le``, ``cu8``, ...).
    fs : float or str, optional
        Sample rate of a raw file, Hz (``"2.4M"``).
    center_hz : float or str, optional
        Centre frequency of an I/Q capture whose file does not say it (stereo
        WAV, raw I/Q, SigMF without ``core:frequency``).

    Returns
    -------
    CaptureReader
        With ``.info`` (:class:`CaptureInfo`), ``.sample_range``, ``.blocks``.

    Raises
    ------
    CaptureError
        Missing or malformed file, I/Q without a centre frequency.
    ParameterError
        Bad or inapplicable options.

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "band.cu8"
    >>> np.array([255, 0, 0, 255], dtype=np.uint8).tofile(p)
    >>> r = open_capture(p, datatype="cu8", fs=1e6, center_hz="1M")
    >>> r.info.samples, r.info.band_hz
    (2, (500000.0, 1500000.0))
    >>> r.read().tolist()
    [(1-1j), (-1+1j)]
    """
    try:
        return _open(Path(path), datatype, fs, center_hz)
    except OSError as exc:
        text = str(path)
        shown = text if len(text) <= 80 else text[:77] + "..."
        raise CaptureError(f"{shown}: {exc.strerror or exc}") from None


def _open(p: Path, datatype, fs, center_hz) -> CaptureReader:
    rate = None if fs is None else validate_fs(fs, "--rate")
    center = None if center_hz is None else parse_frequency(center_hz, "--center")
    name = p.name.lower()
    if is_sigmf_path(p) or name.endswith(SOUNDFILE_SUFFIXES):
        if datatype is not None or rate is not None:
            raise ParameterError(
                f"--format/--rate: apply to headerless raw files; {p} has a header with its own format and rate"
            )
        if is_sigmf_path(p):
            reader = open_sigmf(p, center_hz=center)
            center_name = "--center" if center is not None else "captures[0].core:frequency"
        else:
            reader = open_soundfile(p, center_hz=center)
            center_name = "--center"
        check_info(reader.info, center_name)
        return reader
    if is_sigmf_archive(p):
        if datatype is not None or rate is not None:
            raise ParameterError(
                f"--format/--rate: apply to headerless raw files; {p} is a SigMF archive with its own format and rate"
            )
        reader = open_sigmf_archive(p, center_hz=center)
        check_info(reader.info, "--center" if center is not None else "captures[0].core:frequency")
        return reader
    if datatype is not None:
        dt = parse_datatype(datatype, "--format")
        if not p.exists():
            raise CaptureError(f"{p}: no such file")
        return _checked(open_raw(p, dt, rate, center))
    if not p.exists():
        raise CaptureError(f"{p}: no such file")
    raise CaptureError(
        f"{p}: unknown capture type; name a .wav/.rf64/.w64 file, a .sigmf-meta/.sigmf-data pair or a .sigmf archive, "
        "or give --format DATATYPE --rate HZ for a headerless raw file"
    )


def _checked(reader):
    check_info(reader.info)
    return reader
