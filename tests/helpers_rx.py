"""Shared helpers for the receiver-chain tests: test signals, running a Receiver, audio measurements.

Signals follow sdrx's capture conventions (README, file formats): an RF signal in an I/Q
capture is Re{x e^{j2π f_c t}}, so a carrier of amplitude A at RF frequency f
is A·exp(2jπ(f − center)n/fs) and reads 20·log10(A) dBFS.

Measurements:
- ``sine_fit``: least-squares fit of a sine of known frequency plus DC, the
  three-parameter sine fit of IEEE Std 1241 (ADC testing) / IEEE Std 1057.
- ``sinad_db``: (signal + noise + distortion) / (noise + distortion), the
  power of the audio over the power of the fit residual (IEEE Std 1241).
- ``thd``: harmonic amplitudes by a joint least-squares fit of the
  fundamental and harmonics 2..K; THD = sqrt(Σ A_k²)/A_1 (IEEE Std 1241).
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np

from sdrx.receiver import Receiver

__all__ = [
    "iq_info",
    "carrier",
    "am_station",
    "complex_noise",
    "run_receiver",
    "carrier_level_db",
    "sine_fit",
    "sinad_db",
    "thd",
    "find_crossing",
    "feed_blocks",
]

TWO_PI = 2.0 * math.pi


def iq_info(fs: float, center_hz: float, path: str = "mem"):
    """A minimal capture description (fs, kind, center, band) for Receiver."""
    return SimpleNamespace(fs=float(fs), kind="iq", center_hz=float(center_hz),
                           band_hz=(center_hz - fs / 2, center_hz + fs / 2), path=path)


def carrier(f_hz: float, level_dbfs: float, fs: float, center_hz: float, n: int, phase: float = 0.0,
            start: int = 0) -> np.ndarray:
    """Unmodulated carrier at RF f_hz of level_dbfs in an I/Q capture centred at center_hz."""
    a = 10.0 ** (level_dbfs / 20.0)
    k = np.arange(start, start + n, dtype=np.float64)
    return a * np.exp(1j * (TWO_PI * (f_hz - center_hz) * k / fs + phase))


def am_station(f_hz: float, level_dbfs: float, depth: float, fm_hz: float, fs: float, center_hz: float,
               n: int, phase: float = 0.0, audio_phase: float = 0.0) -> np.ndarray:
    """Carrier A·(1 + m·cos(2π fm t)) at RF f_hz (DSB AM, tone modulation)."""
    t = np.arange(n, dtype=np.float64) / fs
    env = 1.0 + depth * np.cos(TWO_PI * fm_hz * t + audio_phase)
    return env * carrier(f_hz, level_dbfs, fs, center_hz, n, phase)


def complex_noise(rng, power: float, n: int) -> np.ndarray:
    """Circular complex white Gaussian noise of total power E|x|² = power."""
    s = math.sqrt(power / 2.0)
    return s * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def run_receiver(design, info, tune_hz, x, *, path="fast", hold_db=None, block=None, flush=True, **kw):
    """Run x through a fresh Receiver; return (audio, rx)."""
    rx = Receiver(design, info, tune_hz, path=path, agc_hold_gain_db=hold_db, **kw)
    x = np.asarray(x)
    x = x.astype(np.complex64) if np.iscomplexobj(x) else x.astype(np.float32)   # I/Q or real capture
    if block is None:
        parts = [rx.process(x)]
    else:
        parts = [rx.process(x[i:i + block]) for i in range(0, len(x), block)]
    if flush:
        parts.append(rx.flush())
    return np.concatenate(parts), rx


def carrier_level_db(design, info, tune_hz, f_hz, *, level_dbfs=-20.0, seconds=0.03, settle_s=0.01,
                     path="fast", hold_db=None) -> float:
    """Antenna-referred carrier level (dBFS) the Receiver reports for one carrier at f_hz."""
    n = int(round(seconds * info.fs))
    x = carrier(f_hz, level_dbfs, info.fs, info.center_hz, n)
    _, rx = run_receiver(design, info, tune_hz, x, path=path, hold_db=hold_db)
    return rx.stats(settle_s)["carrier_dbfs"]["mean"]


def _design_matrix(n: int, fs: float, freqs) -> np.ndarray:
    t = np.arange(n) / fs
    cols = [np.ones(n)]
    for f in freqs:
        cols += [np.cos(TWO_PI * f * t), np.sin(TWO_PI * f * t)]
    return np.column_stack(cols)


def sine_fit(x, fs: float, f_hz: float):
    """Three-parameter least-squares sine fit (known frequency): (amplitude, fitted, residual)."""
    x = np.asarray(x, float)
    A = _design_matrix(len(x), fs, [f_hz])
    c, *_ = np.linalg.lstsq(A, x, rcond=None)
    fitted = A @ c
    return float(math.hypot(c[1], c[2])), fitted, x - fitted


def sinad_db(x, fs: float, f_hz: float) -> float:
    """SINAD: power of the AC audio over the power left after removing the fitted tone, dB."""
    x = np.asarray(x, float)
    _, fitted, res = sine_fit(x, fs, f_hz)
    ac = x - np.mean(x)
    return float(10 * np.log10(np.sum(ac ** 2) / np.sum(res ** 2)))


def thd(x, fs: float, f_hz: float, n_harmonics: int = 6) -> float:
    """Total harmonic distortion, sqrt(ΣA_k²)/A_1 for k = 2..n_harmonics+1 (ratio, not %)."""
    x = np.asarray(x, float)
    freqs = [f_hz * k for k in range(1, n_harmonics + 2) if f_hz * k < fs / 2]
    A = _design_matrix(len(x), fs, freqs)
    c, *_ = np.linalg.lstsq(A, x, rcond=None)
    amps = np.hypot(c[1::2], c[2::2])
    return float(np.sqrt(np.sum(amps[1:] ** 2)) / amps[0])


def find_crossing(func, target: float, a: float, b: float, *, xtol: float, maxiter: int = 40) -> float:
    """Root of func(x) = target bracketed by [a, b], by the Illinois variant of regula falsi.

    Notes
    -----
    Illinois method: Dowell & Jarratt, BIT 11 (1971) 168-174.
    """
    fa, fb = func(a) - target, func(b) - target
    if fa * fb > 0:
        raise AssertionError(f"no crossing of {target} between {a} ({fa + target}) and {b} ({fb + target})")
    for _ in range(maxiter):
        c = b - fb * (b - a) / (fb - fa)
        fc = func(c) - target
        if fc == 0:
            return c
        if fc * fb < 0:
            a, fa = b, fb
        else:
            fa /= 2.0
        b, fb = c, fc
        if abs(b - a) < xtol:
            break
    return b - fb * (b - a) / (fb - fa)


def feed_blocks(stage, x, block=None) -> np.ndarray:
    """Run a streaming stage (``process`` then ``flush``) over x, whole or in blocks of ``block``."""
    if block is None:
        parts = [stage.process(x)]
    else:
        parts = [stage.process(x[i:i + block]) for i in range(0, len(x), block)]
    parts.append(stage.flush())
    return np.concatenate(parts)
