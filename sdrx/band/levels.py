"""The carrier level log: 10 ms window levels -> mean, min, max per second; merged across segments.

Each station's receiver measures the carrier level (referred to the
antenna, dBFS) in 10 ms windows. A second of the log holds the windows that
start in it: its mean is the level of the mean carrier amplitude,
20·log10(Σ10^(L/20)/n), as in the run summary, and its minimum and maximum
are those of the windows. A segment sends partial rows (sums, counts,
extremes) for the seconds it touches; rows cut by a segment boundary are
merged by the client, in segment order, so the log does not depend on where
the segments ran.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass

import numpy as np

__all__ = ["LevelRows", "level_rows", "merge_rows", "Totals", "log_csv"]


@dataclass
class LevelRows:
    """Partial rows: seconds ``index`` (from the excerpt start) with sums, counts and extremes."""

    index: np.ndarray      # int64
    lin_sum: np.ndarray    # Σ 10^(L/20)
    count: np.ndarray      # windows
    lo_db: np.ndarray
    hi_db: np.ndarray

    @property
    def mean_db(self) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(self.lin_sum / np.maximum(self.count, 1))


def level_rows(levels_dbfs, first_window: int, windows_per_second: int) -> LevelRows:
    """Group 10 ms window levels into per-second partial rows.

    Examples
    --------
    >>> r = level_rows(np.array([-20.0, -20.0, -26.0, -40.0]), 1, 2)
    >>> r.index.tolist(), r.count.tolist(), np.round(r.mean_db, 2).tolist(), r.lo_db.tolist()
    ([0, 1, 2], [1, 2, 1], [-20.0, -22.5, -40.0], [-20.0, -26.0, -40.0])
    """
    lv = np.asarray(levels_dbfs, dtype=np.float64)
    sec = (first_window + np.arange(len(lv))) // windows_per_second
    if len(lv) == 0:
        z = np.zeros(0)
        return LevelRows(np.zeros(0, np.int64), z, np.zeros(0, np.int64), z, z)
    idx, start = np.unique(sec, return_index=True)
    lin = 10.0 ** (lv / 20.0)
    return LevelRows(idx.astype(np.int64), np.add.reduceat(lin, start), np.diff(np.append(start, len(lv))),
                     np.minimum.reduceat(lv, start), np.maximum.reduceat(lv, start))


def merge_rows(parts) -> LevelRows:
    """Join partial rows in order; a second present in two consecutive parts is combined."""
    parts = [p for p in parts if len(p.index)]
    if not parts:
        return level_rows([], 0, 1)
    idx = np.concatenate([p.index for p in parts])
    lin = np.concatenate([p.lin_sum for p in parts])
    cnt = np.concatenate([p.count for p in parts])
    lo = np.concatenate([p.lo_db for p in parts])
    hi = np.concatenate([p.hi_db for p in parts])
    u, start = np.unique(idx, return_index=True)
    return LevelRows(u, np.add.reduceat(lin, start), np.add.reduceat(cnt, start),
                     np.minimum.reduceat(lo, start), np.maximum.reduceat(hi, start))


@dataclass
class Totals:
    """Whole-run carrier level statistics of one station (the summary's ``carrier_dbfs``)."""

    lin_sum: float = 0.0
    count: int = 0
    lo_db: float = math.inf
    hi_db: float = -math.inf

    def add(self, rows: LevelRows) -> None:
        if len(rows.index):
            self.lin_sum += float(np.sum(rows.lin_sum))
            self.count += int(np.sum(rows.count))
            self.lo_db = min(self.lo_db, float(np.min(rows.lo_db)))
            self.hi_db = max(self.hi_db, float(np.max(rows.hi_db)))

    def to_json(self) -> dict:
        if not self.count:
            return {"mean": None, "min": None, "max": None}
        return {"mean": round(20.0 * math.log10(max(self.lin_sum / self.count, 1e-300)), 4),
                "min": round(self.lo_db, 4), "max": round(self.hi_db, 4)}


def log_csv(captures, full_scale_dbm=None) -> str:
    """The level log as CSV text: one row per capture and second, three columns per station (six in dBm too).

    Parameters
    ----------
    captures : sequence of (name, start_s, {station_label: LevelRows})
        Stations are the union over captures (columns in frequency order,
        as given); a station a capture does not hold, or a second without a
        window, leaves its cells empty.
    full_scale_dbm : dict, optional
        Station label -> the antenna power of full scale, dBm (or None): a
        station with one has three more columns, its levels in dBm
        (:func:`sdrx.run.levels_dbm`).

    Examples
    --------
    >>> r = level_rows(np.array([-20.0, -22.0, -30.0]), 0, 2)
    >>> print(log_csv([("night", 0.0, {"1130k": r})]).strip())
    capture,t_s,1130k mean_dbfs,1130k min_dbfs,1130k max_dbfs
    night,0,-20.94,-22.00,-20.00
    night,1,-30.00,-30.00,-30.00
    >>> print(log_csv([("night", 0.0, {"1130k": r})], {"1130k": -10.0}).strip().splitlines()[1])
    night,0,-20.94,-22.00,-20.00,-30.94,-32.00,-30.00
    """
    scales = full_scale_dbm or {}
    labels = []
    for _, _, rows in captures:
        for k in rows:
            if k not in labels:
                labels.append(k)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["capture", "t_s"] + [f"{k} {c}_{u}" for k in labels
                                     for u in ("dbfs", "dbm")[:1 + (scales.get(k) is not None)] for c in _STATS])
    for name, start_s, rows in captures:
        seconds = sorted({int(i) for r in rows.values() for i in r.index})
        cols = {}
        for k, r in rows.items():
            m = r.mean_db
            cols[k] = {int(i): (m[j], r.lo_db[j], r.hi_db[j]) for j, i in enumerate(r.index)}
        for s in seconds:
            line = [name, f"{start_s + s:.6g}"]
            for k in labels:
                line += _cells(cols.get(k, {}).get(s), scales.get(k))
            w.writerow(line)
    return buf.getvalue()


_STATS = ("mean", "min", "max")


def _cells(levels_dbfs, full_scale_dbm) -> list:
    """One station's cells of a row: mean, min, max in dBFS, then in dBm when the full scale is known."""
    from ..run import levels_dbm

    width = 3 if full_scale_dbm is None else 6
    if levels_dbfs is None:
        return [""] * width
    dbm = levels_dbm(dict(zip(_STATS, levels_dbfs)), full_scale_dbm)
    return [f"{x:.2f}" for x in levels_dbfs] + ([] if dbm is None else [f"{dbm[c]:.2f}" for c in _STATS])
