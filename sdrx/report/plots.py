"""Report figures as PNG bytes (matplotlib, Agg backend, imported inside each function).

Every function takes plain numbers (lists/arrays, Hz and dB) and returns the
PNG file's bytes, so the figures can be both written beside the report and
embedded in its HTML. Output is byte-identical for identical inputs: fixed
size and DPI, no software/date metadata, fixed ``svg.hashsalt``.

Colours are the Okabe–Ito palette (distinguishable with the common forms of
colour blindness); lines also differ in style and markers.
"""

from __future__ import annotations

import io

import numpy as np

__all__ = [
    "OKABE_ITO",
    "selectivity_png",
    "stages_png",
    "image_png",
    "group_delay_png",
    "spectrum_png",
    "agc_png",
]

#: Okabe & Ito (2008) colour-universal palette.
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "purple": "#CC79A7",
}
_CYCLE = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000"]
_STYLES = ["-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1, 1, 1, 1, 1)), (0, (1, 1))]

_RC = {
    "svg.hashsalt": "sdrx-report",
    "figure.dpi": 100,
    "savefig.dpi": 100,
    "font.size": 10,
    "axes.grid": True,
    "grid.alpha": 0.3,
    "axes.prop_cycle": None,  # filled in _figure
    # titles carry user text (the chain's name): a "$" must print as itself, not start mathtext
    "text.parse_math": False,
}
_DPI = 100
_SIZE = (8.0, 4.6)


def _figure():
    import matplotlib

    matplotlib.use("Agg", force=True)
    from cycler import cycler
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    rc = dict(_RC)
    rc["axes.prop_cycle"] = cycler(color=_CYCLE)
    ctx = matplotlib.rc_context(rc)
    ctx.__enter__()
    fig = Figure(figsize=_SIZE, dpi=_DPI)
    FigureCanvasAgg(fig)  # a renderer to measure the titles with (see _fit_titles)
    return fig, ctx


def _png(fig, ctx) -> bytes:
    import warnings

    buf = io.BytesIO()
    try:
        with warnings.catch_warnings():
            # titles carry the chain's name: a character the font lacks is drawn as a box, and a title
            # too long for tight_layout keeps the default layout; neither is worth a warning on stderr
            warnings.filterwarnings("ignore", r"Glyph .* missing from", UserWarning)
            warnings.filterwarnings("ignore", r"Tight layout not applied", UserWarning)
            fig.tight_layout()
            if _fit_titles(fig):
                fig.tight_layout()
            fig.savefig(buf, format="png", dpi=_DPI, metadata={"Software": None})
    finally:
        ctx.__exit__(None, None, None)
    return buf.getvalue()


#: A title takes at most this many lines; the rest of a longer one is cut with "…".
TITLE_LINES = 3


def _titles(fig) -> list:
    """The figure's title texts: each axes' centre title and the figure's suptitle."""
    out = [ax.title for ax in fig.axes]
    if getattr(fig, "_suptitle", None) is not None:
        out.append(fig._suptitle)
    return [t for t in out if t.get_text()]


def _fit_titles(fig, margin=0.96) -> bool:
    """Wrap each title wider than the room about its centre onto at most :data:`TITLE_LINES` lines.

    A chain's name can be as long as the user likes: the title is broken at
    spaces where it can be (anywhere in a word that is longer than a line),
    measured with the figure's renderer, and cut with "…" after the last line.
    Returns whether any title changed (the layout is then made again).
    """
    import re
    import textwrap

    renderer = fig.canvas.get_renderer()
    changed = False
    for t in _titles(fig):
        # a number stays on the line of its unit ("1 MHz"): a no-break space between them
        text = re.sub(r"(\d) (?=[kMG]?Hz|dB)", "\\1\u00a0", t.get_text().replace("\n", " "))
        box = t.get_window_extent(renderer)
        centre = (box.x0 + box.x1) / 2
        room = 2 * min(centre, fig.bbox.width - centre) * margin
        width = box.width
        changed = changed or width > room
        chars = len(text)
        while width > room and chars > 8:
            chars = max(8, min(chars - 1, int(chars * room / width)))
            lines = textwrap.wrap(text, chars, break_long_words=True)
            if len(lines) > TITLE_LINES:
                lines = lines[:TITLE_LINES]
                lines[-1] = lines[-1][:max(1, chars - 1)].rstrip() + "…"
            t.set_text("\n".join(lines))
            width = t.get_window_extent(renderer).width
    return changed


def _measured_points(ax, x_khz, y_db, label):
    """Measured points as open circles; those below the axes' bottom drawn on it as open triangles.

    A test carrier that reads below the figure's range is a real measurement of a lower level (the
    single-signal measurement reaches about −160 dB), not a point at the floor: it gets its own marker and
    legend entry ("below −140 dB, drawn on the floor"). Call after the y limits are set.
    """
    bottom = ax.get_ylim()[0]
    x = np.asarray(x_khz, dtype=float)
    y = np.asarray(y_db, dtype=float)
    below = ~(y > bottom)  # -inf (no carrier found) is below too
    ax.plot(x[~below], y[~below], ls="none", marker="o", ms=4.5, mfc="none", color=OKABE_ITO["vermillion"],
            label=label)
    if below.any():
        ax.plot(x[below], np.full(int(below.sum()), bottom), ls="none", marker="v", ms=6, mfc="none",
                mew=1.3, color=OKABE_ITO["vermillion"], clip_on=False,
                label=f"measured below {bottom:g} dB (drawn on the floor)")


def _channel_grid(ax, spacing_khz, span_khz):
    n = int(np.floor(span_khz / spacing_khz))
    for k in range(-n, n + 1):
        ax.axvline(k * spacing_khz, color="#999999", lw=0.6, ls=":", zorder=0)


def selectivity_png(designed, measured, spacing_hz, rejections, *, title="", floor_db=-110.0) -> bytes:
    """Overall selectivity: designed line, measured points, channel grid, ±1/±2 channel marks.

    Parameters
    ----------
    designed : sequence of (offset_hz, db)
    measured : sequence of (offset_hz, db) or None
    spacing_hz : float
    rejections : dict
        Signed offset string -> designed rejection dB, marked on the curve.
    title : str
    floor_db : float
        Bottom of the plot.

    Returns
    -------
    bytes
        PNG.
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    d = np.asarray(designed, dtype=float).reshape(-1, 2)
    span = 3 * spacing_hz
    sel = np.abs(d[:, 0]) <= span * 1.0001
    sk = spacing_hz / 1e3
    _channel_grid(ax, sk, span / 1e3)
    ax.plot(d[sel, 0] / 1e3, np.maximum(d[sel, 1], floor_db), color=OKABE_ITO["blue"], lw=1.8, label="designed")
    ax.set_ylim(floor_db, 8)
    if measured is not None and len(measured):
        m = np.asarray(measured, dtype=float).reshape(-1, 2)
        ms = np.abs(m[:, 0]) <= span * 1.0001
        _measured_points(ax, m[ms, 0] / 1e3, m[ms, 1], "measured (test carriers, AGC held)")
    for key, rej in sorted(rejections.items(), key=lambda kv: float(kv[0])):
        x = float(key) / 1e3
        if rej is None:
            continue
        y = max(-float(rej), floor_db)
        ax.plot([x], [y], marker="v", ms=8, color=OKABE_ITO["green"], ls="none")
        # label on the outer side of the mark, where the curve lies below it (centred, the rising
        # skirt towards the tune would run through the text)
        out = 1 if x > 0 else -1
        ax.annotate(f"{-rej:.1f} dB", (x, y), textcoords="offset points", xytext=(7 * out, 7),
                    ha="left" if out > 0 else "right", fontsize=8, color=OKABE_ITO["green"],
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.85})
    ax.plot([], [], marker="v", ls="none", color=OKABE_ITO["green"], label="±1, ±2 channels (designed)")
    ax.set_xlim(-span / 1e3, span / 1e3)
    ax.set_xlabel(f"offset from tuned carrier, kHz (channel grid every {sk:g} kHz)")
    ax.set_ylabel("response relative to tuned carrier, dB")
    ax.set_title(title or "Overall selectivity referred to RF")
    ax.legend(loc="lower center", fontsize=8)
    return _png(fig, ctx)


def stages_png(offsets_hz, curves, overall_db, spacing_hz, *, title="", floor_db=-110.0) -> bytes:
    """Each stage's response (referred to RF offsets) and the overall response.

    Parameters
    ----------
    offsets_hz : array_like
    curves : list of (label, array of dB)
    overall_db : array of dB
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    x = np.asarray(offsets_hz, dtype=float) / 1e3
    _channel_grid(ax, spacing_hz / 1e3, float(np.max(np.abs(x))))
    for i, (label, y) in enumerate(curves):
        ax.plot(x, np.maximum(np.asarray(y, dtype=float), floor_db), lw=1.4, color=_CYCLE[(i + 1) % len(_CYCLE)],
                ls=_STYLES[(i + 1) % len(_STYLES)], label=label)
    ax.plot(x, np.maximum(np.asarray(overall_db, dtype=float), floor_db), color=OKABE_ITO["black"], lw=2.0,
            label="overall")
    ax.set_xlim(x.min(), x.max())
    ax.set_ylim(floor_db, 8)
    ax.set_xlabel("offset from tuned carrier, kHz")
    ax.set_ylabel("response relative to its value at the tune, dB")
    ax.set_title(title or "Response of each stage")
    ax.legend(loc="lower center", fontsize=7, ncol=2, framealpha=0.9)
    return _png(fig, ctx)


def image_png(designed, measured, image_offset_hz, spacing_hz, image_rejection_db, *, title="",
              floor_db=-140.0) -> bytes:
    """The image region: designed line and measured points around ``image_offset_hz``.

    ``designed`` should be a fine grid (the report gives 200 points per channel spacing): the response of an
    elliptic stage has notches that a coarse one draws as a polygon. Measured points below the figure's
    range are marked as such (:func:`_measured_points`).
    """
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    d = np.asarray(designed, dtype=float).reshape(-1, 2)
    span = 3 * spacing_hz * 1.0001
    sel = np.abs(d[:, 0] - image_offset_hz) <= span
    rel = (d[sel, 0] - image_offset_hz) / 1e3
    _channel_grid(ax, spacing_hz / 1e3, 3 * spacing_hz / 1e3)
    ax.plot(rel, np.maximum(d[sel, 1], floor_db), color=OKABE_ITO["blue"], lw=1.8, label="designed")
    if image_rejection_db is None:
        # no image response at all (an ideal quadrature mixer): infinite rejection, nothing to draw
        ax.plot([], [], color=OKABE_ITO["green"], ls="--", lw=1, label="image rejection infinite (no image response)")
        level = floor_db
    else:
        ax.axhline(-image_rejection_db, color=OKABE_ITO["green"], ls="--", lw=1,
                   label=f"image rejection {image_rejection_db:.1f} dB")
        level = -image_rejection_db
    ax.set_xlim(-3 * spacing_hz / 1e3, 3 * spacing_hz / 1e3)
    finite = np.maximum(d[sel, 1], floor_db)
    finite = finite[np.isfinite(finite)]
    lo = min((float(finite.min()) if finite.size else floor_db) - 10, level - 20)
    ax.set_ylim(max(lo, floor_db), max(level + 30, 5))
    if measured is not None and len(measured):
        m = np.asarray(measured, dtype=float).reshape(-1, 2)
        ms = np.abs(m[:, 0] - image_offset_hz) <= span
        _measured_points(ax, (m[ms, 0] - image_offset_hz) / 1e3, m[ms, 1], "measured")
    ax.set_xlabel(f"offset from the image frequency ({image_offset_hz / 1e3:+g} kHz from the tune), kHz")
    ax.set_ylabel("response relative to tuned carrier, dB")
    ax.set_title(title or "Image region")
    ax.legend(loc="lower center", fontsize=8)
    return _png(fig, ctx)


def group_delay_png(offsets_hz, delay_s, edges_hz=None, *, title="") -> bytes:
    """Group delay across the passband, µs, with the −3 dB edges drawn."""
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    x = np.asarray(offsets_hz, dtype=float) / 1e3
    ax.plot(x, np.asarray(delay_s, dtype=float) * 1e6, color=OKABE_ITO["blue"], lw=1.8, label="group delay")
    if edges_hz:
        for i, e in enumerate(edges_hz):
            if e is not None:
                ax.axvline(e / 1e3, color=OKABE_ITO["vermillion"], ls="--", lw=1,
                           label="−3 dB edges" if i == 0 else None)
    ax.set_xlim(x.min(), x.max())
    ax.set_xlabel("offset from tuned carrier, kHz")
    ax.set_ylabel("group delay, µs")
    ax.set_title(title or "Group delay across the passband")
    ax.legend(loc="lower center", fontsize=8)
    return _png(fig, ctx)


def spectrum_png(freqs_hz, level_dbfs, tune_hz, passband_hz, image_hz, carriers, *, image_freqs_hz=None,
                 image_level_dbfs=None, title="", rbw_hz, bin_hz) -> bytes:
    """Capture spectrum around the tuning with the passband and the image drawn on it.

    Parameters
    ----------
    freqs_hz, level_dbfs : array_like
        Spectrum around the tuning (levels in dBFS per carrier).
    tune_hz : float
    passband_hz : (float, float)
        −6 dB edges, absolute RF, Hz.
    image_hz : float
    carriers : list of (freq_hz, level_dbfs)
        Surveyed carriers to mark.
    image_freqs_hz, image_level_dbfs : array_like, optional
        Spectrum around the image, when the capture holds it (second panel).
    rbw_hz, bin_hz : float
        Resolution (equivalent noise) bandwidth and bin spacing of the
        spectrum: stated under each panel; the level is dBFS per RBW.
    """
    from .text import frequency_text

    rbw = (f"RBW {frequency_text(rbw_hz, 0.1)}: noise bandwidth of the Hann window, bins {frequency_text(bin_hz, 0.1)}"
           "\na carrier reads its amplitude, noise its power within the RBW")
    fig, ctx = _figure()
    two = image_freqs_hz is not None and len(image_freqs_hz) > 0
    ax = fig.add_subplot(1, 2 if two else 1, 1)
    f = np.asarray(freqs_hz, dtype=float)
    ax.plot(f / 1e3, level_dbfs, color=OKABE_ITO["black"], lw=0.8, label="capture")
    ax.axvspan(passband_hz[0] / 1e3, passband_hz[1] / 1e3, color=OKABE_ITO["sky_blue"], alpha=0.35,
               label="passband (−6 dB)")
    ax.axvline(tune_hz / 1e3, color=OKABE_ITO["blue"], lw=1, ls="--", label="tune")
    for fc, lv in carriers:
        if f.min() <= fc <= f.max():
            ax.plot([fc / 1e3], [lv], marker="v", color=OKABE_ITO["vermillion"], ls="none", ms=6)
    ax.plot([], [], marker="v", color=OKABE_ITO["vermillion"], ls="none", label="carriers found")
    ax.set_xlabel("frequency, kHz")
    ax.set_ylabel("level, dBFS per RBW")
    ax.set_title("around the tuning")
    ax.legend(loc="lower left", fontsize=7)
    if two:
        ax2 = fig.add_subplot(1, 2, 2, sharey=ax)
        fi = np.asarray(image_freqs_hz, dtype=float)
        ax2.plot(fi / 1e3, image_level_dbfs, color=OKABE_ITO["black"], lw=0.8)
        ax2.axvline(image_hz / 1e3, color=OKABE_ITO["vermillion"], lw=1.4, ls="--", label="image")
        for fc, lv in carriers:
            if fi.min() <= fc <= fi.max():
                ax2.plot([fc / 1e3], [lv], marker="v", color=OKABE_ITO["vermillion"], ls="none", ms=6)
        ax2.set_xlabel("frequency, kHz")
        ax2.set_title("around the image")
        ax2.legend(loc="lower left", fontsize=7)
    else:
        ax.annotate(f"image at {image_hz / 1e3:g} kHz (outside the capture)", (0.98, 0.95),
                    xycoords="axes fraction", ha="right", va="top", fontsize=8, color=OKABE_ITO["vermillion"])
    fig.supxlabel(rbw, fontsize=9)
    if title:
        fig.suptitle(title)
    return _png(fig, ctx)


def agc_png(characteristic, range_db, range_dbfs, reference_dbfs, *, title="") -> bytes:
    """The AGC characteristic: audio output against antenna level, the 3 and 10 dB ranges shaded."""
    fig, ctx = _figure()
    ax = fig.add_subplot(1, 1, 1)
    lv = [p[0] for p in characteristic]
    db = [p[1] for p in characteristic]
    for key, colour in (("10", OKABE_ITO["sky_blue"]), ("3", OKABE_ITO["green"])):
        lo, hi = range_dbfs[key]
        ax.axvspan(lo, hi, color=colour, alpha=0.18, lw=0,
                   label=f"output within ±{key} dB: {range_db[key]:.1f} dB of input")
    ax.plot(lv, db, color=OKABE_ITO["blue"], marker="o", ms=3.5, lw=1.4, label="audio output (1 kHz, 30 %)")
    ax.axvline(reference_dbfs, color=OKABE_ITO["vermillion"], lw=0.9, ls="--",
               label=f"reference input {reference_dbfs:g} dBFS")
    ax.set_xlabel("antenna level of the carrier, dBFS")
    ax.set_ylabel("audio output, dB re reference")
    ax.set_ylim(min(-30.0, min(db) - 3), max(10.0, max(db) + 3))
    ax.legend(loc="lower right", fontsize=8.5)
    ax.set_title(title, fontsize=10)
    return _png(fig, ctx)
