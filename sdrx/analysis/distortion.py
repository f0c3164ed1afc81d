"""Distortion: THD of the audio at 30, 80 and 95 % modulation, at 1 kHz and against modulating frequency.

*Measured*: for each depth a carrier is modulated by a tone stepping through
the ISO 266 one-third octaves from 100 Hz to 5 kHz (1 kHz among them), AGC
held, no thermal noise. THD is the total harmonic distortion referred to the
fundamental, ``sqrt(Σ_{k=2..10} A_k²) / A_1`` (× 100 %), from a joint
least-squares fit of the fundamental and its harmonics below half the audio
rate (IEEE Std 1241 sine-fit method). It is measured at the audio output, so
harmonics above the audio low-pass count as the listener hears them
(attenuated).

*Diode detector*: an ideal diode charging an RC load follows the envelope
A(1 + m·cos ωt) only while the envelope falls no faster than the capacitor
discharges; it does so at every instant when

    RC ≤ sqrt(1 − m²) / (2π·fm·m)

(diagonal clipping; Haykin, Communication Systems, AM envelope detection).
For the chain's RC each depth is free of diagonal clipping below
``fm = sqrt(1 − m²)/(2π·RC·m)``: the figure marks that frequency.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..dsp.detectors import diagonal_clipping_limit_s
from .amtest import harmonic_fit, run_am_test, segment, third_octaves

__all__ = ["Distortion", "DEPTHS", "THD_FREQS_HZ", "clipping_onset_hz", "thd_percent", "measure_distortion"]

#: Modulation depths measured.
DEPTHS = (0.3, 0.8, 0.95)
#: Modulating frequencies of the THD sweep (ISO 266 one-third octaves).
THD_FREQS_HZ = third_octaves(100.0, 5000.0)
TONE_HZ = 1000.0
HARMONICS = 10


def clipping_onset_hz(rc_s: float, m: float) -> float:
    """Modulating frequency above which an RC load clips diagonally at depth m, Hz.

    The diagonal-clipping limit RC ≤ sqrt(1 − m²)/(2π·fm·m) solved for fm.

    Examples
    --------
    >>> round(clipping_onset_hz(300e-6, 0.3)), round(clipping_onset_hz(300e-6, 0.8))
    (1687, 398)
    """
    if m <= 0:
        return math.inf
    if m >= 1:
        return 0.0
    return math.sqrt(1 - m * m) / (2 * math.pi * rc_s * m)


def thd_percent(x, fs: float, f_hz: float, harmonics: int = HARMONICS) -> float:
    """THD referred to the fundamental, %: 100·sqrt(Σ_{k≥2} A_k²)/A_1 from a least-squares fit.

    Examples
    --------
    >>> t = np.arange(4800) / 48000
    >>> x = np.cos(2 * np.pi * 500 * t) + 0.03 * np.cos(2 * np.pi * 1500 * t) + 0.04 * np.sin(2 * np.pi * 2e3 * t)
    >>> round(thd_percent(x, 48000, 500.0), 6)
    5.0
    """
    amps, _ = harmonic_fit(x, fs, f_hz, harmonics)
    return float(100.0 * math.sqrt(float(np.sum(amps[1:] ** 2))) / amps[0])


@dataclass(frozen=True)
class Distortion:
    """THD at the tone for each depth, THD against frequency, and the diode's clipping onsets."""

    thd_percent: dict          # depth (str) -> THD % at 1 kHz
    thd_vs_frequency: dict     # depth (str) -> ((Hz, THD %), ...)
    rc_us: float | None        # diode detector's RC, None for other detectors
    clipping_onset_hz: dict    # depth (str) -> fm above which diagonal clipping starts (diode only)
    limit_rc_us: dict          # depth (str) -> the largest RC free of clipping at the tone (diode only)
    level_dbfs: float
    path: str


def _key(m: float) -> str:
    return f"{m:g}"


def measure_distortion(design, tune_hz: float, *, path: str = "fast", spacing_hz: float = 10e3,
                       depths=DEPTHS, freqs_hz=THD_FREQS_HZ, level_dbfs: float = -40.0) -> Distortion:
    """THD of the chain's audio against depth and modulating frequency, AGC held.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    path : {"fast", "exact"}
    spacing_hz : float
    depths : sequence of float
    freqs_hz : sequence of float
        Modulating frequencies (1 kHz is added).
    level_dbfs : float
        Carrier level at the antenna.

    Returns
    -------
    Distortion

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> d = measure_distortion(design_chain({"detector": {"kind": "diode", "rc_us": 300}}), 1e6,
    ...                        depths=(0.3, 0.8), freqs_hz=())
    >>> d.thd_percent["0.3"] < 0.5 < 5 < d.thd_percent["0.8"], round(d.clipping_onset_hz["0.8"])
    (True, 398)
    """
    freqs = np.unique(np.concatenate([np.asarray(freqs_hz, float), [TONE_HZ]]))
    freqs = freqs[freqs < 0.45 * design.audio.rate_hz]
    at_tone, sweep = {}, {}
    for m in depths:
        audio, fa = run_am_test(design, tune_hz, [segment(f, m) for f in freqs], level_dbfs=level_dbfs,
                                path=path, spacing_hz=spacing_hz)
        thd = [thd_percent(a, fa, f) for a, f in zip(audio, freqs)]
        sweep[_key(m)] = tuple(zip(freqs.tolist(), thd))
        at_tone[_key(m)] = thd[int(np.argmin(np.abs(freqs - TONE_HZ)))]
    det = design.detector
    rc_us, onset, limit = None, {}, {}
    if det.kind == "diode":
        rc_us = float(det.rc_us)
        for m in depths:
            onset[_key(m)] = clipping_onset_hz(rc_us * 1e-6, m)
            limit[_key(m)] = diagonal_clipping_limit_s(m, TONE_HZ) * 1e6
    return Distortion(at_tone, sweep, rc_us, onset, limit, float(level_dbfs), path)
