"""Datasheet figures as PNG bytes: sensitivity, audio fidelity, distortion (same conventions as plots.py).

Each function takes the JSON-ready numbers of its ``measured.*`` section and
returns PNG bytes; byte-identical for identical inputs.
"""

from __future__ import annotations

import numpy as np

from .plots import _CYCLE, _STYLES, OKABE_ITO, _figure, _png

__all__ = ["sensitivity_png", "fidelity_png", "distortion_png", "THD_FLOOR_PERCENT"]

#: THD values below this are drawn on the plot's floor (log scale).
THD_FLOOR_PERCENT = 1e-3
_FREQ_TICKS = (20.0, 50.0, 100.0, 200.0, 500.0, 1e3, 2e3, 5e3, 1e4, 2e4)


def _plain_log_ticks(ax, lo_hz, hi_hz, y_log=False):
    """Plain-number tick labels on log axes (the report's figures print text literally, never mathtext)."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter

    ticks = [t for t in _FREQ_TICKS if lo_hz * 0.999 <= t <= hi_hz * 1.001]
    ax.xaxis.set_major_locator(FixedLocator(ticks))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    if y_log:
        ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
        ax.yaxis.set_minor_formatter(NullFormatter())


def sensitivity_png(sec: dict, *, title: str = "") -> bytes:
    """Audio S/N against antenna level: measured points, the line through them, the prediction.

    Parameters
    ----------
    sec : dict
        ``measured.sensitivity`` (``points``, ``level_dbm``, ``predicted_dbm``, ``sn_db`` ...).
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    pts = np.asarray(sec["points"], dtype=float).reshape(-1, 2)
    target = sec["sn_db"]
    lo, hi = pts[:, 0].min() - 2, pts[:, 0].max() + 2
    x = np.array([lo, hi])
    ax.plot(x, target + (x - sec["predicted_dbm"]), color=OKABE_ITO["blue"], lw=1.8,
            label="predicted: S/N = m²·(C/N0)/(2W), slope 1 dB/dB")
    ax.plot(pts[:, 0], pts[:, 1], ls="none", marker="o", ms=5, mfc="none", color=OKABE_ITO["vermillion"],
            label=f"measured ({sec['path']} path, thermal noise, NF {sec['noise_figure_db']:g} dB)")
    if sec["slope_db_per_db"] is not None and sec["level_dbm"] is not None:
        ax.plot(x, target + sec["slope_db_per_db"] * (x - sec["level_dbm"]), color=OKABE_ITO["vermillion"],
                lw=1, ls="--", label="line through the measured points")
    ax.axhline(target, color="#777777", lw=0.8, ls=":")
    for v, colour, name in ((sec["predicted_dbm"], OKABE_ITO["blue"], "predicted"),
                            (sec["level_dbm"], OKABE_ITO["vermillion"], "measured")):
        if v is not None:
            ax.plot([v], [target], marker="v", ms=8, color=colour, ls="none")
            ax.annotate(f"{name} {v:.1f} dBm", (v, target), textcoords="offset points",
                        xytext=(6, -14 if name == "measured" else 8), fontsize=8, color=colour)
    ax.set_xlim(lo, hi)
    ax.set_xlabel("carrier level at the antenna, dBm")
    ax.set_ylabel("audio S/N, dB")
    ax.set_title(title or "Sensitivity")
    ax.legend(loc="upper left", fontsize=8)
    return _png(fig, ctx)


def fidelity_png(sec: dict, *, title: str = "") -> bytes:
    """Antenna-to-audio response against modulating frequency: measured points and the prediction.

    Parameters
    ----------
    sec : dict
        ``measured.fidelity`` (``response``, ``predicted`` as [Hz, dB], the −3 dB points).
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    m = np.asarray(sec["response"], dtype=float).reshape(-1, 2)
    p = np.asarray(sec["predicted_curve"], dtype=float).reshape(-1, 2)
    ax.semilogx(p[:, 0], p[:, 1], color=OKABE_ITO["blue"], lw=1.8, label="predicted from the IF stages and audio filters")
    ax.semilogx(m[:, 0], m[:, 1], ls="none", marker="o", ms=4.5, mfc="none", color=OKABE_ITO["vermillion"],
                label=f"measured ({sec['path']} path, {sec['depth'] * 100:g} % modulation, AGC held)")
    ax.axhline(-3.0, color="#777777", lw=0.8, ls=":")
    for key, label in (("low_3db_hz", "low"), ("high_3db_hz", "high")):
        v = sec[key]
        if v is not None:
            ax.axvline(v, color=OKABE_ITO["green"], lw=1, ls="--")
            ax.annotate(f"−3 dB {label}: {v:.0f} Hz", (v, -3.0), textcoords="offset points",
                        xytext=(5 if label == "low" else -5, -14), ha="left" if label == "low" else "right",
                        fontsize=8, color=OKABE_ITO["green"])
    ax.set_xlim(p[:, 0].min(), p[:, 0].max())
    _plain_log_ticks(ax, p[:, 0].min(), p[:, 0].max())
    ax.set_ylim(max(-40.0, float(np.nanmin(p[:, 1])) - 3), 3)
    ax.set_xlabel("modulating frequency, Hz")
    ax.set_ylabel(f"audio response re {sec['reference_hz']:g} Hz, dB")
    ax.set_title(title or "Audio fidelity")
    ax.legend(loc="lower center", fontsize=8)
    return _png(fig, ctx)


def distortion_png(sec: dict, *, title: str = "") -> bytes:
    """THD against modulating frequency for each depth; the diode's diagonal-clipping onsets drawn.

    Parameters
    ----------
    sec : dict
        ``measured.distortion`` (``thd_vs_frequency``, ``diagonal_clipping``).
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    clip = sec["diagonal_clipping"]
    fmin, fmax = np.inf, 0.0
    for i, (depth, rows) in enumerate(sorted(sec["thd_vs_frequency"].items(), key=lambda kv: float(kv[0]))):
        r = np.asarray(rows, dtype=float).reshape(-1, 2)
        fmin, fmax = min(fmin, r[:, 0].min()), max(fmax, r[:, 0].max())
        colour = _CYCLE[i % len(_CYCLE)]
        ax.loglog(r[:, 0], np.maximum(r[:, 1], THD_FLOOR_PERCENT), color=colour, ls=_STYLES[i % len(_STYLES)],
                  marker="o", ms=3.5, lw=1.4, label=f"m = {float(depth) * 100:g} %")
        if clip is not None:
            onset = clip["onset_hz"][depth]
            ax.axvline(onset, color=colour, lw=1, ls=":")
            ax.annotate(f"clipping from {onset:.0f} Hz", (onset, THD_FLOOR_PERCENT), textcoords="offset points",
                        xytext=(3, 6 + 12 * i), fontsize=7, color=colour, rotation=0)
    if clip is not None:
        ax.plot([], [], color="#555555", ls=":",
                label=f"diagonal-clipping limit for RC {clip['rc_us']:g} µs: fm = √(1−m²)/(2π·RC·m)")
    ax.set_xlim(fmin, fmax)
    _plain_log_ticks(ax, fmin, fmax, y_log=True)
    top = max(1.0, max(float(np.max(np.asarray(v, float)[:, 1])) for v in sec["thd_vs_frequency"].values()) * 2)
    ax.set_ylim(THD_FLOOR_PERCENT * 0.7, top)
    ax.set_xlabel("modulating frequency, Hz")
    ax.set_ylabel(f"THD, % (below {THD_FLOOR_PERCENT:g} % drawn on the floor)")
    ax.set_title(title or "Distortion")
    ax.legend(loc="upper left", fontsize=8)
    return _png(fig, ctx)
