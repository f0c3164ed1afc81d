"""Base of the program generators: a stateful audio source read in any block size.

A source renders audio in fixed internal chunks and hands it out through a
queue, so what :meth:`ProgramSource.read` returns never depends on how the
caller cuts its reads. Subclasses implement :meth:`ProgramSource._render`.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

__all__ = ["ProgramSource", "Normalised", "broadcast_sos", "CHUNK"]

CHUNK = 4096  # samples rendered per internal step (fixed: part of the definition of every program)


class ProgramSource:
    """Audio program p[n] at rate ``fs``, read block by block.

    Parameters
    ----------
    fs : float
        Sample rate of the program, Hz.

    Notes
    -----
    State is explicit: ``position`` (samples handed out), the queue of rendered
    samples not yet read, and whatever the subclass keeps (filter ``zi``,
    oscillator phase, event schedule).
    """

    def __init__(self, fs: float):
        self.fs = float(fs)
        self.position = 0
        self._rendered = 0
        self._queue: list[np.ndarray] = []
        self._queued = 0

    def read(self, n: int) -> np.ndarray:
        """Return the next ``n`` samples (float64, in [-1, 1] for normalised programs)."""
        n = int(n)
        while self._queued < n:
            block = np.asarray(self._render(self._rendered, CHUNK), dtype=np.float64)
            self._rendered += CHUNK
            self._queue.append(block)
            self._queued += block.size
        out = np.empty(n)
        filled = 0
        while filled < n:
            head = self._queue[0]
            take = min(head.size, n - filled)
            out[filled:filled + take] = head[:take]
            filled += take
            if take == head.size:
                self._queue.pop(0)
            else:
                self._queue[0] = head[take:]
        self._queued -= n
        self.position += n
        return out

    def _render(self, start: int, count: int) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError


class Normalised(ProgramSource):
    """Scale a raw source by a fixed gain and limit it to [-1, 1].

    Parameters
    ----------
    make_raw : callable
        ``make_raw() -> ProgramSource``; called twice: once to measure the peak
        over the calibration window, once for the audio handed out.
    calibration_samples : int
        Length of the window whose peak is brought to exactly 1.

    Notes
    -----
    gain = 1 / max|raw[0:N]|; p = clip(gain·raw, -1, 1). The peak over the
    first N samples is exactly 1 (so a station's peak modulation there is its
    depth m); a later sample above that peak is clipped, as a broadcast peak
    limiter would (common practice), so |p| <= 1 always.
    """

    def __init__(self, make_raw, calibration_samples: int):
        probe = make_raw()
        super().__init__(probe.fs)
        peak = 0.0
        left = int(calibration_samples)
        while left > 0:
            take = min(left, CHUNK * 4)
            peak = max(peak, float(np.max(np.abs(probe.read(take)))))
            left -= take
        self.gain = 1.0 / peak if peak > 0 else 1.0
        self._raw = make_raw()

    def _render(self, start, count):
        return np.clip(self._raw.read(count) * self.gain, -1.0, 1.0)


def broadcast_sos(fs: float, low_hz: float, high_hz: float) -> np.ndarray:
    """Band-limiting filter of broadcast audio: high-pass at ``low_hz``, low-pass at ``high_hz``.

    Parameters
    ----------
    fs : float
        Sample rate, Hz.
    low_hz : float
        Second-order Butterworth high-pass corner (0 for none).
    high_hz : float
        Elliptic low-pass passband edge (0.1 dB ripple), stop band 60 dB down
        from 1.25·high_hz (or just below fs/2).

    Returns
    -------
    numpy.ndarray
        Second-order sections.

    Notes
    -----
    ITU-R BS.639: a DSB AM emission is twice the audio bandwidth wide, so a
    4.5 kHz audio low-pass keeps the emission inside 9 kHz.

    Examples
    --------
    >>> sos = broadcast_sos(16000.0, 50.0, 4500.0)
    >>> w, h = signal.sosfreqz(sos, [1000.0, 6000.0], fs=16000.0)
    >>> bool(abs(abs(h[0]) - 1) < 0.02 and abs(h[1]) < 1e-3)
    True
    """
    nyq = fs / 2.0
    ws = min(high_hz * 1.25, nyq * 0.98)
    order, wn = signal.ellipord(high_hz, ws, 0.1, 60.0, fs=fs)
    parts = [signal.ellip(order, 0.1, 60.0, wn, btype="lowpass", output="sos", fs=fs)]
    if low_hz > 0:
        parts.append(signal.butter(2, low_hz, btype="highpass", output="sos", fs=fs))
    return np.vstack(parts)
