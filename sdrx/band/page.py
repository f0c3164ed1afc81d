"""The band overview: one self-contained ``index.html`` beside the station WAVs.

Per capture: the spectrogram (PNG embedded as a data: URI) with the
stations marked, then one row per station: its frequency, carrier level
(mean, min, max), AGC gain range, warnings, the level against time (inline
SVG) and a player for its WAV (a relative link to the file beside the
page; nothing is fetched from a network). Starting one player pauses any
other. All user text goes through :func:`html.escape`.
"""

from __future__ import annotations

import base64
import html
from urllib.parse import quote

__all__ = ["render_band_page"]

_CSS = """
body{font:14px/1.4 system-ui,sans-serif;margin:1.2em auto;max-width:76em;padding:0 1em;color:#1d1d1d;background:#fafaf7}
h1{font-size:1.35em;margin:0 0 .2em}h2{font-size:1.1em;margin:1.6em 0 .4em;border-bottom:1px solid #ccc}
.meta{color:#555;margin:.2em 0}img.spectrogram{max-width:100%;height:auto;display:block;margin:.5em 0}
table{border-collapse:collapse;margin:.5em 0;width:100%}th,td{border-bottom:1px solid #ddd;padding:.25em .5em;vertical-align:middle}
th{background:#eee;text-align:left}td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
td.warn{color:#8a4b00;font-size:.85em;max-width:18em}audio{width:16em}
"""

_JS = """
document.querySelectorAll('audio.station').forEach(function (a) {
  a.addEventListener('play', function () {
    document.querySelectorAll('audio.station').forEach(function (b) { if (b !== a) { b.pause(); } });
    document.getElementById('now').textContent = 'Now playing: ' + a.dataset.label;
  });
});
"""


def _e(v) -> str:
    return html.escape(str(v), quote=True)


def _db(v) -> str:
    return "&mdash;" if v is None else _e(f"{v:.1f}")


def _station_row(st: dict, svg: str) -> str:
    c, g = st["carrier_dbfs"], st["agc_gain_db"]
    m = st.get("carrier_dbm")
    dbm = "" if m is None or m["mean"] is None else f'<br><span class="meta">{_db(m["mean"])} dBm</span>'
    warn = "<br>".join(_e(w) for w in st["warnings"])
    label = f"{st['name']} ({st['folder']})" if st.get("folder") else st["name"]
    return (
        f'<tr class="station" data-station="{_e(st["name"])}" data-tune-hz="{_e(repr(float(st["tune_hz"])))}">'
        f'<td>{_e(st["name"][:-1])} kHz<br><span class="meta">{_e(st["chain"])}</span></td>'
        f'<td class="n">{_db(c["mean"])}{dbm}<br><span class="meta">{_db(c["min"])} .. {_db(c["max"])}</span></td>'
        f'<td class="n">{_db(g["min"])} .. {_db(g["max"])}</td>'
        f'<td>{svg}</td>'
        f'<td><audio class="station" controls preload="metadata" src="{_e(quote(st["file"]))}" data-label="{_e(label)}"></audio></td>'
        f'<td class="warn">{warn}</td></tr>'
    )


def render_band_page(model: dict) -> str:
    """The page's HTML text.

    Parameters
    ----------
    model : dict
        ``title``; ``captures``: list of dicts with ``name``, ``subtitle``,
        ``spectrogram_png`` (bytes or None), ``stations`` (dicts as in
        band.json plus ``svg``, ``name`` and ``folder``).

    Examples
    --------
    >>> page = render_band_page({"title": "t<1>", "captures": []})
    >>> "<title>t&lt;1&gt;</title>" in page and "http" not in page
    True
    """
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{_e(model['title'])}</title>", f"<style>{_CSS}</style></head><body>",
        f"<h1>{_e(model['title'])}</h1>",
        f'<p class="meta" id="now">Now playing: nothing</p>',
    ]
    for cap in model["captures"]:
        parts.append(f'<section class="capture" data-capture="{_e(cap["name"])}">')
        parts.append(f"<h2>{_e(cap['name'])}</h2>")
        parts.append(f'<p class="meta">{_e(cap["subtitle"])}</p>')
        if cap.get("spectrogram_png"):
            b64 = base64.b64encode(cap["spectrogram_png"]).decode("ascii")
            parts.append(f'<img class="spectrogram" alt="spectrogram of {_e(cap["name"])} with the stations marked" '
                         f'src="data:image/png;base64,{b64}">')
        parts.append("<table><thead><tr><th>station</th><th>carrier, dBFS<br>mean, min .. max</th>"
                     "<th>AGC gain, dB</th><th>carrier level against time (1 s mean, min–max shaded)</th>"
                     "<th>audio</th><th>warnings</th></tr></thead><tbody>")
        for st in cap["stations"]:
            parts.append(_station_row(st, st["svg"]))
        parts.append("</tbody></table></section>")
    parts.append(f"<script>{_JS}</script></body></html>")
    return "\n".join(parts) + "\n"
