"""Carrier AGC: the detected carrier level, low-passed, moves the IF gain.

An AM receiver's AGC takes its control voltage from the detector through the
AGC filter, an RC low-pass whose time constant is long against the lowest
audio frequency, so that the control follows the carrier (fades, steps,
another station) and not the modulation (Terman, *Electronic and Radio
Engineering*, 4th ed., automatic volume control; from memory). Here:

1. **Carrier filter.** The envelope |u| at the detector input runs through two
   RC sections in cascade, each of time constant ``carrier_filter_ms`` (a
   critically damped second-order low-pass, lag 2·τ at DC). For symmetric
   modulation the mean envelope is the carrier amplitude, so the filter's
   output is the carrier level; the modulation is left as a ripple of
   m·|p(f)|/(1 + (2πfτ)²) at audio frequency f. ``carrier_filter_ms = 0``
   leaves the filter out: the loop then sees the envelope averaged over each
   control interval and rides the modulation (a deliberately fast AGC).
2. **Gain loop.** Once per control interval (``step`` samples) the filtered
   level L (dB, ungained) is compared with the reference:

       e = reference − (L + g),   g ← g + e·(1 − exp(−T/τ))

   with τ = ``attack_ms`` when the level is too high (e < 0), τ =
   ``release_ms`` when it is too low. With ``hang_ms`` the gain is held
   after the level drops: release starts only once the level has stayed more
   than ``HANG_MARGIN_DB`` below the reference for ``hang_ms`` (the timer
   restarts whenever it is not).
   The gain is clamped to [``min_gain_db``, ``max_gain_db``] and
   interpolated linearly (as a factor) across each interval, so that no step
   reaches the audio. Because the IF stages are linear, the gain is applied
   ahead of the detector; this equals applying it at the marked stage except
   for the few tens of microseconds by which the following filters would
   smooth a gain change.
3. **Start.** The gain is held at its start value for ``freeze`` samples
   (the receiver's pre-roll lets the IF stages settle meanwhile; at least one
   interval); at the end of the last of them the loop settles at once (a gain
   step, inside the receiver's pre-roll, which the audio filters settle from) on the
   envelope's mean over the last :func:`settle_window_s` of them: the carrier
   filter in its steady state at that level and the gain that holds the
   reference for it. A held AGC (the single-signal measurement method) never
   moves.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal

__all__ = ["AgcState", "Agc", "carrier_filter_sos", "settle_window_s", "HANG_MARGIN_DB"]

#: a level within this much below the reference restarts the hang timer (common practice)
HANG_MARGIN_DB = 1.0


def settle_window_s(spec) -> float:
    """How long the start level is averaged before the loop settles: twice the carrier filter's
    time constant, at least 10 ms (beats between the carriers of a channel average out).

    Examples
    --------
    >>> from sdrx.chain.spec import AgcSpec
    >>> settle_window_s(AgcSpec(carrier_filter_ms=10.0)), settle_window_s(AgcSpec(carrier_filter_ms=0.0))
    (0.02, 0.01)
    """
    return max(0.01, 2e-3 * float(getattr(spec, "carrier_filter_ms", 0.0)))


def carrier_filter_sos(tau_s: float, fs: float) -> np.ndarray:
    """Two RC sections in cascade, each y ← y + (1 − a)(x − y) with a = exp(−1/(fs·τ)), as one SOS row.

    The impulse-invariant map of 1/(1 + sτ)² (each RC section's pole e^{−T/τ}), scaled to unit gain at DC.

    Examples
    --------
    >>> sos = carrier_filter_sos(0.01, 96000.0)
    >>> float(np.sum(sos[0, :3]) / np.sum(sos[0, 3:]))   # unit gain at DC
    1.0
    """
    a = math.exp(-1.0 / (fs * tau_s))
    b0 = (1.0 - a) ** 2
    return np.array([[b0, 0.0, 0.0, 1.0, -2.0 * a, a * a]])


@dataclass
class AgcState:
    """Explicit loop state."""

    gain_db: float          # AGC stage gain at the end of the current interval
    prev_gain_db: float     # at its start
    hang_left: int
    acc: np.ndarray         # the (filtered) envelope over the current, unfinished interval (acc_n values used)
    acc_n: int
    zi: np.ndarray          # carrier filter state
    frozen_left: int        # whole intervals still held at the start gain
    frozen_levels: list     # the envelope's mean over the last held intervals


class Agc:
    """Carrier AGC at a control rate.

    Parameters
    ----------
    spec : AgcSpec
    fs : float
        Rate of the signal it controls (the channel rate), Hz.
    fixed_gain_db : float
        Gain of the stages the AGC does not move.
    start_gain_db : float
        Gain of the AGC stage(s) when the loop is off, and while it is held
        at the start.
    hold_gain_db : float, optional
        Hold the AGC stage gain at this value (AGC held, as for the
        single-signal selectivity method).
    step : int
        Samples per control interval.
    grid_offset : int
        Position of the first sample inside its control interval, for a
        signal that starts part-way into the capture: the intervals then lie
        on the same absolute grid as a run from the capture's first sample.
        The first interval is the shorter rest of that interval.
    freeze : int
        Samples at the start during which the gain stays at ``start_gain_db``
        (rounded up to whole intervals; at least the first); the loop settles
        at the end of the last of them.
    stats_from : int
        Samples at the start (the receiver's pre-roll) left out of
        ``gain_min_db``/``gain_max_db``.

    Examples
    --------
    >>> import numpy as np
    >>> from sdrx.chain.spec import AgcSpec
    >>> agc = Agc(AgcSpec(reference_dbfs=-12), 96000.0, fixed_gain_db=0.0, start_gain_db=0.0)
    >>> y, g = agc.process(np.full(96000, 0.01 + 0j))   # settles on the first interval: 28 dB of gain
    >>> round(float(20 * np.log10(abs(y[-1]))), 1)
    -12.0
    """

    def __init__(self, spec, fs: float, fixed_gain_db: float, start_gain_db: float,
                 hold_gain_db: float | None = None, step: int = 64, grid_offset: int = 0, freeze: int = 0,
                 stats_from: int = 0):
        self.spec = spec
        self.fs = fs
        self.step = step
        self._acc_from = int(grid_offset) % step   # first valid value in acc (the first interval only)
        self.fixed_gain_db = fixed_gain_db
        self.enabled = bool(spec.enabled) and hold_gain_db is None
        g0 = hold_gain_db if hold_gain_db is not None else start_gain_db
        if self.enabled:
            g0 = min(max(g0, spec.min_gain_db), spec.max_gain_db)
        tau_f = float(getattr(spec, "carrier_filter_ms", 0.0)) * 1e-3
        self.sos = carrier_filter_sos(tau_f, fs) if tau_f > 0 else None
        zi = np.zeros((1, 2)) if self.sos is not None else np.zeros((0, 2))
        # intervals held at the start: the first (shorter) one, plus whole ones covering the rest of freeze
        first_len = step - self._acc_from
        frozen = 1 + max(0, math.ceil((int(freeze) - first_len) / step))
        self._settle_n = max(1, int(math.ceil(settle_window_s(spec) * fs / step)))
        self.state = AgcState(g0, g0, 0, np.zeros(step), self._acc_from, zi, frozen, [])
        T = step / fs
        self._a_att = 1.0 - math.exp(-T / (spec.attack_ms * 1e-3))
        self._a_rel = 1.0 - math.exp(-T / (spec.release_ms * 1e-3))
        self._hang = int(round(spec.hang_ms * 1e-3 / T))
        self.gain_min_db = math.inf
        self.gain_max_db = -math.inf
        self._stats_from = int(stats_from)   # samples at the start left out of the gain range
        self._stats_to = math.inf            # and from here on (the ring-down after the input)
        self._n = 0                          # samples processed
        self._ivl_start = 0                  # first sample (from the start) of the interval being measured
        self._ivl_len = step - self._acc_from
        if self._stats_from < self._ivl_len:
            self._note(g0, g0)
        self.trace = None   # set to a list to keep each block's total gain in dB (tests, plots)

    # -- the loop, one control interval at a time --------------------------------------------
    def _settle(self, level: float) -> None:
        """Steady state for a carrier of this (ungained) level: filter state and gain."""
        st, sp = self.state, self.spec
        if self.sos is not None:
            st.zi = signal.sosfilt_zi(self.sos) * level
        need = sp.reference_dbfs - self.fixed_gain_db - 20.0 * math.log10(max(level, 1e-15))
        st.gain_db = min(max(need, sp.min_gain_db), sp.max_gain_db)
        st.hang_left = 0

    def _run_intervals(self, levels) -> tuple:
        """Advance the loop over whole intervals with these levels (ungained, linear).

        Returns lists of the gains at the start and at the end of each
        interval, in dB and as linear factors (computed here as Python
        scalars, so that they are the same for any block split).
        """
        st, sp = self.state, self.spec
        ref = sp.reference_dbfs - self.fixed_gain_db
        a_att, a_rel, hang = self._a_att, self._a_rel, self._hang
        gmin, gmax = sp.min_gain_db, sp.max_gain_db
        log10 = math.log10
        step, stats_from, stats_to = self.step, self._stats_from, self._stats_to
        seen_lo, seen_hi = self.gain_min_db, self.gain_max_db
        ivl_start, ivl_len = self._ivl_start, self._ivl_len
        starts, ends, lstarts, lends = [], [], [], []
        last_db, last_lin = None, 0.0        # the previous interval's end gain (the next one's start)
        for m in levels:
            prev, g = st.prev_gain_db, st.gain_db
            ivl_start += ivl_len                  # the next interval starts here
            ivl_len = step
            starts.append(prev)
            ends.append(g)
            lstarts.append(last_lin if prev == last_db else 10.0 ** (prev / 20.0))
            last_db, last_lin = g, 10.0 ** (g / 20.0)
            lends.append(last_lin)
            if st.frozen_left:
                st.frozen_left -= 1
                st.frozen_levels = (st.frozen_levels + [m])[-self._settle_n:]
                if not st.frozen_left:
                    # the next interval starts at the settled gain (a step inside the pre-roll, which
                    # the audio filters settle from; a ramp would show the loop a gain it never had)
                    self._settle(math.fsum(st.frozen_levels) / len(st.frozen_levels))
                st.prev_gain_db = st.gain_db
            else:
                e = ref - (20.0 * log10(m if m > 1e-15 else 1e-15) + 0.5 * (prev + g))
                ng = g
                if e < 0:
                    ng += e * a_att
                    st.hang_left = hang
                elif hang and e <= HANG_MARGIN_DB:
                    st.hang_left = hang          # level about right: the gain holds, the timer restarts
                elif st.hang_left > 0:
                    st.hang_left -= 1
                else:
                    ng += e * a_rel
                if ng < gmin:
                    ng = gmin
                elif ng > gmax:
                    ng = gmax
                st.prev_gain_db, st.gain_db = g, ng
            # the gain range widens by the ramp of the interval that starts now, unless it lies in
            # the samples left out (the bookkeeping is per interval: the same for any split)
            if stats_from < ivl_start + step and ivl_start < stats_to:
                seen_lo = min(seen_lo, st.prev_gain_db, st.gain_db)
                seen_hi = max(seen_hi, st.prev_gain_db, st.gain_db)
        self._ivl_start, self._ivl_len = ivl_start, ivl_len
        self.gain_min_db, self.gain_max_db = seen_lo, seen_hi
        return starts, ends, lstarts, lends

    def _note(self, a: float, b: float) -> None:
        self.gain_min_db = min(self.gain_min_db, a, b)
        self.gain_max_db = max(self.gain_max_db, a, b)

    def end_stats(self, n: int) -> None:
        """Leave samples from the ``n``-th on (counted from the start) out of the gain range."""
        self._stats_to = min(self._stats_to, int(n))

    def _level(self, mag: np.ndarray) -> np.ndarray:
        """The envelope the loop measures: through the carrier filter once the loop runs."""
        if self.sos is None:
            return mag
        y, self.state.zi = signal.sosfilt(self.sos, mag, zi=self.state.zi)
        return y

    # -- applying the gain ---------------------------------------------------------------------
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
        self._n += n
        if not self.enabled:
            return self._fixed(u, n, want_db)
        if mag is None:
            mag = np.abs(u)
        g_db = np.empty(n) if want_db else None
        g_lin = np.empty(n)
        step = self.step
        frac_all = np.arange(step) / step
        pos = 0
        while pos < n:
            # while frozen, the loop measures the raw envelope (the filter settles with the loop)
            if st.frozen_left:
                take = min(step - st.acc_n, n - pos)
                lv = mag[pos:pos + take]
            else:
                take = n - pos if st.acc_n == 0 else min(step - st.acc_n, n - pos)
                lv = self._level(mag[pos:pos + take])
            k = 0
            # finish the current interval (or as much of it as we have)
            part = min(step - st.acc_n, take)
            frac = frac_all[st.acc_n:st.acc_n + part]
            a, b = st.prev_gain_db, st.gain_db
            if want_db:
                g_db[pos:pos + part] = a + (b - a) * frac
            la, lb = 10.0 ** (a / 20.0), 10.0 ** (b / 20.0)
            g_lin[pos:pos + part] = la + (lb - la) * frac
            st.acc[st.acc_n:st.acc_n + part] = lv[:part]
            st.acc_n += part
            k = part
            if st.acc_n == step:
                lo = self._acc_from
                self._acc_from = 0
                # the first, shorter interval of a grid that started part-way in uses its own samples
                level = float(np.mean(st.acc[lo:])) if lo else float(st.acc.reshape(1, step).mean(axis=1)[0])
                self._run_intervals([level])
                st.acc_n = 0
            # whole intervals in one vectorised pass where possible (the loop itself is per interval)
            whole = (take - k) // step
            if whole > 0 and st.acc_n == 0 and not st.frozen_left:
                sl = slice(pos + k, pos + k + whole * step)
                levels = lv[k:k + whole * step].reshape(whole, step).mean(axis=1)
                starts, ends, ls, le = self._run_intervals(levels.tolist())
                if want_db:
                    sa, ea = np.asarray(starts), np.asarray(ends)
                    g_db[sl] = (sa[:, None] + (ea - sa)[:, None] * frac_all).reshape(-1)
                ls, le = np.asarray(ls), np.asarray(le)
                g_lin[sl] = (ls[:, None] + (le - ls)[:, None] * frac_all).reshape(-1)
                k += whole * step
            # a tail shorter than an interval starts the next one
            rest = take - k
            if rest > 0:
                a, b = st.prev_gain_db, st.gain_db
                frac = frac_all[:rest]
                if want_db:
                    g_db[pos + k:pos + take] = a + (b - a) * frac
                la, lb = 10.0 ** (a / 20.0), 10.0 ** (b / 20.0)
                g_lin[pos + k:pos + take] = la + (lb - la) * frac
                st.acc[:rest] = lv[k:take]
                st.acc_n = rest
            pos += take
        g_lin *= fixed_lin
        g_tot = g_db + self.fixed_gain_db if want_db else None
        if self.trace is not None:
            self.trace.append(g_tot)
        return u * g_lin, g_tot

    def _fixed(self, u, n, want_db):
        st = self.state
        if n and self._n - n < self._stats_to:
            self._note(st.gain_db, st.gain_db)
        g = np.full(n, st.gain_db + self.fixed_gain_db) if want_db else None
        if self.trace is not None:
            self.trace.append(g)
        return u * 10.0 ** ((st.gain_db + self.fixed_gain_db) / 20.0), g
