"""WAV, RF64 and W64 captures, read through soundfile (libsndfile).

Mono files hold real RF samples whose frequencies are absolute (band 0 .. fs/2);
stereo files hold I (left) and Q (right), and need the centre frequency from
the user (``--center``), since the file format has no place for it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import CaptureError, ParameterError
from .base import CaptureReader
from .meta import CaptureInfo

__all__ = ["SoundFileReader", "open_soundfile", "data_chunk_shortfall", "SOUNDFILE_SUFFIXES"]

SOUNDFILE_SUFFIXES = (".wav", ".wave", ".rf64", ".w64")

# soundfile subtype -> (datatype stem, may hold NaN/inf)
_SUBTYPES = {
    "PCM_U8": ("u8", False),
    "PCM_S8": ("i8", False),
    "PCM_16": ("i16_le", False),
    "PCM_24": ("i24_le", False),
    "PCM_32": ("i32_le", False),
    "FLOAT": ("f32_le", True),
    "DOUBLE": ("f64_le", True),
}


class SoundFileReader(CaptureReader):
    """Reader of a WAV/RF64/W64 capture by ``SoundFile.seek`` + ``read``.

    Notes
    -----
    libsndfile scales integer PCM to float by 1/2**(bits-1) (int16 / 32768),
    the same convention as the SigMF readers; 8-bit WAV is unsigned with its
    zero at code 128, so it reads as (v - 128) / 128.

    Examples
    --------
    >>> import tempfile, pathlib, soundfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "rf.wav"
    >>> soundfile.write(p, np.array([0.5, -0.25]), 48000, subtype="PCM_16")
    >>> from sdrx.capture import open_capture
    >>> r = open_capture(p)
    >>> r.info.kind, r.info.datatype, r.read().tolist()
    ('real', 'ri16_le', [0.5, -0.25])
    """

    def __init__(self, info: CaptureInfo, *, may_hold_nonfinite: bool, channels: int):
        super().__init__(info, may_hold_nonfinite=may_hold_nonfinite)
        self._channels = channels

    def _open(self):
        import soundfile

        try:
            return soundfile.SoundFile(str(self.info.data_path), "r")
        except (soundfile.LibsndfileError, RuntimeError, OSError) as exc:
            raise CaptureError(f"{self.info.data_path}: cannot open: {exc}") from None

    def _seek(self, handle, first: int) -> None:
        handle.seek(first)

    def _read(self, handle, count: int) -> np.ndarray:
        data = handle.read(count, dtype="float32", always_2d=False)
        if self._channels == 2:
            return np.ascontiguousarray(data).view(np.complex64).reshape(-1)
        return data


def data_chunk_shortfall(path: Path):
    """(declared, present) bytes of a WAV/RF64/W64 file's data chunk when the file is cut short, else None.

    libsndfile reads a file cut in the middle of its data as a shorter
    capture, without a word; the chunk sizes in the header tell.

    Notes
    -----
    RIFF/WAV and RF64 (EBU Tech 3306: the ``ds64`` chunk holds the 64-bit
    data size); Sony Wave64 (chunks named by 16-byte GUIDs whose sizes count
    their 24-byte header, aligned to 8 bytes). A RIFF data size of 0xFFFFFFFF
    (a recorder that never finished its header) is not judged.
    """
    import struct

    try:
        size = path.stat().st_size
        with open(path, "rb") as fh:
            head = fh.read(12)
            if len(head) < 12:
                return None
            w64 = head[:4] == b"riff"
            if head[:4] not in (b"RIFF", b"RF64") and not w64:
                return None
            ds64 = None
            pos = 40 if w64 else 12
            for _ in range(64):                       # a data chunk comes within the first few
                if pos >= size:
                    return None
                fh.seek(pos)
                hdr = fh.read(24 if w64 else 8)
                if len(hdr) < (24 if w64 else 8):
                    return None
                cid = hdr[:4]
                if w64:
                    csize = struct.unpack("<Q", hdr[16:24])[0]
                    body, nxt = csize - 24, pos + ((csize + 7) // 8) * 8
                else:
                    csize = struct.unpack("<I", hdr[4:8])[0]
                    body, nxt = csize, pos + 8 + csize + (csize & 1)
                    if cid == b"ds64":
                        ds64 = struct.unpack("<Q", fh.read(16)[8:16])[0]
                if cid == b"data":
                    start = pos + (24 if w64 else 8)
                    if not w64 and csize == 0xFFFFFFFF:
                        if ds64 is None:
                            return None
                        body = ds64
                    present = size - start
                    return (body, present) if body > present else None
                if body < 0:
                    return None
                pos = nxt
    except (OSError, ValueError, OverflowError, struct.error):
        return None
    return None


def open_soundfile(path: Path, *, center_hz=None) -> SoundFileReader:
    """Reader of a WAV/RF64/W64 file: mono = real, stereo = I/Q (needs ``center_hz``).

    Raises
    ------
    CaptureError
        Missing or unreadable file; more than 2 channels; unsupported
        subtype; stereo (I/Q) without a centre frequency.
    ParameterError
        ``center_hz`` given for a mono (real) file.
    """
    import soundfile

    if not path.exists():
        raise CaptureError(f"{path}: no such file")
    if path.is_dir():
        raise CaptureError(f"{path}: is a folder, expected a capture file")
    try:
        sfi = soundfile.info(str(path))
    except (soundfile.LibsndfileError, RuntimeError, OSError) as exc:
        raise CaptureError(f"{path}: not a readable WAV/RF64/W64 file ({exc})") from None
    if sfi.channels > 2:
        raise CaptureError(
            f"{path}: has {sfi.channels} channels; a capture has 1 (real RF) or 2 (I/Q)"
        )
    if sfi.subtype not in _SUBTYPES:
        raise CaptureError(
            f"{path}: sample format {sfi.subtype} is not supported; use one of {', '.join(_SUBTYPES)}"
        )
    if sfi.samplerate <= 0:
        raise CaptureError(f"{path}: sample rate must be positive, got {sfi.samplerate}")
    short = data_chunk_shortfall(path)
    if short is not None:
        raise CaptureError(f"{path}: its data chunk declares {short[0]} bytes but the file holds {short[1]} "
                           "(cut short?); sdrx does not read a truncated capture")
    stem, may_nonfinite = _SUBTYPES[sfi.subtype]
    if sfi.channels == 2:
        if center_hz is None:
            raise CaptureError(f"{path}: stereo file is I/Q; give its centre frequency with --center HZ")
        kind, prefix = "iq", "c"
    else:
        if center_hz is not None:
            raise ParameterError(
                f"--center: applies to I/Q captures; {path} is mono, real samples with absolute frequencies"
            )
        kind, prefix = "real", "r"
    info = CaptureInfo(path=path, data_path=path, fs=float(sfi.samplerate),
                       center_hz=None if center_hz is None else float(center_hz), kind=kind,
                       datatype=prefix + stem, samples=int(sfi.frames))
    return SoundFileReader(info, may_hold_nonfinite=may_nonfinite, channels=sfi.channels)
