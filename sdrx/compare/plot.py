"""Selectivity curves of every compared chain on one plot (matplotlib, Agg)."""

from __future__ import annotations

import io

import numpy as np

from ..units import format_frequency

__all__ = ["COLOURS", "LEVELS", "STYLES", "selectivity_png"]

#: Okabe & Ito (2008) colour-universal palette (told apart with the common forms of colour blindness)
COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000")
#: line styles as well, so that coinciding or similar-coloured curves stay apart
STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1, 1, 1, 1, 1)), (0, (1, 1)))


def selectivity_png(curves, *, tune_hz: float, spacing_hz: float | None = None,
                    span_hz: float = 30e3, floor_db: float = -100.0) -> bytes:
    """PNG of relative selectivity curves, one line per chain.

    Parameters
    ----------
    curves : sequence of (label, offsets_hz, response_db)
        Relative RF response of each chain about the tune
        (:func:`sdrx.compare.figures.selectivity_curve`).
    tune_hz : float
        The tune, for the title.
    spacing_hz : float, optional
        Channel spacing: dotted lines at the adjacent channels, labelled.
    span_hz : float
        Half-width of the plot, Hz.
    floor_db : float
        Bottom of the plot, dB.

    Returns
    -------
    bytes
        PNG file contents (no timestamp, so reruns give the same bytes).

    Examples
    --------
    >>> import numpy as np
    >>> off = np.linspace(-30e3, 30e3, 601)
    >>> selectivity_png([("a", off, -np.abs(off) / 500)], tune_hz=1e6)[:4]
    b'\\x89PNG'
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(8, 4.2), dpi=100)
    ax = fig.add_subplot(1, 1, 1)
    for i, (label, off, db) in enumerate(curves):
        off = np.asarray(off, dtype=float)
        keep = np.abs(off) <= span_hz
        # labels are user text: parse_math off so that a "$" is not taken for mathtext
        ax.plot(off[keep] / 1e3, np.maximum(np.asarray(db, dtype=float)[keep], floor_db - 10), label=str(label),
                color=COLOURS[i % len(COLOURS)], linestyle=STYLES[i % len(STYLES)], linewidth=1.6)
    _reference_lines(ax, spacing_hz, span_hz)
    ax.set_xlim(-span_hz / 1e3, span_hz / 1e3)
    ax.set_ylim(floor_db, 5)
    ax.set_xlabel(f"offset from the tune ({format_frequency(tune_hz)}), kHz")
    ax.set_ylabel("response re the tune, dB")
    ax.set_title("Selectivity (designed, AGC off)")
    ax.grid(True, alpha=0.3)
    leg = ax.legend(loc="lower center", fontsize=8)
    for t in leg.get_texts():
        t.set_parse_math(False)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", metadata={"Software": None})
    return buf.getvalue()


#: the levels the page's table gives the bandwidths at, with what a reader calls them
LEVELS = ((-6.0, "−6 dB\nbandwidth"), (-60.0, "−60 dB\nbandwidth"))


def _reference_lines(ax, spacing_hz, span_hz: float) -> None:
    """Grey lines at the table's bandwidth levels and at the adjacent channels, named on the free axes
    (right and top), where no curve can hide a label."""
    grey = {"length": 0, "labelsize": 8, "labelcolor": "0.3"}
    for level, _ in LEVELS:
        ax.axhline(level, color="0.75", linestyle="--", linewidth=0.8)
    right = ax.secondary_yaxis("right")
    right.set_yticks([lvl for lvl, _ in LEVELS], labels=[words for _, words in LEVELS])
    right.tick_params(**grey)
    if spacing_hz and spacing_hz < span_hz:
        at = [-spacing_hz / 1e3, spacing_hz / 1e3]
        for x in at:
            ax.axvline(x, color="0.5", linestyle=":", linewidth=1)
        top = ax.secondary_xaxis("top")
        top.set_xticks(at, labels=[f"adjacent channel\n{'−' if x < 0 else '+'}{abs(x):g} kHz" for x in at])
        top.tick_params(**grey)
