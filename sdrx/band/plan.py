"""How a band run is cut into work: segments of a capture with an overlap on the whole capture's grid.

A segment ``[start, end)`` of an excerpt is received by a fresh
:class:`~sdrx.receiver.multi.MultiReceiver` that starts earlier, at
``warm <= start``, and whose audio before ``start`` is dropped. Two things
make its audio after the overlap the audio of one run over the whole excerpt:

- every grid the chain keeps lies where the whole run has it: ``warm`` is
  a whole number of *grid periods* after the excerpt's first sample, the
  period being the least common multiple (in capture samples) of the
  channelizer's hop, the channel and audio sample grids, the level meter's
  10 ms windows and the detector's internal blocks; the oscillators and the
  AGC's control intervals follow the absolute sample index anyway;
- the overlap ``start − warm`` is at least the chain's settling time: the
  slowest time constant of the chain (AGC, IF stages, audio filters,
  detector) times ln(10^(120/20)) ≈ 13.8, after which a difference of state
  has decayed by 120 dB.

Segments of one capture are independent units of work; the outputs of a
run are the segments' audio and statistics concatenated in order, so they
do not depend on where or in what order the segments ran.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np
from scipy import signal

from ..errors import ParameterError

__all__ = ["Segment", "settle_time_s", "grid_period", "cut_period", "plan_segments", "SETTLE_DB"]

SETTLE_DB = 120.0   # a state difference decays by this much over the overlap


@dataclass(frozen=True)
class Segment:
    """One unit of work: receive from ``warm``, keep ``[start, end)`` (absolute capture samples).

    ``last`` marks the segment that ends the excerpt (its receivers are
    flushed there, as a one-process run is).
    """

    index: int
    warm: int
    start: int
    end: int
    last: bool

    @property
    def samples(self) -> int:
        return self.end - self.start


def _slowest_pole_s(z, p) -> float:
    p = np.asarray(p, complex)
    decay = np.abs(p.real)
    decay = decay[decay > 0]
    return float(1.0 / decay.min()) if decay.size else 0.0


def settle_time_s(design) -> float:
    """Time after which a receiver started anywhere holds the same state as one started earlier.

    Parameters
    ----------
    design : ChainDesign

    Returns
    -------
    float
        τ_max · ln(10^(SETTLE_DB/20)), seconds, with τ_max the slowest of:
        the AGC's time constants plus its hang time, the slowest pole of
        every IF stage's analog prototype (1/|Re p|), of the audio high- and
        low-pass (Butterworth, analog prototypes), the diode detector's RC
        and the synchronous detector's loop (1/(2π·B_L)).

    Notes
    -----
    A linear stage's memory of its initial state decays as e^{−t/τ} with
    τ = 1/|Re p| for its slowest pole p (the natural response of a linear
    system: any signals-and-systems text); the AGC loop, linear in dB for
    small errors, decays with its attack or release time constant once the
    hang time has run out. Every ``*_ms`` field of the AGC spec is counted,
    so a loop with more time constants is covered too.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> round(settle_time_s(design_chain("medium")), 3)   # release 30 ms: 0.03 s × 13.8
    0.414
    """
    taus = [0.0]
    agc = design.agc
    if agc.enabled:
        ms = {k: float(v) for k, v in vars(agc).items() if k.endswith("_ms") and isinstance(v, (int, float))}
        hang = ms.pop("hang_ms", 0.0)
        taus.append((max(ms.values(), default=0.0) + hang) * 1e-3)
    for st in design.stages:
        taus.append(_slowest_pole_s(st.z, st.p))
    au = design.audio
    for order, f, kind in ((au.highpass_order, au.highpass_hz, "highpass"), (au.lowpass_order, au.lowpass_hz, "lowpass")):
        z, p, _ = signal.butter(order, 2 * math.pi * f, btype=kind, analog=True, output="zpk")
        taus.append(_slowest_pole_s(z, p))
    det = design.detector
    if det.kind == "diode":
        taus.append(det.rc_us * 1e-6)
    elif det.kind == "synchronous":
        taus.append(1.0 / (2 * math.pi * det.pll_bandwidth_hz))
    return max(taus) * math.log(10.0 ** (SETTLE_DB / 20.0))


def _samples_per(unit) -> int:
    """Capture samples after which a grid of ``unit`` capture samples (a rational) meets the capture's grid."""
    x = Fraction(unit).limit_denominator(1 << 20)
    return x.numerator


def grid_period(receivers) -> int:
    """Capture samples between warm-up starts that keep every grid of these receivers.

    Parameters
    ----------
    receivers : iterable of Receiver
        One per distinct chain and channel rate (fast path).

    Returns
    -------
    int
        lcm over receivers of the channelizer hop, one channel sample, one
        audio sample, one level-meter window and one detector block (each
        in capture samples, as the least whole number of them).
    """
    g = 1
    for rx in receivers:
        fs = Fraction(rx.info.fs).limit_denominator(1000)
        ch = fs / Fraction(rx.fs_ch).limit_denominator(1000)
        au = fs / Fraction(rx.audio_fs).limit_denominator(1000)
        parts = [rx.plan.hop, _samples_per(ch), _samples_per(au),
                 _samples_per(ch * rx.backend.meter.n)]
        block = getattr(rx.backend.detector, "_chunk", None) or getattr(rx.backend.detector, "step", None)
        if block:
            parts.append(_samples_per(ch * int(block)))
        for q in parts:
            g = math.lcm(g, int(q))
    return g


def cut_period(receivers) -> int:
    """Capture samples a segment boundary must be a multiple of (from the excerpt start).

    The boundary falls on every station's audio sample grid and on the level
    meter's windows, so that segment audio and level windows join without a
    gap or an overlap.
    """
    g = 1
    for rx in receivers:
        fs = Fraction(rx.info.fs).limit_denominator(1000)
        ch = fs / Fraction(rx.fs_ch).limit_denominator(1000)
        au = fs / Fraction(rx.audio_fs).limit_denominator(1000)
        for q in (_samples_per(au), _samples_per(ch * rx.backend.meter.n)):
            g = math.lcm(g, int(q))
    return g


def plan_segments(first: int, count: int, fs: float, segment_s, overlap_s: float, grid: int, cut: int) -> list:
    """Cut the excerpt ``[first, first + count)`` into segments.

    Parameters
    ----------
    first, count : int
        The excerpt, capture samples.
    fs : float
        Sample rate, Hz.
    segment_s : float or None
        Length of a segment, seconds (rounded up to a whole number of ``cut``
        samples); None or 0 for one segment over the whole excerpt.
    overlap_s : float
        Least warm-up before each segment but the first.
    grid : int
        Warm-up starts lie a whole number of these samples after ``first``.
    cut : int
        Segment boundaries lie a whole number of these samples after ``first``.

    Returns
    -------
    list of Segment

    Raises
    ------
    ParameterError
        A segment length that is not a positive number of seconds.

    Examples
    --------
    >>> [(s.warm, s.start, s.end, s.last) for s in plan_segments(0, 100, 10.0, 3.0, 1.0, 4, 5)]
    [(0, 0, 30, False), (20, 30, 60, False), (48, 60, 90, False), (80, 90, 100, True)]
    """
    if segment_s is None or segment_s == 0:
        return [Segment(0, first, first, first + count, True)]
    if not (isinstance(segment_s, (int, float)) and math.isfinite(segment_s) and segment_s > 0):
        raise ParameterError(f"--segment: must be a positive number of seconds, got {segment_s!r}")
    seg_n = max(cut, int(math.ceil(round(segment_s * fs) / cut)) * cut)
    over_n = int(math.ceil(overlap_s * fs))
    out = []
    start = first
    k = 0
    while start < first + count or k == 0:
        end = min(first + count, start + seg_n)
        back = start - first - over_n
        warm = first if back <= 0 else first + (back // grid) * grid
        out.append(Segment(k, warm, start, end, end >= first + count))
        start, k = end, k + 1
    return out
