"""The band overview's pictures: the spectrogram PNG (matplotlib, imported here only) and level plots (SVG).

PNG output is byte-identical for identical inputs (fixed size and DPI, no
software or date metadata). The level plot is a small inline SVG drawn
without matplotlib: one per station, so a page of a hundred stations stays
light.
"""

from __future__ import annotations

import html
import io
import math

import numpy as np

__all__ = ["spectrogram_png", "level_svg", "capture_spectrogram_png"]

_DPI = 100


def spectrogram_png(freqs_hz, times_s, db, stations, *, title: str = "", column_s: float = 0.0) -> bytes:
    """Waterfall picture: frequency across, time down, level in colour; stations marked along the top.

    Parameters
    ----------
    freqs_hz : array_like
        Bin frequencies (absolute RF), Hz.
    times_s : array_like
        Column start times, seconds into the capture.
    db : ndarray, shape (columns, bins)
        Levels, dBFS.
    stations : sequence of (freq_hz, label)
        Marked with a tick at the top (labelled when there are at most 40).
    title : str
    column_s : float
        Duration of a column (extends the last row), seconds.

    Returns
    -------
    bytes
        The PNG file.
    """
    import matplotlib

    matplotlib.use("Agg", force=True)
    from matplotlib.figure import Figure

    f = np.asarray(freqs_hz, dtype=float) / 1e3
    t = np.asarray(times_s, dtype=float)
    z = _pool(np.asarray(db, dtype=float), 600, 1000)
    with matplotlib.rc_context({"font.size": 9, "text.parse_math": False, "svg.hashsalt": "sdrx-band"}):
        fig = Figure(figsize=(10.0, 5.2), dpi=_DPI)
        ax = fig.add_subplot(1, 1, 1)
        if z.size:
            finite = z[np.isfinite(z)]
            hi = float(np.max(finite)) if finite.size else 0.0
            lo = max(float(np.percentile(finite, 5)) - 5.0, hi - 100.0) if finite.size else hi - 100.0
            t_end = (t[-1] + column_s) if len(t) else 1.0
            im = ax.imshow(z, aspect="auto", origin="upper", cmap="viridis", vmin=lo, vmax=hi,
                           extent=(f[0], f[-1], t_end, t[0] if len(t) else 0.0), interpolation="nearest")
            cb = fig.colorbar(im, ax=ax, pad=0.01, fraction=0.04)
            cb.set_label("dBFS (peak-scaled)")
        ax.set_xlabel("frequency, kHz")
        ax.set_ylabel("time, s")
        ax.set_title(title)
        ax.grid(False)
        top = ax.secondary_xaxis("top")
        top.set_xticks([s / 1e3 for s, _ in stations])
        if len(stations) <= 40:
            top.set_xticklabels([lab for _, lab in stations], rotation=90, fontsize=7)
        else:
            top.set_xticklabels([])
        top.tick_params(length=6, color="#D55E00", width=1.2)
        fig.subplots_adjust(left=0.07, right=0.98, bottom=0.1, top=0.84)
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=_DPI, metadata={"Software": None})
    return buf.getvalue()


def _pool(db: np.ndarray, rows: int, cols: int) -> np.ndarray:
    """At most ``rows`` × ``cols`` cells for the picture: power averaged over each block of cells."""
    if db.ndim != 2 or db.size == 0:
        return db
    r = max(1, -(-db.shape[0] // rows))
    c = max(1, -(-db.shape[1] // cols))
    if r == 1 and c == 1:
        return db
    n0, n1 = db.shape[0] // r * r, db.shape[1] // c * c
    p = 10.0 ** (db[:n0, :n1] / 10.0)
    p = p.reshape(n0 // r, r, n1 // c, c).mean(axis=(1, 3))
    return 10.0 * np.log10(p)


def capture_spectrogram_png(reader, *, spacing_hz: float, start_s=0.0, duration_s=None, stations=(),
                            progress=None) -> bytes:
    """The spectrogram of a capture excerpt (one pass over it) as PNG bytes, ``stations`` marked.

    The same picture as the band overview's for that capture (``sdrx info --spectrogram``).
    """
    from .spectrogram import plan_spectrogram, spectrogram

    first, count = reader.sample_range(start_s, duration_s)
    plan = plan_spectrogram(reader.info, first, count, spacing_hz)
    db = spectrogram(reader, plan, progress=progress)
    name = getattr(reader.info.path, "name", str(reader.info.path))
    return spectrogram_png(plan.freqs_hz, plan.times_s, db, list(stations),
                           title=f"{name}: spectrogram, stations marked", column_s=plan.column / plan.fs)


def _reduce(x, lo, hi, mean, max_points):
    """At most ``max_points`` columns: min of minima, max of maxima, mean of means per bin."""
    n = len(x)
    if n <= max_points:
        return x, lo, hi, mean
    edges = np.linspace(0, n, max_points + 1).astype(int)
    starts = edges[:-1]
    return (x[starts], np.minimum.reduceat(lo, starts), np.maximum.reduceat(hi, starts),
            np.add.reduceat(mean, starts) / np.diff(edges))


def level_svg(t_s, mean_db, min_db, max_db, *, width: int = 560, height: int = 90, max_points: int = 560,
              label: str = "") -> str:
    """Carrier level against time as inline SVG: the min–max band shaded, the mean as a line.

    Examples
    --------
    >>> svg = level_svg([0, 1, 2], [-30.0, -31.0, -29.0], [-33.0, -34.0, -30.0], [-28.0, -29.0, -27.0])
    >>> svg.startswith("<svg") and svg.count("<polyline") == 1 and svg.count("<polygon") == 1
    True
    """
    t = np.asarray(t_s, dtype=float)
    m = np.asarray(mean_db, dtype=float)
    lo = np.asarray(min_db, dtype=float)
    hi = np.asarray(max_db, dtype=float)
    t, lo, hi, m = _reduce(t, lo, hi, m, max_points)
    pad_l, pad_r, pad_t, pad_b = 44, 6, 6, 16
    w, h = width - pad_l - pad_r, height - pad_t - pad_b
    if len(t) == 0:
        return (f'<svg class="level" width="{width}" height="{height}" role="img" aria-label="{html.escape(label)}">'
                f'<text x="{pad_l}" y="{height // 2}" font-size="11">no level data</text></svg>')
    y_lo, y_hi = float(np.floor(np.min(lo) / 5) * 5), float(np.ceil(np.max(hi) / 5) * 5)
    if y_hi - y_lo < 10:
        y_hi, y_lo = y_hi + 5, y_lo - 5
    t0, t1 = float(t[0]), float(t[-1]) if t[-1] > t[0] else float(t[0]) + 1.0

    def X(v):
        return pad_l + (np.asarray(v) - t0) / (t1 - t0) * w

    def Y(v):
        return pad_t + (y_hi - np.asarray(v)) / (y_hi - y_lo) * h

    def pts(xs, ys):
        return " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(xs, ys))

    band = pts(np.concatenate([X(t), X(t[::-1])]), np.concatenate([Y(hi), Y(lo[::-1])]))
    line = pts(X(t), Y(m))
    ticks = "".join(
        f'<text x="{pad_l - 4}" y="{Y(v) + 4:.1f}" font-size="10" text-anchor="end">{v:g}</text>'
        for v in (y_hi, y_lo))
    step = _nice_step((t1 - t0) / 6)
    xt = "".join(f'<text x="{X(v):.1f}" y="{height - 3}" font-size="10" text-anchor="middle">{v:g}</text>'
                 for v in np.arange(math.ceil(t0 / step) * step, t1 + 1e-9, step))
    return (f'<svg class="level" width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img" '
            f'aria-label="{html.escape(label, quote=True)}">'
            f'<rect x="{pad_l}" y="{pad_t}" width="{w}" height="{h}" fill="#fff" stroke="#bbb"/>'
            f'<polygon points="{band}" fill="#56B4E9" fill-opacity="0.45" stroke="none"/>'
            f'<polyline points="{line}" fill="none" stroke="#0072B2" stroke-width="1.2"/>'
            f'{ticks}{xt}<text x="4" y="{pad_t + 10}" font-size="10">dBFS</text></svg>')


def _nice_step(x: float) -> float:
    """1, 2 or 5 times a power of ten, at least x."""
    if x <= 0:
        return 1.0
    e = 10.0 ** math.floor(math.log10(x))
    for k in (1, 2, 5, 10):
        if k * e >= x:
            return k * e
    return 10 * e
