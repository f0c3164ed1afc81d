"""The report page's datasheet sections: sensitivity, audio fidelity, distortion.

One section per measurement, each with its figure, a table of its numbers
(tagged with ``data-key`` like the rest of the page, so they can be checked
against ``report.json``), its method and its source.
"""

from __future__ import annotations

from functools import partial

from .html import _e, _img, _num, _row, _span
from .text import as_audio_hz, as_db1, as_db2, as_plain, as_signed_db2, fixed_text

__all__ = ["datasheet_html", "DATASHEET_FIGURES"]

#: The figures of the datasheet sections (embedded here, not again at the end of the page).
DATASHEET_FIGURES = ("sensitivity.png", "fidelity.png", "distortion.png")


_db4 = partial(fixed_text, decimals=4)
_slope = partial(fixed_text, decimals=3)
_us_plain = partial(fixed_text, decimals=1)


def _notes(sec) -> str:
    return ('<p class="note">Method (%s path): %s.</p><p class="note">Source: %s.</p>'
            % (_e(sec["path"]), _e(sec["method"]), _e(sec["source"])))


def _text(value) -> str:
    return "<td>%s</td>" % _e(value)


def _head(figures, title, name, alt) -> list:
    """The section's heading and its figure."""
    out = [f"<h2>{_e(title)}</h2>"]
    if name in figures:
        out.append(_img(name, figures[name], alt))
    return out


def _sensitivity(data, figures) -> list:
    sec = data["measured"]["sensitivity"]
    k = "measured.sensitivity."
    out = _head(figures, "Sensitivity", "sensitivity.png", "audio S/N against antenna level")
    rows = [
        "<tr><th>quantity</th><th>measured</th><th>predicted</th><th>difference</th></tr>",
        _row(f"carrier level for {sec['sn_db']:g} dB audio S/N, dBm",
             [_num(data, k + "level_dbm", as_db1), _num(data, k + "predicted_dbm", as_db1),
              _num(data, k + "difference_db", as_signed_db2)]),
    ]
    out.append("<table>" + "".join(rows) + "</table>")
    rows = [
        _row("modulation depth", [_num(data, k + "depth")]),
        _row("modulating frequency", [_num(data, k + "tone_hz", as_audio_hz)]),
        _row("noise figure, dB", [_num(data, k + "noise_figure_db", as_db1), _text(sec["noise_figure_from"])]),
        _row("kT0, dBm/Hz", [_num(data, k + "kt0_dbm_per_hz", as_db1), _text(sec["noise_added"])]),
        _row("full scale at the antenna, dBm", [_num(data, k + "full_scale_dbm", as_db1),
                                                 _text(sec["full_scale_from"])]),
        _row("post-detection noise bandwidth W", [_num(data, k + "noise_bandwidth_hz", as_audio_hz)]),
        _row("noise through the image response, dB", [_num(data, k + "image_noise_db", _db4)]),
        _row("slope of S/N against level, dB/dB", [_num(data, k + "slope_db_per_db", _slope)]),
    ]
    out.append("<table>" + "".join(rows) + "</table>")
    rows = ["<tr><th>level, dBm</th><th>audio S/N, dB</th></tr>"]
    for i in range(len(sec["points"])):
        rows.append("<tr>%s%s</tr>" % (_num(data, f"{k}points.{i}.0", as_db1), _num(data, f"{k}points.{i}.1", as_db1)))
    out.append("<table>" + "".join(rows) + "</table>")
    out.append(_notes(sec))
    return out


def _fidelity(data, figures) -> list:
    sec = data["measured"]["fidelity"]
    k = "measured.fidelity."
    out = _head(figures, "Audio fidelity", "fidelity.png", "antenna-to-audio response")
    rows = [
        "<tr><th>quantity</th><th>measured</th><th>predicted</th></tr>",
        _row("low -3 dB point", [_num(data, k + "low_3db_hz", as_audio_hz),
                                 _num(data, k + "predicted_low_3db_hz", as_audio_hz)]),
        _row("high -3 dB point", [_num(data, k + "high_3db_hz", as_audio_hz),
                                  _num(data, k + "predicted_high_3db_hz", as_audio_hz)]),
    ]
    out.append("<table>" + "".join(rows) + "</table>")
    out.append('<p class="note">Largest difference between measured and predicted points down to -20 dB: '
               '%s dB; response in dB re %s, carrier at %s dBFS.</p>'
               % (_span(data, k + "max_abs_difference_db_down_to_20", as_db2),
                  _span(data, k + "reference_hz", as_audio_hz), _span(data, k + "level_dbfs", as_db1)))
    rows = ["<tr><th>modulating frequency</th><th>measured, dB</th><th>predicted, dB</th></tr>"]
    for i in range(len(sec["response"])):
        rows.append("<tr>%s%s%s</tr>" % (_num(data, f"{k}response.{i}.0", as_audio_hz),
                                         _num(data, f"{k}response.{i}.1", as_db2),
                                         _num(data, f"{k}predicted.{i}.1", as_db2)))
    out.append("<table>" + "".join(rows) + "</table>")
    out.append(_notes(sec))
    return out


def _distortion(data, figures) -> list:
    sec = data["measured"]["distortion"]
    k = "measured.distortion."
    clip = sec["diagonal_clipping"]
    out = _head(figures, "Distortion", "distortion.png", "THD against modulating frequency")
    head = f"<tr><th>modulation depth</th><th>THD at {sec['tone_hz']:g} Hz, %</th>"
    if clip is not None:
        head += "<th>diagonal clipping from</th><th>largest RC free of clipping at the tone, µs</th>"
    rows = [head + "</tr>"]
    for depth in sorted(sec["thd_percent"], key=float):
        cells = [_num(data, f"{k}thd_percent.{depth}", as_plain)]
        if clip is not None:
            cells += [_num(data, f"{k}diagonal_clipping.onset_hz.{depth}", as_audio_hz),
                      _num(data, f"{k}diagonal_clipping.limit_rc_us_at_tone.{depth}", _us_plain)]
        rows.append(_row(f"{float(depth) * 100:g} %", cells))
    out.append("<table>" + "".join(rows) + "</table>")
    if clip is not None:
        out.append('<p class="note">Diode detector, RC %s µs: free of diagonal clipping while %s.</p>'
                   % (_span(data, k + "diagonal_clipping.rc_us", _us_plain), _e(clip["formula"])))
    out.append(_notes(sec))
    return out


def datasheet_html(data: dict, figures: dict) -> str:
    """The sensitivity, fidelity and distortion sections ("" when the report has none of them)."""
    meas = data.get("measured") or {}
    parts = []
    for key, fn in (("sensitivity", _sensitivity), ("fidelity", _fidelity), ("distortion", _distortion)):
        if meas.get(key) is not None:
            parts += fn(data, figures)
    return "\n".join(parts)
