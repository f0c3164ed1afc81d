"""Capture metadata shared by every reader: :class:`CaptureInfo`."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Optional

__all__ = ["CaptureInfo"]


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
