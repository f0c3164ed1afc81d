"""The user's WAV file as program: mixed to mono, resampled, band-limited, streamed.

Memory stays bounded whatever the file's length: the file is read through a
short sliding window, and each output sample is a windowed-sinc interpolation
at its exact position in the file.
"""

from __future__ import annotations

import math

import numpy as np
import soundfile as sf
from scipy import signal

from ..errors import ParameterError
from .source import ProgramSource, broadcast_sos

__all__ = ["WavSource", "sinc_kernel"]

_BETA = 8.6  # Kaiser window shape: about 80 dB side lobes (Kaiser's formula, beta = 0.1102 (A - 8.7))


def sinc_kernel(d: np.ndarray, cutoff: float, half_width: int) -> np.ndarray:
    """Kaiser-windowed sinc low-pass kernel at offsets ``d`` (input samples).

    Parameters
    ----------
    d : ndarray
        Offsets from the interpolation point, in input samples.
    cutoff : float
        Cut-off as a fraction of the input rate (0 < cutoff < 0.5).
    half_width : int
        The kernel is zero for |d| >= half_width.

    Returns
    -------
    ndarray

    Notes
    -----
    h(d) = 2c·sinc(2c·d)·I0(β·sqrt(1 − (d/W)²)) / I0(β) (Kaiser window: Oppenheim &
    Schafer, Discrete-Time Signal Processing, 3rd ed., Pearson 2010, sec. 7.5.3; from memory).

    Examples
    --------
    >>> round(float(sinc_kernel(np.array([0.0]), 0.25, 16)[0]), 6)
    0.5
    """
    u = np.clip(1.0 - (d / half_width) ** 2, 0.0, None)
    w = np.i0(_BETA * np.sqrt(u)) / np.i0(_BETA)
    return 2.0 * cutoff * np.sinc(2.0 * cutoff * d) * w * (np.abs(d) < half_width)


class WavSource(ProgramSource):
    """Raw (not normalised) program from a WAV file at rate ``fs``.

    Parameters
    ----------
    fs : float
        Output (program) rate, Hz.
    path : str
        The WAV file (any rate, any channel count: channels are averaged).
    bandwidth : float
        Audio low-pass edge, Hz.
    loop : bool
        Start again from the beginning at the end of the file (else silence).

    Raises
    ------
    ParameterError
        The file cannot be read, holds no samples, or (when reached) holds a
        NaN or infinite sample, named by its frame.

    Notes
    -----
    Output sample k sits at file position x = k·fw/fs; its value is
    Σ_j w(x − j)·s[j] over |x − j| < W with the kernel of :func:`sinc_kernel`
    (cut-off at the smaller of 0.45·fw, 0.45·fs and 1.1·bandwidth), then the
    broadcast band-limit of :func:`~sdrx.synth.source.broadcast_sos`.
    """

    def __init__(self, fs, path, bandwidth, loop):
        super().__init__(fs)
        self._path = path
        try:
            self._file = sf.SoundFile(path)
        except (RuntimeError, sf.LibsndfileError) as exc:
            raise ParameterError(f"program (wav): cannot read {path}: {exc}") from None
        self._frames = self._file.frames
        if self._frames == 0:
            raise ParameterError(f"program (wav): {path} holds no samples")
        self._fw = float(self._file.samplerate)
        self._loop = loop
        cutoff_hz = min(0.45 * self._fw, 0.45 * fs, 1.1 * bandwidth)
        self._cut = cutoff_hz / self._fw
        self._half = int(math.ceil(6.0 / self._cut))  # ~12 zero crossings each side
        self.period_samples = int(math.ceil(self._frames * fs / self._fw))
        self._win = np.zeros(0)
        self._win_start = 0
        self._post = broadcast_sos(fs, 0.0, bandwidth)
        self._post_zi = np.zeros((self._post.shape[0], 2))

    def _frames_at(self, lo, hi):
        """Mono samples of absolute input indices lo..hi-1 (looping or zero past the end)."""
        out = np.zeros(hi - lo)
        i = max(lo, 0)
        while i < hi:
            if self._loop:
                frame = i % self._frames
            elif i >= self._frames:
                break
            else:
                frame = i
            take = min(hi - i, self._frames - frame)
            self._file.seek(frame)
            data = self._file.read(take, dtype="float64", always_2d=True)
            bad = np.flatnonzero(~np.isfinite(data).all(axis=1))
            if bad.size:
                raise ParameterError(
                    f"program (wav): {self._path}: frame {frame + int(bad[0])} is not finite (NaN or infinite)"
                )
            out[i - lo:i - lo + data.shape[0]] = data.mean(axis=1)
            i += take
        return out

    def _window(self, lo, hi):
        win_end = self._win_start + self._win.size
        if lo < self._win_start or lo > win_end:
            self._win, self._win_start = self._frames_at(lo, hi), lo
        else:
            keep = self._win[lo - self._win_start:]
            extra = self._frames_at(max(win_end, lo), hi) if hi > win_end else np.zeros(0)
            self._win, self._win_start = np.concatenate((keep, extra)), lo
        return self._win[: hi - lo]

    def _render(self, start, count):
        k = np.arange(start, start + count, dtype=np.float64)
        x = k * (self._fw / self.fs)
        base = np.floor(x).astype(np.int64)
        lo = int(base[0]) - self._half + 1
        hi = int(base[-1]) + self._half + 1
        win = self._window(lo, hi)
        offs = np.arange(-self._half + 1, self._half + 1)
        idx = (base - lo)[:, None] + offs[None, :]
        d = x[:, None] - (base[:, None] + offs[None, :])
        y = (sinc_kernel(d, self._cut, self._half) * win[idx]).sum(axis=1)
        out, self._post_zi = signal.sosfilt(self._post, y, zi=self._post_zi)
        return out
