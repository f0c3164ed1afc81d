"""AudioWriter: the receiver's audio output, a WAV file written block by block."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import OutputError, ParameterError
from ..fileio import check_output
from .datatypes import parse_datatype
from .wavio import WavStream, WavStreamWriter

__all__ = ["AudioWriter"]

_PCM16 = parse_datatype("ri16_le")
_FLOAT = parse_datatype("rf32_le")


class AudioWriter(WavStreamWriter):
    """Write audio in [-1, 1] to WAV: 16-bit PCM (default) or 32-bit float; RF64 over 4 GiB.

    Parameters
    ----------
    path : str or Path
        Output ``.wav`` path (checked at once: not an input, not existing without ``force``).
    fs : float
        Audio sample rate; a whole number of Hz.
    float_output : bool
        Write 32-bit float samples (unclipped) instead of 16-bit PCM.
    channels : int
        1 (blocks of shape (n,)) or 2 (blocks of shape (n, 2)).
    expected_samples : int, optional
        Frames that will be written, when known; picks WAV or RF64 (over
        4 GiB) up front. Without it room for the RF64 header is reserved and
        the choice is made at close from the actual size.
    force : bool
        Replace an existing file.
    inputs : iterable of paths
        Files the output must not be.
    outputs : OutputSet, optional
        A set of outputs the WAV joins (e.g. with its run summary); by
        default it is a set of its own, renamed into place at close.

    Notes
    -----
    PCM: code = clip(round(x·32768), -32768, 32767) (round half to even), the
    inverse of reading int16/32768, so +1.0 itself clips by one step. The
    count of clipped values is returned by :meth:`write` and totalled in
    :attr:`clipped`; with ``float_output`` nothing is altered and
    :attr:`clipped` counts values beyond ±1 (they would clip on playback).

    Examples
    --------
    >>> import tempfile, pathlib, soundfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "out.wav"
    >>> with AudioWriter(p, 8000) as a:
    ...     a.write(np.array([0.25, -0.5, 1.5]))
    1
    >>> soundfile.read(p)[0].tolist()
    [0.25, -0.5, 0.999969482421875]
    """

    def __init__(self, path, fs, *, float_output: bool = False, channels: int = 1, expected_samples=None,
                 force: bool = False, inputs=(), outputs=None):
        self.path = Path(path)
        if channels not in (1, 2):
            raise ParameterError(f"channels: must be 1 or 2, got {channels!r}")
        if self.path.suffix.lower() != ".wav":
            raise ParameterError(f"-o {self.path}: audio is written as WAV; name a .wav file")
        check_output(self.path, inputs=tuple(inputs), force=force)
        self.fs = float(fs)
        self.channels = channels
        self.float_output = bool(float_output)
        self.samples = 0
        self.clipped = 0
        self._stream = WavStream(self.path, fs, channels, "float32" if float_output else "pcm16",
                                 expected_frames=expected_samples, info={}, outputs=outputs)
        self._closed = False

    def write(self, block) -> int:
        """Append a block of audio; returns the number of values clipped (see Notes)."""
        if self._closed:
            raise OutputError(f"{self.path}: writer is closed")
        try:
            a = np.asarray(block, dtype=np.float64)
            if self.channels == 1 and a.ndim == 2 and a.shape[1] == 1:
                a = a[:, 0]
            want = 1 if self.channels == 1 else 2
            if a.ndim != want or (want == 2 and a.shape[1] != 2):
                raise ParameterError(
                    f"{self.path}: expected blocks of shape {'(n,)' if want == 1 else '(n, 2)'}, got {a.shape}"
                )
            flat = np.ascontiguousarray(a).reshape(-1)
            if self.float_output:
                codes, _ = _FLOAT.encode(flat)
                clipped = int(np.count_nonzero(np.abs(flat) > 1.0))
            else:
                codes, clipped = _PCM16.encode(flat)
            self._stream.write_codes(codes)
        except BaseException:
            self.abort()
            raise
        self.samples += a.shape[0]
        self.clipped += clipped
        return clipped
