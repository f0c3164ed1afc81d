"""A receiver test bench in code: an AM signal generator into the chain, an audio analyser after it.

The generator makes a short I/Q capture of one carrier at the tune, modulated
A·(1 + m·cos φ(t)) by a tone that steps through a list of *segments*
(modulating frequency, depth), phase-continuous across the steps. With the
front end's thermal noise on, the capture is that of the selectivity
measurements (:func:`sdrx.analysis.selectivity.tone_capture`, centred on the
LO), which holds the image channel too, so that the noise reaching the IF
through the image response is there as in a real receiver; without noise
the image channel holds nothing, and a narrow capture centred on the tune
(2.5 channel rates wide) gives the same audio at a fraction of the work.
The capture runs through :class:`sdrx.receiver.Receiver` with the AGC held;
the analyser cuts the audio of each segment after its settling time and fits
the tone and its harmonics by least squares.

Harmonic fit: the multi-harmonic least-squares sine fit at a known
frequency (IEEE Std 1057 / IEEE Std 1241, sine-fit methods): the audio is
fitted by ``c0 + Σ_k a_k·cos(2πk·f·t) + b_k·sin(2πk·f·t)``; the amplitude of
harmonic k is ``hypot(a_k, b_k)`` and what the fit leaves is noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .selectivity import _ToneCapture, tone_capture

__all__ = ["Segment", "segment", "held_gain_db", "bench_capture", "run_am_test", "harmonic_fit", "third_octaves"]

TWO_PI = 2.0 * math.pi
#: Extra settling ahead of the first segment (filters, detector and AGC hold start from rest).
LEAD_S = 0.05
#: ISO 266 preferred frequencies of the one-third-octave series, Hz (the R10 series).
_R10 = (10.0, 12.5, 16.0, 20.0, 25.0, 31.5, 40.0, 50.0, 63.0, 80.0)


def third_octaves(lo_hz: float, hi_hz: float) -> tuple:
    """ISO 266 one-third-octave preferred frequencies from ``lo_hz`` to ``hi_hz`` inclusive.

    Examples
    --------
    >>> third_octaves(800, 2000)
    (800.0, 1000.0, 1250.0, 1600.0, 2000.0)
    """
    out = []
    for decade in range(-1, 6):
        for r in _R10:
            f = round(r * 10.0 ** decade, 6)
            if lo_hz * (1 - 1e-9) <= f <= hi_hz * (1 + 1e-9):
                out.append(f)
    return tuple(sorted(set(out)))


@dataclass(frozen=True)
class Segment:
    """One step of the modulating tone: frequency, depth, settling and measuring time."""

    fm_hz: float
    depth: float
    settle_s: float
    measure_s: float

    @property
    def seconds(self) -> float:
        return self.settle_s + self.measure_s


def segment(fm_hz: float, depth: float, *, settle_s: float = 0.03, periods: int = 8, min_s: float = 0.04,
            measure_s: float | None = None) -> Segment:
    """A segment measuring at least ``periods`` periods (and ``min_s``) after ``settle_s``.

    Examples
    --------
    >>> segment(50.0, 0.3).measure_s, segment(1000.0, 0.3).measure_s
    (0.16, 0.04)
    """
    m = measure_s if measure_s is not None else max(min_s, periods / fm_hz)
    return Segment(float(fm_hz), float(depth), float(settle_s), float(m))


def held_gain_db(design, tune_hz: float, level_dbfs: float) -> float:
    """AGC stage gain the loop would settle to for a carrier of ``level_dbfs`` at the tune.

    Holding it there puts the detector at the AGC's reference level, as the
    running loop would, without its movement during the measurement. With
    the AGC disabled the stage keeps its own gain (0 dB held).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> d = design_chain("medium")
    >>> round(held_gain_db(d, 1e6, -40.0), 2)   # -12 dBFS reference - 20 dB fixed stage - (-40 - 6.02 dB mixer)
    14.02
    """
    if not design.agc.enabled:
        return 0.0
    h = float(abs(design.rf_response(np.array([tune_hz]), tune_hz)[0]))
    need = design.agc.reference_dbfs - design.fixed_gain_db - (level_dbfs + 20.0 * math.log10(h))
    return float(min(max(need, design.agc.min_gain_db), design.agc.max_gain_db))


def bench_capture(design, tune_hz: float, spacing_hz: float, *, image: bool):
    """The test capture: with the image channel (``tone_capture``) or narrow, centred on the tune."""
    if image:
        return tone_capture(design, tune_hz, spacing_hz)
    from ..receiver.receiver import channel_rate

    return _ToneCapture(2.5 * channel_rate(design.audio.rate_hz, math.inf), float(tune_hz))


class _Carrier:
    """exp(j·2π·f·k/fs) for absolute sample indices k, from one table of the longest block."""

    def __init__(self, f_hz: float, fs: float, n_max: int):
        self.w = TWO_PI * f_hz / fs
        self.table = np.exp(1j * self.w * np.arange(n_max))

    def at(self, n0: int, n: int) -> np.ndarray:
        return self.table[:n] * np.exp(1j * self.w * n0)


def _modulated(fs, carrier, amp, seg, n0, n, phase0):
    """Samples n0 … n0+n−1 of the carrier, modulated by the segment's tone from phase ``phase0``."""
    ph = phase0 + (TWO_PI * seg.fm_hz / fs) * np.arange(n)
    env = amp * (1.0 + seg.depth * np.cos(ph))
    x = env * carrier.at(n0, n)
    return x.astype(np.complex64), float((phase0 + TWO_PI * seg.fm_hz * n / fs) % TWO_PI)


def run_am_test(design, tune_hz: float, segments, *, level_dbfs: float, path: str = "fast",
                spacing_hz: float = 10e3, thermal_noise: bool = False, full_scale_dbm=None,
                hold_gain_db=None) -> tuple:
    """Run a stepped-tone AM test signal through the chain; return each segment's measured audio.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    segments : sequence of Segment
    level_dbfs : float
        Carrier level at the antenna, dBFS.
    path : {"fast", "exact"}
    spacing_hz : float
        Channel spacing (sets the test capture, see ``tone_capture``).
    thermal_noise : bool
        Let the Receiver add the front end's thermal noise (the spec's
        ``frontend.noise_figure_db``); needs ``full_scale_dbm`` or the spec's.
    full_scale_dbm : float, optional
    hold_gain_db : float, optional
        AGC stage gain to hold (default: :func:`held_gain_db`).

    Returns
    -------
    (list of ndarray, float)
        The audio of each segment's measuring window, and the audio rate.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> audio, fs = run_am_test(design_chain("medium"), 1e6, [segment(1000.0, 0.3)], level_dbfs=-40.0)
    >>> len(audio[0]), fs
    (1920, 48000.0)
    """
    from ..receiver import Receiver

    info = bench_capture(design, tune_hz, spacing_hz, image=thermal_noise)
    hold = held_gain_db(design, tune_hz, level_dbfs) if hold_gain_db is None else hold_gain_db
    rx = Receiver(design, info, tune_hz, path=path, agc_hold_gain_db=hold, thermal_noise=thermal_noise,
                  full_scale_dbm=full_scale_dbm)
    amp = 10.0 ** (level_dbfs / 20.0)
    lead = Segment(segments[0].fm_hz, segments[0].depth, 0.0, LEAD_S)
    steps = [lead] + list(segments)
    sizes = [int(round(seg.seconds * info.fs)) for seg in steps]
    carrier = _Carrier(tune_hz - info.center_hz, info.fs, max(sizes))
    parts, bounds, n0, phase = [], [], 0, 0.0
    try:
        for j, (seg, n) in enumerate(zip(steps, sizes)):
            x, phase = _modulated(info.fs, carrier, amp, seg, n0, n, phase)
            if j:
                bounds.append((n0 + int(round(seg.settle_s * info.fs)), n0 + n))
            parts.append(rx.process(x))
            n0 += n
        parts.append(rx.flush())
    finally:
        rx.close()
    audio = np.concatenate(parts)
    fa = rx.audio_fs
    out = []
    for a, b in bounds:
        out.append(audio[int(math.ceil(a * fa / info.fs)):int(math.floor(b * fa / info.fs))])
    return out, fa


def harmonic_fit(x, fs: float, f_hz: float, n_harmonics: int = 1) -> tuple:
    """Least-squares fit of a tone and its harmonics at a known frequency.

    Parameters
    ----------
    x : array_like
        Audio samples.
    fs : float
        Their rate, Hz.
    f_hz : float
        The fundamental.
    n_harmonics : int
        Harmonics fitted (1 = the fundamental alone); those at or above
        fs/2 are left out.

    Returns
    -------
    (ndarray, float)
        Amplitudes of harmonics 1…K, and the mean power of what the fit leaves.

    Examples
    --------
    >>> t = np.arange(4800) / 48000
    >>> amps, rest = harmonic_fit(0.5 * np.cos(2 * np.pi * 1e3 * t) + 0.05 * np.sin(2 * np.pi * 2e3 * t), 48000, 1e3, 3)
    >>> [round(float(a), 6) for a in amps], round(rest, 12)
    ([0.5, 0.05, 0.0], 0.0)
    """
    x = np.asarray(x, dtype=float)
    t = np.arange(len(x)) / fs
    ks = [k for k in range(1, n_harmonics + 1) if k * f_hz < fs / 2]
    cols = [np.ones(len(x))]
    for k in ks:
        cols += [np.cos(TWO_PI * k * f_hz * t), np.sin(TWO_PI * k * f_hz * t)]
    a = np.column_stack(cols)
    # normal equations: the columns are nearly orthogonal over the several periods measured (a
    # well-conditioned Gram matrix), and a 2K+1 square solve avoids LAPACK's least-squares drivers,
    # which are slow with many BLAS threads on a busy machine
    c = np.linalg.solve(a.T @ a, a.T @ x)
    rest = x - a @ c
    return np.hypot(c[1::2], c[2::2]), float(np.mean(rest ** 2))
