"""One self-contained HTML page for a report: figures embedded as data: URIs, no external links.

Every number in the tables is printed as a reader reads it (kHz or MHz, µs,
dB to one or two decimals: :mod:`sdrx.report.text`) and tagged with
``data-key`` = its path in ``report.json`` (dots between keys, list indices as
numbers) and ``data-value`` = the JSON value itself (``repr`` of the float),
so the page and the JSON can be checked against each other. All user text (chain name,
capture path, stage labels) goes through :func:`html.escape`.
"""

from __future__ import annotations

import base64
import html
from functools import partial

from .text import (as_db1, as_db2, as_diff_hz, as_hz, as_offset, as_pct, as_plain, as_q, as_signed_db2, as_us,
                   as_hz01, fixed_text)
from .words import stage_words

__all__ = ["render_html", "lookup"]

_CSS = """
body{font-family:system-ui,sans-serif;margin:1.5em auto;max-width:60em;color:#111;line-height:1.4}
h1{font-size:1.4em}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.6em 0}th,td{border:1px solid #bbb;padding:.2em .6em}
td.n{text-align:right;font-variant-numeric:tabular-nums}th{background:#eee;text-align:left}
img{max-width:100%;height:auto;display:block;margin:.6em 0}.note{color:#444;font-size:.9em}
"""


def lookup(data, key: str):
    """Value at a dotted ``data-key`` path (``"designed.q.stages.0.loaded_q"``).

    Examples
    --------
    >>> lookup({"a": {"b": [1.5, 2.0]}}, "a.b.1")
    2.0
    >>> lookup({"thd": {"0.95": 1.2}}, "thd.0.95")
    1.2
    """
    cur = data
    parts = _split(key)
    i = 0
    while i < len(parts):
        part = parts[i]
        if isinstance(cur, list):
            cur = cur[int(part)]
        else:
            # a key may itself hold dots (the depths "0.95" of measured.distortion): take the
            # shortest run of parts that names a key
            j = i
            while part not in cur and j + 1 < len(parts):
                j += 1
                part += "." + parts[j]
            cur = cur[part]
            i = j
        i += 1
    return cur


def _split(key):
    return key.split(".")


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _num(data, key, fmt=as_plain, tag="td"):
    """A table cell (or, ``tag="span"``, a number in a note) for the JSON value at ``key``, printed by ``fmt``."""
    v = lookup(data, key)
    cls = ' class="n"' if tag == "td" else ""
    if v is None:
        return '<%s%s data-key="%s" data-null="1">n/a</%s>' % (tag, cls, _e(key), tag)
    if isinstance(v, bool):
        return "<%s>%s</%s>" % (tag, "yes" if v else "", tag)
    return '<%s%s data-key="%s" data-value="%s">%s</%s>' % (tag, cls, _e(key), _e(repr(v)), _e(fmt(v)), tag)


def _span(data, key, fmt=as_plain):
    """A number inside a note, tagged like a table cell."""
    return _num(data, key, fmt, tag="span")


def _img(name, png, alt):
    b64 = base64.b64encode(png).decode("ascii")
    return f'<img alt="{_e(alt)}" src="data:image/png;base64,{b64}" data-name="{_e(name)}">'


def _row(label, cells):
    return "<tr><th>%s</th>%s</tr>" % (_e(label), "".join(cells))


def _selectivity_table(data):
    has_m = data.get("measured") is not None
    head = "<tr><th>quantity</th><th>designed</th>" + ("<th>measured</th><th>difference</th>" if has_m else "") + "</tr>"
    rows = [head]

    def row(label, sub, fmt, diff_fmt):
        cells = [_num(data, "designed." + sub, fmt)]
        if has_m:
            cells += [_num(data, "measured." + sub, fmt), _num(data, "measured.difference." + sub, diff_fmt)]
        rows.append(_row(label, cells))

    for k in sorted(data["designed"]["bandwidth_hz"], key=float):
        row(f"bandwidth at -{k} dB", f"bandwidth_hz.{k}", as_hz, as_diff_hz)
    row("shape factor (60 dB / 6 dB width)", "shape_factor", _ratio, _signed_ratio)
    for k in sorted(data["designed"]["adjacent_rejection_db"], key=lambda s: (abs(float(s)), float(s))):
        off = float(k) / 1e3
        row(f"adjacent-channel rejection at {off:+g} kHz, dB", f"adjacent_rejection_db.{k}", as_db2, as_signed_db2)
    row("image rejection, dB", "image_rejection_db", as_db2, as_signed_db2)
    out = "<table>" + "".join(rows) + "</table>"
    if data["designed"].get("image_rejection_db") is None:
        out += ('<p class="note">Image rejection: infinite. The chain has no image response at all (an ideal '
                'quadrature mixer, no gain or phase error); report.json holds null.</p>')
    if has_m:
        out += ('<p class="note">Largest difference between measured and designed points down to -80 dB: '
                '%s dB.</p>' % _span(data, "measured.difference.max_abs_db_down_to_80", as_db2))
    return out


def _q_tables(data):
    q = data["designed"]["q"]
    rows = ["<tr><th>stage</th><th>filter</th><th>centre</th>"
            "<th>design bandwidth</th><th>loaded Q</th><th>end-resonator Q, in</th>"
            "<th>end-resonator Q, out</th></tr>"]
    for i, s in enumerate(q["stages"]):
        base = f"designed.q.stages.{i}."
        rows.append("<tr><td>%s</td><td>%s</td>%s%s%s%s%s</tr>" % (
            _e(s["stage"]), _e(stage_words(s["response"], s["order"])), _num(data, base + "f0_hz", as_hz),
            _num(data, base + "bandwidth_hz", as_hz), _num(data, base + "loaded_q", as_q),
            _num(data, base + "end_resonator_q_in", as_q), _num(data, base + "end_resonator_q_out", as_q)))
    t1 = ("<table>" + "".join(rows) + "</table>"
          '<p class="note" id="q-note">Loaded Q: of the circuit for single-tuned and double-tuned stages (and the '
          "preselector); for filter stages (Butterworth, Chebyshev, elliptic, Bessel band-pass) the stage's centre over its "
          "design bandwidth, f0/BW, not the Q of the resonators that would build it. Design bandwidth: the "
          "-3 dB full width; for Chebyshev and elliptic stages the ripple band. End-resonator Q: the external Q "
          "the first and last resonators of a coupled-resonator Butterworth or Chebyshev filter must be loaded to, "
          "g0·g1·f0/BW and g_n·g_(n+1)·f0/BW from the ladder prototype's g-values (not given for Bessel and "
          "elliptic stages, which have no closed-form g-values).</p>")
    rows = ["<tr><th></th><th>at RF (the tune)</th><th>at the IF</th></tr>",
            _row("equivalent Q, exact (one single-tuned circuit)",
                 [_num(data, "designed.q.equivalent_rf", as_q), _num(data, "designed.q.equivalent_if", as_q)]),
            _row("shortcut Q = 10^(x/20)·f0/BW_x", [_num(data, "designed.q.shortcut_rf", as_q),
                                                   _num(data, "designed.q.shortcut_if", as_q)]),
            _row("shortcut error, %", [_num(data, "designed.q.shortcut_rf_error_pct", as_pct),
                                       _num(data, "designed.q.shortcut_if_error_pct", as_pct)])]
    t2 = "<table>" + "".join(rows) + "</table>"
    note = ('<p class="note">Rejection x = %s dB at %s (the smaller of the two sides). Method: %s.</p>'
            % (_span(data, "designed.q.rejection_db", as_db2), _span(data, "designed.q.offset_hz", as_offset),
               _e(q["method"])))
    return t1 + t2 + note


_ratio = partial(fixed_text, decimals=2)
_signed_ratio = partial(fixed_text, decimals=3, signed=True)
_ms = partial(fixed_text, decimals=1)


def _carrier_table(data):
    known = data.get("full_scale_dbm") is not None
    dbm_head = "<th>at antenna, dBm</th>" if known else ""
    rows = ["<tr><th>frequency</th><th>offset</th><th>at antenna, dBFS</th>" + dbm_head + "<th>selectivity, dB</th>"
            "<th>at detector, dBFS</th><th>tuned</th><th>image</th><th>within 2 channels</th></tr>"]
    cols = (("freq_hz", as_hz), ("offset_hz", as_offset), ("antenna_dbfs", as_db1)) + (
        (("antenna_dbm", as_db1),) if known else ()) + (
        ("selectivity_db", as_db2), ("detector_dbfs", as_db1), ("tuned", None), ("image", None),
        ("within_two_channels", None))
    for i, c in enumerate(data["carriers"]):
        b = f"carriers.{i}."
        rows.append("<tr>%s</tr>" % "".join(_num(data, b + k, fmt or as_plain) for k, fmt in cols))
    return ("<table>" + "".join(rows) + "</table>"
            '<p class="note">Level at the detector = level at the antenna + the designed selectivity at that '
            "frequency (relative to a carrier at the tune, i.e. with the chain's gain at the tune taken as 0 dB)."
            + (f" dBm = dBFS + the full scale, {data['full_scale_dbm']:g} dBm ({_e(data['full_scale_from'])})."
               if known else "") + "</p>")


def _agc_section(d, figures) -> str:
    """The measured AGC: characteristic figure, range, times and ripple, and the method."""
    parts = ["<h2>AGC</h2>"]
    if "agc.png" in figures:
        parts.append(_img("agc.png", figures["agc.png"], "AGC characteristic"))
    k = "measured.agc."
    parts.append("<table>"
                 + _row("reference input, dBFS", [_num(d, k + "reference_dbfs", as_db1)])
                 + _row("input range, output within 3 dB, dB", [_num(d, k + "range_db.3", as_db1)])
                 + _row("input range, output within 10 dB, dB", [_num(d, k + "range_db.10", as_db1)])
                 + _row("attack, +20 dB step to within 2 dB, ms", [_num(d, k + "attack_ms", _ms)])
                 + _row("release, -20 dB step to within 2 dB, ms", [_num(d, k + "release_ms", _ms)])
                 + _row("gain ripple, 80 % at 100 Hz, dB peak to peak", [_num(d, k + "ripple_db", as_db2)])
                 + "</table>")
    parts.append('<p class="note">Method: %s; %s path.</p>' % (_e(d["measured"]["agc"]["method"]),
                                                               _e(d["measured"]["agc"]["path"])))
    return "\n".join(parts)


def render_html(data: dict, figures: dict) -> str:
    """The report as one HTML page (UTF-8 text) with every figure embedded.

    Parameters
    ----------
    data : dict
        The report data (as written to ``report.json``).
    figures : dict
        File name -> PNG bytes.

    Returns
    -------
    str
    """
    from .datasheet_html import DATASHEET_FIGURES, datasheet_html

    d = data
    title = f"sdrx report: {d['chain']} tuned to {as_hz(d['tune_hz'])}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>{_e(title)}</h1>",
        "<table>",
        _row("chain", ["<td>%s</td>" % _e(d["chain"])]),
        _row("tuned carrier", [_num(d, "tune_hz", as_hz)]),
        _row("IF", [_num(d, "if_hz", as_hz)]),
        _row(f"LO ({d['injection']}-side)", [_num(d, "lo_hz", as_hz)]),
        _row("image", [_num(d, "image_hz", as_hz)]),
        _row("channel spacing", [_num(d, "spacing_hz", as_hz)]),
        "</table>",
        "<h2>Selectivity referred to RF</h2>",
    ]
    if "selectivity.png" in figures:
        parts.append(_img("selectivity.png", figures["selectivity.png"], "overall selectivity"))
    parts.append(_selectivity_table(d))
    if d.get("measured") is not None:
        parts.append('<p class="note">Measured: %s; %s path.</p>'
                     % (_e(d["measured"]["method_detail"]), _e(d["measured"]["path"])))
    parts.append("<h2>Each stage</h2>")
    if "stages.png" in figures:
        parts.append(_img("stages.png", figures["stages.png"], "response of each stage"))
    parts.append(_q_tables(d))
    parts.append("<h2>Image</h2>")
    if "image.png" in figures:
        parts.append(_img("image.png", figures["image.png"], "image region"))
    parts.append("<h2>Group delay</h2>")
    if "group_delay.png" in figures:
        parts.append(_img("group_delay.png", figures["group_delay.png"], "group delay"))
    gd = d["designed"]["group_delay"]
    parts.append("<table>" + _row("group delay at the tune", [_num(d, "designed.group_delay.at_tune_s", as_us)])
                 + _row("variation within the -3 dB band",
                        [_num(d, "designed.group_delay.variation_in_3db_s", as_us)])
                 + "</table>")
    parts.append('<p class="note">Method: %s.</p>' % _e(gd["method"]))
    if d.get("measured") is not None and d["measured"].get("agc"):
        parts.append(_agc_section(d, figures))
    parts.append(datasheet_html(d, figures))
    if d.get("carriers") is not None:
        parts.append("<h2>Carriers in the capture near the tuning</h2>")
        parts.append('<p class="note">Capture: %s</p>' % _e(d["capture"]["path"]))
        if "spectrum.png" in figures:
            parts.append(_img("spectrum.png", figures["spectrum.png"], "capture spectrum"))
        if d.get("spectrum") is not None:
            parts.append('<p class="note">Spectrum: %s-point FFT, Hann window, bins %s, resolution bandwidth '
                         "(the window's equivalent noise bandwidth) %s; level in dBFS per RBW: a carrier reads "
                         "its amplitude, noise its power within the RBW.</p>"
                         % (_span(d, "spectrum.fft_points"), _span(d, "spectrum.bin_hz", as_hz01),
                            _span(d, "spectrum.rbw_hz", as_hz01)))
        parts.append(_carrier_table(d))
    for name in sorted(figures):
        if name not in ("selectivity.png", "stages.png", "image.png", "group_delay.png", "spectrum.png",
                        "agc.png") + DATASHEET_FIGURES:
            parts.append(_img(name, figures[name], name))
    parts.append("</body></html>\n")
    return "\n".join(parts)
