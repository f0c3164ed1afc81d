"""Capture metadata shared by every reader: :class:`CaptureInfo`."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Optional

__all__ = ["CaptureInfo", "check_info"]


@dataclass(frozen=True)
class CaptureInfo:
    """What a reader knows about a capture, whatever its file format.

    Parameters
    ----------
    path : Path
        The file the user named (for SigMF the ``.sigmf-meta`` file, even
        when the ``.sigmf-data`` file was named).
    data_path : Path
        The file holding the samples.
    fs : float
        Sample rate, Hz.
    center_hz : float or None
        Centre frequency of an I/Q capture, Hz; None for real captures,
        whose sample frequencies are absolute (band 0 .. fs/2).
    kind : str
        ``"real"`` or ``"iq"``.
    datatype : str
        SigMF datatype name (``ci16_le``, ``rf32_le``, ...). For WAV files it
        follows the subtype: PCM_16 stereo -> ``ci16_le``, FLOAT mono ->
        ``rf32_le``, PCM_24 -> ``ri24_le``/``ci24_le`` (no SigMF name).
    samples : int
        Number of samples (complex samples for I/Q).

    Notes
    -----
    An I/Q capture holds the complex envelope x(t) of the RF signal
    Re{x(t)·exp(j2π·center_hz·t)}; its band is center_hz ± fs/2.

    Examples
    --------
    >>> info = CaptureInfo(Path("a.wav"), Path("a.wav"), 48000.0, None, "real", "ri16_le", 96000)
    >>> info.seconds, info.band_hz
    (2.0, (0.0, 24000.0))
    """

    path: Path
    data_path: Path
    fs: float
    center_hz: Optional[float]
    kind: str
    datatype: str
    samples: int

    @property
    def seconds(self) -> float:
        """Duration, seconds (samples / fs)."""
        return self.samples / self.fs

    @property
    def band_hz(self) -> tuple:
        """(lowest, highest) RF frequency the capture holds, Hz."""
        if self.kind == "iq":
            return (self.center_hz - self.fs / 2.0, self.center_hz + self.fs / 2.0)
        return (0.0, self.fs / 2.0)

    def to_json(self) -> dict:
        """Plain-JSON form: path, rate_hz, center_hz, kind, datatype, samples, seconds."""
        return {
            "path": str(self.path),
            "rate_hz": float(self.fs),
            "center_hz": None if self.center_hz is None else float(self.center_hz),
            "kind": self.kind,
            "datatype": self.datatype,
            "samples": int(self.samples),
            "seconds": float(self.seconds),
        }


def check_info(info: CaptureInfo, center_name: str = "--center") -> CaptureInfo:
    """Refuse capture metadata that cannot be meant, before anything is read.

    Parameters
    ----------
    info : CaptureInfo
    center_name : str
        Where the centre frequency came from (``--center`` or the metadata
        key), for the message.

    Raises
    ------
    CaptureError
        A rate outside 1 kHz to 1 GHz, more than 2^40 samples, an I/Q band
        reaching below 0 Hz (centre below rate/2) or above 3 GHz
        (:mod:`sdrx.limits`).

    Examples
    --------
    >>> info = CaptureInfo(Path("a.cu8"), Path("a.cu8"), 2.4e6, 1e6, "iq", "cu8", 10)
    >>> check_info(info)
    Traceback (most recent call last):
    ...
    sdrx.errors.CaptureError: a.cu8: the I/Q band -200 kHz to 2.2 MHz reaches below 0 Hz; --center 1 MHz must be at least rate/2 = 1.2 MHz
    """
    from ..errors import CaptureError
    from ..limits import MAX_CAPTURE_RATE_HZ, MAX_CAPTURE_SAMPLES, MAX_RF_HZ, MIN_CAPTURE_RATE_HZ
    from ..units import format_frequency as ff

    if not MIN_CAPTURE_RATE_HZ <= info.fs <= MAX_CAPTURE_RATE_HZ:
        raise CaptureError(f"{info.path}: sample rate {info.fs:g} Hz is outside {ff(MIN_CAPTURE_RATE_HZ)} to "
                           f"{ff(MAX_CAPTURE_RATE_HZ)}")
    if info.samples > MAX_CAPTURE_SAMPLES:
        raise CaptureError(f"{info.path}: {info.samples} samples; at most 2^40 = {MAX_CAPTURE_SAMPLES} are read")
    if info.kind == "iq":
        lo, hi = info.band_hz
        if lo < 0:
            raise CaptureError(f"{info.path}: the I/Q band {ff(lo)} to {ff(hi)} reaches below 0 Hz; "
                               f"{center_name} {ff(info.center_hz)} must be at least rate/2 = {ff(info.fs / 2)}")
        if hi > MAX_RF_HZ:
            raise CaptureError(f"{info.path}: the I/Q band {ff(lo)} to {ff(hi)} reaches above {ff(MAX_RF_HZ)}; "
                               f"{center_name} {ff(info.center_hz)} is beyond what sdrx models")
    return info
