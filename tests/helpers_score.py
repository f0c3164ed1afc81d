"""Scoring a receiver's audio on programme material against the synthesizer's truth.

A listener judges a chain by what it adds to the programme: noise, interference,
distortion, pumping. The chain's intended linear response (its audio band, the
IF filters' group delay) is not an error. So the score fits the best linear,
time-invariant map from the transmitted programme p to the audio y, a
least-squares FIR equalizer h (Wiener filter) long enough to span the chain's
dispersion, and counts everything it cannot explain as error:

    SNR = 10·log10( Σ (h ∗ p)² / Σ (y − h ∗ p)² )

The normal equations R·h = r use the programme's autocorrelation R (a Toeplitz
matrix) and the cross-correlation r of the audio with the programme (the
Wiener–Hopf equations; Haykin, *Adaptive Filter Theory*, 4th ed., ch. 2, the
Wiener filter). A gain that rides the modulation is a time-varying,
non-linear map, so it shows up in the error, as a listener hears it.

Programme truth: :func:`programme_from_truth` regenerates a station's programme
p from the truth sidecar (``make_program(program, program_fs, program_seed)``,
the sidecar's own recipe) and resamples it to the audio rate.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
from scipy import linalg, signal

from sdrx.synth import make_program

__all__ = ["programme_snr_db", "programme_from_truth", "equalizer_fit"]


def programme_from_truth(truth, station: str | int, audio_fs: float, start_s: float, seconds: float):
    """A station's programme p(t) (the modulating signal, in [-1, 1]) on the audio grid.

    Parameters
    ----------
    truth : dict or path
        The truth sidecar (``<stem>.truth.json``) or its parsed content.
    station : str or int
        Station name or index in ``truth["stations"]``.
    audio_fs : float
        Rate of the audio it is compared with, Hz.
    start_s, seconds : float
        The span of capture time the audio covers.

    Returns
    -------
    ndarray
        p at ``audio_fs`` for capture times ``start_s + k/audio_fs``.
    """
    if not isinstance(truth, dict):
        truth = json.loads(Path(truth).read_text(encoding="utf-8"))
    stations = truth["stations"]
    st = stations[station] if isinstance(station, int) else next(s for s in stations if s["name"] == station)
    fa = float(st["program_fs"])
    src = make_program(st["program"], fa, int(st["program_seed"]))
    # render from t = 0 (programs are stateful streams), with margin for the resampler
    n_prog = int(math.ceil((start_s + seconds) * fa)) + 64
    p = src.read(n_prog)
    up, down = _ratio(audio_fs, fa)
    p_audio = signal.resample_poly(p, up, down)
    k0 = int(round(start_s * audio_fs))
    n = int(round(seconds * audio_fs))
    return p_audio[k0:k0 + n]


def _ratio(a: float, b: float) -> tuple:
    from fractions import Fraction

    fr = Fraction(a / b).limit_denominator(1000)
    return fr.numerator, fr.denominator


def equalizer_fit(y: np.ndarray, p: np.ndarray, start: int, taps: int, max_delay: int):
    """Least-squares FIR h with y[m] ≈ Σ_j h_j·p[m − d − j] for m ≥ start (the covariance method).

    The normal equations are formed exactly over the scored samples (no
    windowing: the programme before ``start`` supplies the taps' history),
    and solved by Cholesky factorisation.

    Parameters
    ----------
    y, p : ndarray
        Audio and programme on the same grid.
    start : int
        First scored sample; must be at least ``max_delay + taps``.
    taps : int
        Equalizer length.
    max_delay : int
        Longest bulk delay searched, samples.

    Returns
    -------
    (target, fitted, d, h)
        The scored audio (mean removed), the equalised programme, the first
        lag, the taps.
    """
    if start < max_delay + taps:
        raise ValueError(f"start {start} must be at least max_delay + taps = {max_delay + taps}")
    n = min(len(y), len(p)) - start
    target = np.asarray(y[start:start + n], float)
    target = target - target.mean()
    p = np.asarray(p, float) - np.mean(p[start:start + n])
    # bulk delay: the peak of the cross-correlation, with the taps starting a little before it
    xc = signal.correlate(p[start - max_delay:start + n], target, mode="valid", method="fft")[::-1]
    d = max(0, int(np.argmax(np.abs(xc))) - taps // 8)
    seg = p[start - d - taps + 1:start + n - d]          # column j of the regression is seg[taps-1-j:][:n]
    c = signal.correlate(seg, target, mode="valid", method="fft")       # c[i] = Σ_m seg[i+m]·target[m]
    r = c[::-1]
    G = _gram(seg, n, taps)                               # G[a, b] = Σ_m seg[a+m]·seg[b+m]
    R = G[::-1, ::-1]
    R[np.diag_indices(taps)] *= 1.0 + 1e-10               # a whisper of ridge: band-limited programmes
    h = linalg.solve(R, r, assume_a="pos")
    fitted = signal.correlate(seg, h[::-1], mode="valid", method="fft")[:n]
    return target, fitted, d, h


def _gram(seg: np.ndarray, n: int, taps: int) -> np.ndarray:
    """G[a, b] = Σ_{m<n} seg[a+m]·seg[b+m] for a, b < taps, exactly, from its first row and the
    recursion G[a+1, b+1] = G[a, b] + seg[a+n]·seg[b+n] − seg[a]·seg[b] along each diagonal."""
    first = signal.correlate(seg[:n + taps - 1], seg[:n], mode="valid", method="fft")   # G[0, t]
    G = np.empty((taps, taps))
    for t in range(taps):
        i = np.arange(taps - 1 - t)
        upd = seg[n + i] * seg[n + i + t] - seg[i] * seg[i + t]
        diag = first[t] + np.concatenate([[0.0], np.cumsum(upd)])
        G[np.arange(taps - t), np.arange(t, taps)] = diag
        G[np.arange(t, taps), np.arange(taps - t)] = diag
    return G


def programme_snr_db(y: np.ndarray, p: np.ndarray, fs: float, *, skip_s: float = 0.5,
                     taps: int | None = None, max_delay_s: float = 0.01, band_hz: float | None = None) -> float:
    """Programme SNR of audio y against the transmitted programme p, in dB.

    Parameters
    ----------
    y : ndarray
        Receiver audio.
    p : ndarray
        The programme on the same grid (:func:`programme_from_truth`).
    fs : float
        Their rate, Hz.
    skip_s : float
        Settling left out at the start (the score uses the rest; the
        programme before it gives the equalizer its history).
    taps : int, optional
        Equalizer length; default 40 ms, which spans the impulse response of
        the IF and audio filters of sdrx's chains (the 80 Hz audio high-pass
        rings for about 20 ms to -60 dB) with room to spare.
    max_delay_s : float
        Longest bulk delay searched.
    band_hz : float, optional
        Count the error only below this frequency: the programme's own band
        (4.5 kHz for broadcast AM audio, ITU-R BS.639's emission width of
        2 × 4.5 kHz). Audio and programme pass the same low-pass (8th-order
        Butterworth) first, so the fit between them is unchanged. Audio S/N is
        always stated over a measurement band (common practice); without
        ``band_hz`` everything the audio holds outside the programme, such as
        the adjacent channel's splatter above it, counts as error too.
    """
    if band_hz is not None:
        sos = signal.butter(8, band_hz, fs=fs, output="sos")
        y, p = signal.sosfilt(sos, y), signal.sosfilt(sos, p)
    if taps is None:
        taps = int(round(0.04 * fs))
    max_delay = int(round(max_delay_s * fs))
    start = max(int(round(skip_s * fs)), max_delay + taps)
    target, fitted, _, _ = equalizer_fit(y, p, start, taps, max_delay)
    err = target - fitted
    return float(10.0 * np.log10(np.sum(fitted ** 2) / max(np.sum(err ** 2), 1e-300)))
