"""Audio fidelity: the response from antenna to audio against modulating frequency.

*Measured*: a carrier modulated 30 % by a tone stepping through the ISO 266
one-third-octave frequencies from 50 Hz to 10 kHz (and the predicted −3 dB
points), AGC held, no thermal noise (a strong-signal measurement); the
response at each frequency is the audio tone's amplitude (least-squares
fit) relative to that at 1 kHz. The −3 dB points are the predicted ones
moved by one Newton step along the predicted slope,
``f + (−3 − measured(f)) / slope(f)`` (exact when measured and predicted
differ by a constant there), as the measured selectivity does.

*Predicted*: for an envelope (or coherent) detector at small depth the audio
at fm is the in-phase sideband response of the designed antenna-to-IF
response H (relative to the tune), G(fm) = (H(fm) + conj H(−fm))/2, times the
audio filters (the analog Butterworth prototypes of ``[audio]``):
``20·log10(|G(fm)·Ha(fm)| / |G(1k)·Ha(1k)|)``. For a symmetric IF this is the
IF's attenuation of each sideband, e.g. 1/sqrt(1 + (Q(f/f0 − f0/f))²) for a
single-tuned stage (the universal resonance curve) or 1/sqrt(1 + Ω^(2n)),
Ω = (f/f0 − f0/f)·f0/B, for a Butterworth band-pass (low-pass to band-pass
transformation).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from .amtest import harmonic_fit, run_am_test, segment, third_octaves
from .sensitivity import audio_response

__all__ = ["Fidelity", "FIDELITY_FREQS_HZ", "predicted_response_db", "predicted_edges_hz", "measure_fidelity"]

#: Modulating frequencies of the measured response: ISO 266 one-third octaves, 50 Hz to 10 kHz.
FIDELITY_FREQS_HZ = third_octaves(50.0, 10e3)
REFERENCE_HZ = 1000.0


def _in_phase_gain(design, tune_hz, f):
    ref = design.rf_response(np.array([tune_hz]), tune_hz)[0]
    hp = design.rf_response(tune_hz + f, tune_hz) / ref
    hm = design.rf_response(tune_hz - f, tune_hz) / ref
    return 0.5 * (hp + np.conj(hm))


def predicted_response_db(design, tune_hz: float, f_hz) -> np.ndarray:
    """Predicted antenna-to-audio response at modulating frequencies ``f_hz``, dB re 1 kHz.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> [round(float(v), 2) for v in predicted_response_db(design_chain("medium"), 1e6, [80.0, 1000.0, 3000.0])]
    [-2.68, 0.0, -2.97]
    """
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    both = np.concatenate([f, [REFERENCE_HZ]])
    h = np.abs(_in_phase_gain(design, tune_hz, both) * audio_response(design, both))
    return 20 * np.log10(h[:-1] / h[-1])


def predicted_edges_hz(design, tune_hz: float, level_db: float = 3.0, lo_hz: float = 10.0, hi_hz=None):
    """Frequencies below and above 1 kHz where the predicted response first falls ``level_db``.

    Returns
    -------
    (float or None, float or None)
        None where the response does not fall that far between ``lo_hz``
        and ``hi_hz`` (default: just below half the audio rate).
    """
    hi_hz = 0.49 * design.audio.rate_hz if hi_hz is None else hi_hz
    g = lambda lf: float(predicted_response_db(design, tune_hz, [10.0 ** lf])[0]) + level_db  # noqa: E731
    out = []
    for a, b in ((REFERENCE_HZ, lo_hz), (REFERENCE_HZ, hi_hz)):
        grid = np.geomspace(a, b, 200)
        y = predicted_response_db(design, tune_hz, grid) + level_db
        below = np.nonzero(y <= 0)[0]
        if below.size == 0:
            out.append(None)
            continue
        i = int(below[0])
        la, lb = sorted((math.log10(grid[i - 1]), math.log10(grid[i])))
        out.append(float(10.0 ** optimize.brentq(g, la, lb, xtol=1e-12)))
    return tuple(out)


@dataclass(frozen=True)
class Fidelity:
    """Measured and predicted audio response (Hz, dB re the 1 kHz response)."""

    response: tuple            # (Hz, dB) measured
    predicted: tuple           # (Hz, dB) at the same frequencies
    low_3db_hz: float | None
    high_3db_hz: float | None
    predicted_low_3db_hz: float | None
    predicted_high_3db_hz: float | None
    depth: float
    level_dbfs: float
    path: str


def _newton_edge(design, tune_hz, f_edge, measured_db, level_db=3.0):
    h = f_edge * 1e-4
    slope = float(np.diff(predicted_response_db(design, tune_hz, [f_edge - h, f_edge + h]))[0] / (2 * h))
    if slope == 0 or not math.isfinite(measured_db):
        return None
    return f_edge + (-level_db - measured_db) / slope


def measure_fidelity(design, tune_hz: float, *, path: str = "fast", spacing_hz: float = 10e3, depth: float = 0.3,
                     level_dbfs: float = -40.0, freqs_hz=FIDELITY_FREQS_HZ) -> Fidelity:
    """Antenna-to-audio response of the chain, AGC held, measured beside its prediction.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    path : {"fast", "exact"}
    spacing_hz : float
    depth : float
        Modulation depth of the test tone (30 %).
    level_dbfs : float
        Carrier level at the antenna.
    freqs_hz : sequence of float
        Modulating frequencies (1 kHz and the predicted −3 dB points are added).

    Returns
    -------
    Fidelity

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> fid = measure_fidelity(design_chain("medium"), 1e6, freqs_hz=(400.0,))
    >>> round(fid.low_3db_hz), round(fid.high_3db_hz)
    (77, 3012)
    """
    p_lo, p_hi = predicted_edges_hz(design, tune_hz)
    top = 0.45 * design.audio.rate_hz
    extra = [f for f in (p_lo, p_hi) if f is not None and 20.0 <= f <= top]
    freqs = np.unique(np.round(np.concatenate([np.asarray(freqs_hz, float), [REFERENCE_HZ], extra]), 6))
    freqs = freqs[freqs <= top]
    segs = [segment(f, depth) for f in freqs]
    audio, fa = run_am_test(design, tune_hz, segs, level_dbfs=level_dbfs, path=path, spacing_hz=spacing_hz)
    amps = np.array([harmonic_fit(a, fa, f, 1)[0][0] for a, f in zip(audio, freqs)])
    ref = amps[int(np.argmin(np.abs(freqs - REFERENCE_HZ)))]
    meas = 20 * np.log10(np.maximum(amps, 1e-300) / ref)
    pred = predicted_response_db(design, tune_hz, freqs)

    def edge(p):
        if p is None or p not in extra:
            return None
        i = int(np.argmin(np.abs(freqs - p)))
        return _newton_edge(design, tune_hz, p, float(meas[i]))

    return Fidelity(tuple(zip(freqs.tolist(), meas.tolist())), tuple(zip(freqs.tolist(), pred.tolist())),
                    edge(p_lo), edge(p_hi), p_lo, p_hi, float(depth), float(level_dbfs), path)
