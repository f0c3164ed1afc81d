"""Averaged spectrum of a capture, streamed in blocks, calibrated so a carrier reads its level in dBFS."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["capture_spectrum", "spectrum_resolution", "Resolution", "LEVEL_UNIT"]

#: What the spectrum's level means (report.json and the figure's axis).
LEVEL_UNIT = ("dBFS per RBW: a carrier reads 20*log10 of its amplitude, noise reads its power within the "
              "resolution (equivalent noise) bandwidth")


@dataclass(frozen=True)
class Resolution:
    """The resolution of :func:`capture_spectrum` at one sample rate.

    Attributes
    ----------
    nfft : int
        FFT length (points per segment).
    bin_hz : float
        Bin spacing, ``fs / nfft``.
    rbw_hz : float
        Resolution bandwidth: the window's equivalent noise bandwidth,
        ``fs·Σw²/(Σw)²``.
    window : str
    """

    nfft: int
    bin_hz: float
    rbw_hz: float
    window: str = "hann"

    def to_json(self) -> dict:
        return {"window": self.window, "fft_points": self.nfft, "bin_hz": round(self.bin_hz, 3),
                "rbw_hz": round(self.rbw_hz, 3), "level": LEVEL_UNIT}


def _nfft(fs, resolution_hz):
    from ..limits import MAX_SURVEY_BINS

    return min(1 << max(8, int(math.ceil(math.log2(fs / resolution_hz)))), MAX_SURVEY_BINS)


def spectrum_resolution(fs, resolution_hz) -> Resolution:
    """FFT length, bin spacing and resolution bandwidth of :func:`capture_spectrum`.

    Notes
    -----
    Equivalent noise bandwidth of a window ``w`` in bins, ``N·Σw²/(Σw)²``
    (F. J. Harris, "On the use of windows for harmonic analysis with the
    discrete Fourier transform", Proc. IEEE 66(1), 1978, sec. IV-A); about
    1.5 bins for the Hann window.

    Examples
    --------
    >>> r = spectrum_resolution(1.2e6, 500.0)
    >>> r.nfft, round(r.bin_hz, 1), round(r.rbw_hz / r.bin_hz, 3)
    (4096, 293.0, 1.5)
    """
    nfft = _nfft(float(fs), resolution_hz)
    win = np.hanning(nfft)
    return Resolution(nfft, float(fs) / nfft, float(fs) * float(np.sum(win ** 2)) / float(np.sum(win)) ** 2)


def capture_spectrum(reader, resolution_hz, *, start_s=0.0, duration_s=None, max_s=2.0, progress=None):
    """Averaged periodogram of a capture excerpt.

    Parameters
    ----------
    reader
        An open capture (``sdrx.capture.open_capture``): ``info`` and ``blocks``.
    resolution_hz : float
        Largest bin spacing wanted; the FFT length is the next power of two
        of ``fs / resolution_hz``.
    start_s, duration_s : float
        Excerpt of the capture (``duration_s`` None: to the end).
    max_s : float
        Use at most this many seconds of the excerpt (bounded time).
    progress : callable, optional
        ``progress(done, total)`` in segments.

    Returns
    -------
    freqs_hz : ndarray
        Absolute RF frequency of each bin (I/Q: centre + baseband; real: 0..fs/2).
    level_dbfs : ndarray
        ``20·log10`` of the RMS-averaged bin magnitude over the window sum,
        so that a carrier at a bin centre reads ``20·log10(A)`` (the project's
        level convention: peak of a real cosine, |x| of a complex exponential)
        and noise reads its power within the resolution bandwidth
        (:func:`spectrum_resolution`), in the same full scale.

    Notes
    -----
    Hann window, no overlap, Welch-style averaging of |X|² (one segment at
    a time: memory is one block plus one segment).
    """
    info = reader.info
    fs = float(info.fs)
    nfft = _nfft(fs, resolution_hz)
    _first, avail = reader.sample_range(start_s, duration_s)
    dur = min(avail / fs, max_s)
    win = np.hanning(nfft)
    wsum = float(win.sum())
    iq = info.kind == "iq"
    acc = np.zeros(nfft if iq else nfft // 2 + 1)
    buf = np.zeros(0, dtype=np.complex128 if iq else np.float64)
    count = 0
    total = max(1, int(dur * fs) // nfft)
    for block in reader.blocks(block_size=max(nfft, 65536), start_s=start_s, duration_s=dur):
        buf = np.concatenate([buf, np.asarray(block, dtype=buf.dtype)])
        while buf.size >= nfft:
            seg, buf = buf[:nfft], buf[nfft:]
            spec = np.fft.fft(seg * win) if iq else np.fft.rfft(seg * win)
            acc += np.abs(spec) ** 2
            count += 1
            if progress is not None:
                progress(min(count, total), total)
    if count == 0:  # excerpt shorter than one segment: zero-pad what there is
        seg = np.zeros(nfft, dtype=buf.dtype)
        seg[: buf.size] = buf
        spec = np.fft.fft(seg * win) if iq else np.fft.rfft(seg * win)
        acc += np.abs(spec) ** 2
        count = 1
    mag = np.sqrt(acc / count) / wsum
    if iq:
        freqs = info.center_hz + np.fft.fftshift(np.fft.fftfreq(nfft, 1 / fs))
        mag = np.fft.fftshift(mag)
    else:
        freqs = np.fft.rfftfreq(nfft, 1 / fs)
        mag = 2 * mag
    with np.errstate(divide="ignore"):
        level = 20 * np.log10(np.maximum(mag, 1e-15))
    return freqs, level
