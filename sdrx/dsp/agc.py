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
    acc: np.ndarray         # |u| over the current, unfinished interval (acc_n values used)
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
        Gain of the AGC stage(s) when the loop is off; with the loop on, it
        starts settled: at the gain that holds the reference for the carrier
        level of the first interval.
    hold_gain_db : float, optional
        Hold the AGC stage gain at this value (AGC held, as for the
        single-signal selectivity method).
    step : int
        Samples per control interval.
    grid_offset : int
        Position of the first sample inside its control interval, for a
        signal that starts part-way into the capture: the intervals then lie
        on the same absolute grid as a run from the capture's first sample,
        and an excerpt settles to the same gain as the whole run (the loop's
        steady state depends on where the intervals fall on the modulation).
        The first interval is the shorter rest of that interval.

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
                 hold_gain_db: float | None = None, step: int = 64, grid_offset: int = 0):
        self.spec = spec
        self.fs = fs
        self.step = step
        self._acc_from = int(grid_offset) % step   # first valid value in acc (the first interval only)
        self.fixed_gain_db = fixed_gain_db
        self.enabled = bool(spec.enabled) and hold_gain_db is None
        g0 = hold_gain_db if hold_gain_db is not None else start_gain_db
        if self.enabled:
            g0 = min(max(g0, spec.min_gain_db), spec.max_gain_db)
        self.state = AgcState(g0, g0, 0, np.zeros(step), self._acc_from)
        self._settled = not self.enabled   # the loop starts settled on the first interval
        T = step / fs
        self._a_att = 1.0 - math.exp(-T / (spec.attack_ms * 1e-3))
        self._a_rel = 1.0 - math.exp(-T / (spec.release_ms * 1e-3))
        self._hang = int(round(spec.hang_ms * 1e-3 / T))
        self.gain_min_db = math.inf
        self.gain_max_db = -math.inf
        self.trace = None   # set to a list to keep each block's total gain in dB (tests, plots)

    def _update(self, mean_abs: float) -> None:
        self._run_intervals([mean_abs])

    def _run_intervals(self, means) -> tuple:
        """Advance the loop over whole intervals with these mean envelopes.

        Returns lists of the gains at the start and at the end of each
        interval, in dB and as linear factors (computed here as Python
        scalars, so that they are the same for any block split).
        """
        st, sp = self.state, self.spec
        ref = sp.reference_dbfs - self.fixed_gain_db
        a_att, a_rel, hang = self._a_att, self._a_rel, self._hang
        gmin, gmax = sp.min_gain_db, sp.max_gain_db
        prev, g, left = st.prev_gain_db, st.gain_db, st.hang_left
        log10 = math.log10
        lprev, lg = 10.0 ** (prev / 20.0), 10.0 ** (g / 20.0)
        starts, ends, lstarts, lends = [], [], [], []
        for m in means:
            starts.append(prev)
            ends.append(g)
            lstarts.append(lprev)
            lends.append(lg)
            e = ref - (20.0 * log10(m if m > 1e-15 else 1e-15) + 0.5 * (prev + g))
            ng = g
            if e < 0:
                ng += e * a_att
                left = hang
            elif left > 0:
                left -= 1
            else:
                ng += e * a_rel
            if ng < gmin:
                ng = gmin
            elif ng > gmax:
                ng = gmax
            prev, g = g, ng
            lprev, lg = lg, 10.0 ** (ng / 20.0)
        st.prev_gain_db, st.gain_db, st.hang_left = prev, g, left
        return starts, ends, lstarts, lends

    def process(self, u: np.ndarray, mag=None, want_db: bool = True):
        """Apply the gain to ``u``; return (gained signal, total gain in dB per sample).

        Within each control interval the linear gain moves in a straight
        line between the interval's end values. ``mag`` may pass |u| when
        the caller has it; with ``want_db=False`` the dB trace is not built
        (None is returned in its place).
        """
        n = len(u)
        st = self.state
        want_db = want_db or self.trace is not None
        fixed_lin = 10.0 ** (self.fixed_gain_db / 20.0)
        if not self.enabled:
            if n:
                self.gain_min_db = min(self.gain_min_db, st.gain_db)
                self.gain_max_db = max(self.gain_max_db, st.gain_db)
            g = np.full(n, st.gain_db + self.fixed_gain_db) if want_db else None
            if self.trace is not None:
                self.trace.append(g)
            return u * 10.0 ** ((st.gain_db + self.fixed_gain_db) / 20.0), g
        if mag is None:
            mag = np.abs(u)
        if not self._settled and n:
            # start as a receiver already tuned to the station: the gain that holds the
            # reference for the first interval's carrier level (clamped to the range)
            m0 = float(np.mean(mag[:self.step]))
            need = self.spec.reference_dbfs - self.fixed_gain_db - 20.0 * math.log10(max(m0, 1e-15))
            g0 = min(max(need, self.spec.min_gain_db), self.spec.max_gain_db)
            st.prev_gain_db = st.gain_db = g0
            self._settled = True
        g_db = np.empty(n) if want_db else None
        g_lin = np.empty(n)
        step = self.step
        frac_all = np.arange(step) / step
        lo_db, hi_db = math.inf, -math.inf
        pos = 0
        while pos < n:
            # finish the current interval (or as much of it as we have)
            take = min(step - st.acc_n, n - pos)
            frac = frac_all[st.acc_n:st.acc_n + take]
            a, b = st.prev_gain_db, st.gain_db
            lo_db, hi_db = min(lo_db, a, b), max(hi_db, a, b)
            if want_db:
                g_db[pos:pos + take] = a + (b - a) * frac
            la, lb = 10.0 ** (a / 20.0), 10.0 ** (b / 20.0)
            g_lin[pos:pos + take] = la + (lb - la) * frac
            st.acc[st.acc_n:st.acc_n + take] = mag[pos:pos + take]
            st.acc_n += take
            pos += take
            if st.acc_n == step:
                if self._acc_from:
                    # the first, shorter interval of a grid that started part-way in
                    self._update(float(np.mean(st.acc[self._acc_from:])))
                    self._acc_from = 0
                else:
                    # the same reduction as for whole intervals below: identical for any split
                    self._update(float(st.acc.reshape(1, step).mean(axis=1)[0]))
                st.acc_n = 0
            # whole intervals in one vectorised pass where possible
            whole = (n - pos) // step
            if whole > 0 and st.acc_n == 0:
                sl = slice(pos, pos + whole * step)
                means = mag[sl].reshape(whole, step).mean(axis=1)
                starts, ends, ls, le = self._run_intervals(means.tolist())
                lo_db = min(lo_db, min(starts), min(ends))
                hi_db = max(hi_db, max(starts), max(ends))
                if want_db:
                    sa, ea = np.asarray(starts), np.asarray(ends)
                    g_db[sl] = (sa[:, None] + (ea - sa)[:, None] * frac_all).reshape(-1)
                ls, le = np.asarray(ls), np.asarray(le)
                g_lin[sl] = (ls[:, None] + (le - ls)[:, None] * frac_all).reshape(-1)
                pos += whole * step
        if n:
            self.gain_min_db = min(self.gain_min_db, lo_db)
            self.gain_max_db = max(self.gain_max_db, hi_db)
        g_lin *= fixed_lin
        g_tot = g_db + self.fixed_gain_db if want_db else None
        if self.trace is not None:
            self.trace.append(g_tot)
        return u * g_lin, g_tot
