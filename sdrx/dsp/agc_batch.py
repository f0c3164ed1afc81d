"""Many carrier AGCs of one design, run as one: each control step an array operation over the stations.

:class:`~sdrx.dsp.agc.Agc` steps its gain loop in Python once per control
interval, which for a band of a hundred stations is a hundred Python steps
per interval. :func:`process_together` runs the loops of several AGCs that
share one design and stand at the same point of their control grids as one
loop over the intervals whose every step is a handful of numpy operations on
a vector with one element per station. The recursion is the one
:meth:`Agc._run_intervals` documents, term by term in the same order, and the
carrier filter runs as one 2-D ``sosfilt`` (the same recursion on each row),
so each station's gain equals the one its own AGC computes to the last bit
of ``log10`` and ``10**x`` (numpy's against Python's: the same C library
here; a difference would be one unit in the last place).

The AGCs' state stays in each :class:`Agc` (written back after each block),
so a station may step alone in one block and with the others in the next.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from .agc import HANG_MARGIN_DB

__all__ = ["alike_key", "process_together"]


def alike_key(agc) -> tuple | None:
    """AGCs with equal keys can run together; None for one that must run alone.

    Alike: the same design (step, loop constants, carrier filter) and the same point of the control grid
    and of the statistics' bookkeeping. Alone: a held or disabled loop, one still held at its start
    (the settling step), the first (shorter) interval of an excerpt's grid, or one keeping a gain trace.
    """
    st = agc.state
    if not agc.enabled or st.frozen_left or agc._acc_from or agc.trace is not None:
        return None
    sos = None if agc.sos is None else agc.sos.tobytes()
    return (agc.step, agc.fixed_gain_db, agc.spec.reference_dbfs, agc._a_att, agc._a_rel, agc._hang,
            agc.spec.min_gain_db, agc.spec.max_gain_db, sos, st.acc_n, agc._ivl_start, agc._ivl_len,
            agc._stats_from, agc._stats_to)


class _Loops:
    """The loop state of a batch of alike AGCs as vectors (one element per AGC)."""

    def __init__(self, agcs):
        first = agcs[0]
        self.agcs = agcs
        self.prev = np.array([a.state.prev_gain_db for a in agcs])
        self.gain = np.array([a.state.gain_db for a in agcs])
        self.hang_left = np.array([a.state.hang_left for a in agcs], dtype=np.int64)
        self.seen_lo = np.array([a.gain_min_db for a in agcs])
        self.seen_hi = np.array([a.gain_max_db for a in agcs])
        self.ref = first.spec.reference_dbfs - first.fixed_gain_db
        self.ivl_start, self.ivl_len = first._ivl_start, first._ivl_len

    def run(self, levels: np.ndarray) -> tuple:
        """Advance over intervals with these levels (agcs × intervals); (start dB, end dB) per interval.

        Term by term :meth:`Agc._run_intervals` outside its held start. The gains go into one array
        ``gains`` (intervals + 2, agcs): interval j runs from ``gains[j]`` to ``gains[j + 1]`` and sets
        ``gains[j + 2]``; the gain range is taken from it after the loop.
        """
        a0 = self.agcs[0]
        n_ivl = levels.shape[1]
        level_db = (20.0 * np.log10(np.where(levels > 1e-15, levels, 1e-15))).T     # (intervals, agcs)
        gains = np.empty((n_ivl + 2, levels.shape[0]))
        gains[0], gains[1] = self.prev, self.gain
        if a0._hang:
            self.hang_left = self._steps_with_hang(level_db, gains, self.hang_left)
        else:
            self._steps(level_db, gains)
        self._note_range(gains, n_ivl)
        self.prev, self.gain = gains[n_ivl], gains[n_ivl + 1]
        return gains[:n_ivl].T, gains[1:n_ivl + 1].T

    def _steps(self, level_db, gains) -> None:
        """The loop without hang: attack when the level is too high, release otherwise, then the clamps."""
        a0 = self.agcs[0]
        a_att, a_rel = a0._a_att, a0._a_rel
        gmin, gmax = a0.spec.min_gain_db, a0.spec.max_gain_db
        ref = self.ref
        for j in range(len(level_db)):
            prev, g = gains[j], gains[j + 1]
            e = ref - (level_db[j] + 0.5 * (prev + g))
            ng = g + e * np.where(e < 0, a_att, a_rel)
            np.clip(ng, gmin, gmax, out=gains[j + 2])

    def _steps_with_hang(self, level_db, gains, hang_left) -> np.ndarray:
        """The loop with hang: a level within the margin (or too high) restarts the timer; release
        waits for it to run out."""
        a0 = self.agcs[0]
        a_att, a_rel, hang = a0._a_att, a0._a_rel, a0._hang
        gmin, gmax = a0.spec.min_gain_db, a0.spec.max_gain_db
        ref = self.ref
        for j in range(len(level_db)):
            prev, g = gains[j], gains[j + 1]
            e = ref - (level_db[j] + 0.5 * (prev + g))
            high = e < 0
            held = ~high & (e <= HANG_MARGIN_DB)
            counting = ~high & ~held & (hang_left > 0)
            ng = np.where(high, g + e * a_att, np.where(held | counting, g, g + e * a_rel))
            hang_left = np.where(high | held, hang, np.where(counting, hang_left - 1, hang_left))
            np.clip(ng, gmin, gmax, out=gains[j + 2])
        return hang_left

    def _note_range(self, gains, n_ivl: int) -> None:
        """Widen the gain range by the ramp each interval starts (from ``gains[j + 1]`` to ``gains[j + 2]``),
        for the intervals that lie inside the counted samples (the grid is the same for every AGC)."""
        a0 = self.agcs[0]
        step = a0.step
        starts = self.ivl_start + self.ivl_len + step * np.arange(n_ivl)   # each interval's successor
        self.ivl_start, self.ivl_len = (int(starts[-1]), step) if n_ivl else (self.ivl_start, self.ivl_len)
        inside = (a0._stats_from < starts + step) & (starts < a0._stats_to)
        if inside.any():
            ramps = np.stack([gains[1:n_ivl + 1][inside], gains[2:n_ivl + 2][inside]])
            self.seen_lo = np.minimum(self.seen_lo, ramps.min(axis=(0, 1)))
            self.seen_hi = np.maximum(self.seen_hi, ramps.max(axis=(0, 1)))

    def store(self) -> None:
        """Write the loop state back into each AGC (Python scalars, as its own loop keeps them)."""
        for k, a in enumerate(self.agcs):
            a.state.prev_gain_db = float(self.prev[k])
            a.state.gain_db = float(self.gain[k])
            a.state.hang_left = int(self.hang_left[k])
            a.gain_min_db, a.gain_max_db = float(self.seen_lo[k]), float(self.seen_hi[k])
            a._ivl_start, a._ivl_len = self.ivl_start, self.ivl_len


def _ramp(a_db, b_db, frac) -> np.ndarray:
    """Linear gain moving from 10^(a/20) to 10^(b/20) over the fractions ``frac`` of an interval."""
    la, lb = 10.0 ** (a_db / 20.0), 10.0 ** (b_db / 20.0)
    return la[..., None] + (lb - la)[..., None] * frac


def process_together(agcs, u: np.ndarray, mag: np.ndarray) -> np.ndarray:
    """Apply each AGC's gain to its row of ``u`` (agcs × samples); each as ``agcs[i].process(u[i], mag[i])``.

    Parameters
    ----------
    agcs : list of Agc
        AGCs with equal :func:`alike_key` (not None).
    u, mag : ndarray
        Their inputs, one row each, and the rows' magnitudes.

    Returns
    -------
    ndarray
        The gained rows.

    Examples
    --------
    >>> import copy
    >>> from sdrx.chain.spec import AgcSpec
    >>> from sdrx.dsp.agc import Agc
    >>> agcs = [Agc(AgcSpec(), 96000.0, fixed_gain_db=0.0, start_gain_db=0.0) for _ in range(2)]
    >>> u = np.array([np.full(5000, 0.01 + 0j), np.full(5000, 0.1 + 0j)])
    >>> for a, row in zip(agcs, u):
    ...     _ = a.process(row)                      # past the held start: the loops now run alike
    >>> alone = copy.deepcopy(agcs)
    >>> y = process_together(agcs, u, np.abs(u))
    >>> bool(np.array_equal(y, [a.process(row)[0] for a, row in zip(alone, u)]))
    True
    """
    n_agc, n = u.shape
    first = agcs[0]
    step = first.step
    frac_all = np.arange(step) / step
    acc = np.stack([a.state.acc for a in agcs])
    acc_n = first.state.acc_n
    lv = _levels(agcs, mag)
    loops = _Loops(agcs)
    g_lin = np.empty((n_agc, n))
    k = 0
    if acc_n:
        # finish the current interval (or as much of it as this block has)
        part = min(step - acc_n, n)
        g_lin[:, :part] = _ramp(loops.prev, loops.gain, frac_all[acc_n:acc_n + part])
        acc[:, acc_n:acc_n + part] = lv[:, :part]
        acc_n += part
        k = part
        if acc_n == step:
            loops.run(acc.mean(axis=1)[:, None])
            acc_n = 0
    whole = (n - k) // step if acc_n == 0 else 0
    if whole:
        levels = lv[:, k:k + whole * step].reshape(n_agc, whole, step).mean(axis=2)
        starts, ends = loops.run(levels)
        g_lin[:, k:k + whole * step] = _ramp(starts, ends, frac_all).reshape(n_agc, -1)
        k += whole * step
    if k < n:
        # a tail shorter than an interval starts the next one
        rest = n - k
        g_lin[:, k:] = _ramp(loops.prev, loops.gain, frac_all[:rest])
        acc[:, :rest] = lv[:, k:]
        acc_n = rest
    loops.store()
    for i, a in enumerate(agcs):
        a.state.acc = acc[i].copy()
        a.state.acc_n = acc_n
        a._n += n
    g_lin *= 10.0 ** (first.fixed_gain_db / 20.0)
    return u * g_lin


def _levels(agcs, mag: np.ndarray) -> np.ndarray:
    """The envelopes through each AGC's carrier filter (one 2-D call; each row its own state)."""
    first = agcs[0]
    if first.sos is None:
        return mag
    zi = np.stack([a.state.zi for a in agcs], axis=1)          # (sections, agcs, 2)
    y, zf = signal.sosfilt(first.sos, mag, axis=-1, zi=zi)
    for i, a in enumerate(agcs):
        a.state.zi = zf[:, i, :].copy()
    return y
