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

__all__ = ["SoundFileReader", "open_soundfile", "SOUNDFILE_SUFFIXES"]

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
