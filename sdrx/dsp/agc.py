"""AGC: a feedback loop from the detector's carrier level to the IF gain.

The loop runs at a control rate (one update every ``step`` samples). In each
control interval it measures the carrier level at the detector input (the
mean envelope, which is the carrier amplitude for symmetric modulation),
compares it with the reference and moves the gain in dB:

    g ← g + e·(1 − exp(−T/τ)),   e = reference − level  (dB)

with τ = attack when the level is too high, τ = release when too low (after
the hang time has run out). The gain is interpolated linearly in dB across
each interval, so that no step reaches the audio. Because the IF stages are
linear, the gain is applied to the IF stage output ahead of the detector;
this equals applying it at the marked stage except for the few tens of
microseconds by which the following filters would smooth a gain change.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["AgcState", "Agc"]


@dataclass
class AgcState:
    """Explicit loop state."""

    gain_db: float          # AGC stage gain at the end of the current interval
    prev_gain_db: float     # at its start
    hang_left: int
    acc_sum: float          # |u| summed over the current, unfinished interval
    acc_n: int


class Agc:
    """Feedback AGC at a control rate.

    Parameters
    ----------
    spec : AgcSpec
    fs : float
        Rate of the signal it controls (the channel rate), Hz.
    fixed_gain_db : float
        Gain of the stages the AGC does not move.
    start_gain_db : float
        Initial gain of the AGC stage(s).
    hold_gain_db : float, optional
        Hold the AGC stage gain at this value (AGC held, as for the
        single-signal selectivity method).
    step : int
        Samples per control interval.

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.chain.spec import AgcSpec
    >>> agc = Agc(AgcSpec(reference_dbfs=-12), 96000.0, fixed_gain_db=0.0, start_gain_db=0.0)
    >>> y, g = agc.process(np.full(5 * 96000, 0.01 + 0j))   # 28 dB short, release 300 ms
    >>> round(float(20 * np.log10(abs(y[-1]))), 1)
    -12.0
    """

    def __init__(self, spec, fs: float, fixed_gain_db: float, start_gain_db: float,
                 hold_gain_db: float | None = None, step: int = 32):
        self.spec = spec
        self.fs = fs
        self.step = step
        self.fixed_gain_db = fixed_gain_db
        self.enabled = bool(spec.enabled) and hold_gain_db is None
        g0 = hold_gain_db if hold_gain_db is not None else start_gain_db
        if self.enabled:
            g0 = min(max(g0, spec.min_gain_db), spec.max_gain_db)
        self.state = AgcState(g0, g0, 0, 0.0, 0)
        T = step / fs
        self._a_att = 1.0 - math.exp(-T / (spec.attack_ms * 1e-3))
        self._a_rel = 1.0 - math.exp(-T / (spec.release_ms * 1e-3))
        self._hang = int(round(spec.hang_ms * 1e-3 / T))
        self.gain_min_db = math.inf
        self.gain_max_db = -math.inf

    def _update(self, mean_abs: float) -> None:
        st, sp = self.state, self.spec
        level_db = 20.0 * math.log10(max(mean_abs, 1e-15)) + 0.5 * (st.prev_gain_db + st.gain_db) + self.fixed_gain_db
        e = sp.reference_dbfs - level_db
        g = st.gain_db
        if e < 0:
            g += e * self._a_att
            st.hang_left = self._hang
        elif st.hang_left > 0:
            st.hang_left -= 1
        else:
            g += e * self._a_rel
        g = min(max(g, sp.min_gain_db), sp.max_gain_db)
        st.prev_gain_db, st.gain_db = st.gain_db, g

    def process(self, u: np.ndarray):
        """Apply the gain to ``u``; return (gained signal, total gain in dB per sample)."""
        n = len(u)
        st = self.state
        if not self.enabled:
            g = np.full(n, st.gain_db + self.fixed_gain_db)
            if n:
                self.gain_min_db = min(self.gain_min_db, st.gain_db)
                self.gain_max_db = max(self.gain_max_db, st.gain_db)
            return u * 10.0 ** (g / 20.0), g
        mag = np.abs(u)
        g_out = np.empty(n)
        pos = 0
        step = self.step
        while pos < n:
            # finish the current interval (or as much of it as we have)
            take = min(step - st.acc_n, n - pos)
            frac = (st.acc_n + np.arange(take)) / step
            g_out[pos:pos + take] = st.prev_gain_db + (st.gain_db - st.prev_gain_db) * frac
            st.acc_sum += float(np.sum(mag[pos:pos + take]))
            st.acc_n += take
            pos += take
            if st.acc_n == step:
                self._update(st.acc_sum / step)
                st.acc_sum, st.acc_n = 0.0, 0
            # whole intervals in one vectorised pass where possible
            whole = (n - pos) // step
            if whole > 0 and st.acc_n == 0:
                means = mag[pos:pos + whole * step].reshape(whole, step).mean(axis=1)
                starts = np.empty(whole)
                ends = np.empty(whole)
                for i in range(whole):
                    starts[i] = st.prev_gain_db
                    ends[i] = st.gain_db
                    self._update_fast(means[i])
                frac = np.arange(step) / step
                g_out[pos:pos + whole * step] = (starts[:, None] + (ends - starts)[:, None] * frac).reshape(-1)
                pos += whole * step
        self.gain_min_db = min(self.gain_min_db, float(g_out.min())) if n else self.gain_min_db
        self.gain_max_db = max(self.gain_max_db, float(g_out.max())) if n else self.gain_max_db
        g_tot = g_out + self.fixed_gain_db
        return u * 10.0 ** (g_tot / 20.0), g_tot

    def _update_fast(self, mean_abs) -> None:
        self._update(float(mean_abs))
