"""The listening page: one self-contained ``index.html`` (inline CSS and JS).

The page plays the loudness-matched, time-aligned WAV files that sit beside it
(it is opened from disk; nothing is fetched from a network). One transport
drives one ``<audio>`` element per output; switching output pauses the one
heard, moves the other to the same ``currentTime`` and plays it, so A/B
switching never restarts the excerpt.

Everything that came from the user (spec names, labels, file names) is escaped
with :func:`html.escape`; the data the script needs is embedded as JSON with
``<``, ``>`` and ``&`` written as ``\\u003c`` … so that no string can close the
script element. The blind-trial key is embedded only in obfuscated form
(:func:`sdrx.compare.blind.encode_key`) and decoded by the script when X is
played or the key is revealed; it is never in the page's text before reveal.
"""

from __future__ import annotations

import base64
import html
import json
from urllib.parse import quote

from ..units import format_frequency

__all__ = ["json_for_script", "render_page"]


def json_for_script(obj) -> str:
    """JSON that is safe inside ``<script type="application/json">``.

    Examples
    --------
    >>> json_for_script({"name": "</script><b>"})
    '{"name": "\\\\u003c/script\\\\u003e\\\\u003cb\\\\u003e"}'
    """
    text = json.dumps(obj, ensure_ascii=True, allow_nan=False)
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def _e(value) -> str:
    return html.escape(str(value), quote=True)


def _num(value, fmt: str, unit: str = "") -> str:
    if value is None:
        return "&mdash;"
    return _e(format(value, fmt) + unit)


def _khz(value) -> str:
    return "&mdash;" if value is None else _e(f"{value / 1e3:.2f} kHz")


_CSS = """
body{font:15px/1.45 system-ui,sans-serif;margin:1.5em auto;max-width:70em;padding:0 1em;color:#1d1d1d;background:#fafaf7}
h1{font-size:1.4em;margin:0 0 .2em} h2{font-size:1.1em;margin:1.6em 0 .5em;border-bottom:1px solid #ccc}
.meta{color:#555;margin:.2em 0}
button{font:inherit;padding:.35em .8em;margin:.15em;border:1px solid #888;border-radius:4px;background:#fff;cursor:pointer}
button.on{background:#264f78;color:#fff;border-color:#264f78}
button:disabled{opacity:.5;cursor:default}
.transport{display:flex;align-items:center;gap:.6em;flex-wrap:wrap}
#seek{flex:1;min-width:12em}
#time{font-variant-numeric:tabular-nums;min-width:9em}
#now{font-weight:600}
table{border-collapse:collapse;margin:.5em 0} td,th{border:1px solid #ccc;padding:.3em .6em;text-align:right}
th{text-align:left;background:#f0efe9} td.l{text-align:left}
.trial td{text-align:left} .ok{color:#17692b} .bad{color:#a11}
.result{font-weight:600;margin:.6em 0}
img.plot{max-width:100%;border:1px solid #ccc;background:#fff}
.hint{color:#666;font-size:.9em}
.caution{border-left:4px solid #a11;background:#fff4f0;padding:.4em .8em;margin:.6em 0}
"""

_JS = r"""
(function () {
  "use strict";
  var data = JSON.parse(document.getElementById("sdrx-data").textContent);
  var audios = Array.prototype.slice.call(document.querySelectorAll("audio.sdrx-audio"));
  var srcButtons = Array.prototype.slice.call(document.querySelectorAll("button.src"));
  var playBtn = document.getElementById("play");
  var seek = document.getElementById("seek");
  var timeEl = document.getElementById("time");
  var nowEl = document.getElementById("now");
  var loopBox = document.getElementById("loop");
  var active = 0;
  var dragging = false;

  function fmt(t) {
    if (!isFinite(t)) { t = 0; }
    var m = Math.floor(t / 60), s = t - 60 * m;
    return m + ":" + (s < 10 ? "0" : "") + s.toFixed(1);
  }
  function duration() {
    var d = audios[active].duration;
    return isFinite(d) ? d : data.duration_s;
  }
  function refresh() {
    var a = audios[active];
    if (!dragging) { seek.value = a.currentTime; }
    seek.max = duration();
    timeEl.textContent = fmt(a.currentTime) + " / " + fmt(duration());
    playBtn.textContent = a.paused ? "Play" : "Pause";
  }
  // Hear output i from the position of the one heard now, playing if it was playing.
  // always: go through the same pause and seek even when i is heard already, so that in a blind
  // trial the switch to X sounds alike whether X is the output playing or the other one.
  function switchTo(i, always) {
    if (i === active && !always) { return; }
    var from = audios[active], to = audios[i];
    var t = from.currentTime, playing = !from.paused;
    from.pause();
    to.currentTime = t;
    active = i;
    if (playing) { to.play(); }
    refresh();
  }
  function markSources(i) {
    srcButtons.forEach(function (b) { b.classList.toggle("on", Number(b.dataset.index) === i); });
  }
  function showSpec(i) {
    switchTo(i);
    markSources(i);
    markTrialButtons(null);
    nowEl.textContent = "Now playing: " + data.specs[i].label;
  }
  function togglePlay() {
    var a = audios[active];
    if (a.paused) { a.play(); } else { a.pause(); }
    refresh();
  }

  srcButtons.forEach(function (b) {
    b.addEventListener("click", function () { showSpec(Number(b.dataset.index)); });
  });
  playBtn.addEventListener("click", togglePlay);
  seek.addEventListener("input", function () { dragging = true; });
  seek.addEventListener("change", function () {
    audios[active].currentTime = Number(seek.value);
    dragging = false;
    refresh();
  });
  audios.forEach(function (a, i) {
    a.addEventListener("timeupdate", function () { if (i === active) { refresh(); } });
    a.addEventListener("ended", function () {
      if (i === active && loopBox.checked) { a.currentTime = 0; a.play(); }
      refresh();
    });
    a.addEventListener("loadedmetadata", refresh);
  });
  document.addEventListener("keydown", function (ev) {
    if (ev.target && ev.target.tagName === "INPUT" && ev.target.type !== "checkbox") { return; }
    if (ev.key === " ") { ev.preventDefault(); togglePlay(); return; }
    var k = Number(ev.key);
    if (k >= 1 && k <= audios.length) { showSpec(k - 1); }
  });

  // ---- blind A/B/X trials ----
  var blind = data.blind;
  var key = null;
  var answers = [];
  var revealed = false;
  function decodedKey() {
    if (key === null) {
      var raw = atob(blind.key), salt = atob(blind.salt), s = "";
      for (var i = 0; i < raw.length; i++) {
        s += String.fromCharCode(raw.charCodeAt(i) ^ salt.charCodeAt(i % salt.length));
      }
      key = JSON.parse(s);
    }
    return key;
  }
  function markTrialButtons(btn) {
    Array.prototype.forEach.call(document.querySelectorAll("button.play-trial"), function (b) {
      b.classList.toggle("on", b === btn);
    });
  }
  function answeredCount() {
    return answers.filter(function (a) { return a === "A" || a === "B"; }).length;
  }
  if (blind) {
    answers = blind.trials.map(function () { return null; });
    Array.prototype.forEach.call(document.querySelectorAll("button.play-trial"), function (b) {
      b.addEventListener("click", function () {
        var t = Number(b.dataset.trial), role = b.dataset.role, tr = blind.trials[t];
        var which = role === "X" ? decodedKey()[t] : role;
        var idx = which === "A" ? tr.a_index : tr.b_index;
        switchTo(idx, true);
        markSources(-1);
        markTrialButtons(b);
        nowEl.textContent = "Now playing: trial " + (t + 1) + ", " + role;
      });
    });
    Array.prototype.forEach.call(document.querySelectorAll("button.answer"), function (b) {
      b.addEventListener("click", function () {
        if (revealed) { return; }
        var t = Number(b.dataset.trial);
        answers[t] = b.dataset.answer;
        Array.prototype.forEach.call(document.querySelectorAll('button.answer[data-trial="' + t + '"]'), function (o) {
          o.classList.toggle("on", o === b);
        });
        document.getElementById("answered").textContent =
          "Answered " + answeredCount() + " of " + blind.trials.length + ".";
      });
    });
    document.getElementById("reveal").addEventListener("click", function () {
      if (revealed) { return; }
      revealed = true;
      var k = decodedKey(), score = 0;
      blind.trials.forEach(function (tr, t) {
        var right = answers[t] === k[t];
        if (right) { score += 1; }
        var xLabel = k[t] === "A" ? tr.a : tr.b;
        var cell = document.getElementById("key-" + t);
        cell.textContent = "X was " + k[t] + " (" + xLabel + "); " +
          (answers[t] ? "you answered " + answers[t] + (right ? ": right" : ": wrong") : "not answered");
        cell.className = right ? "ok" : "bad";
      });
      Array.prototype.forEach.call(document.querySelectorAll("button.answer"), function (b) { b.disabled = true; });
      var p = blind.chance[score];
      var res = document.getElementById("result");
      res.textContent = "Score: " + score + " of " + blind.trials.length + " right. " +
        "Probability of scoring " + score + " or more by guessing: ";
      var pEl = document.createElement("span");
      pEl.id = "p-value";
      pEl.textContent = p.toPrecision(4);
      res.appendChild(pEl);
      res.appendChild(document.createTextNode(" (binomial tail, 1/2 per trial; unanswered trials count as wrong)."));
      document.getElementById("reveal").disabled = true;
    });
  }
  markSources(0);
  refresh();
})();
"""


def _check(spec: dict, key: str):
    """One of the receiver's checks for this chain (None when the run gave none)."""
    return ((spec.get("receive") or {}).get("checks") or {}).get(key)


def _adjacent(spec: dict, sign: int):
    """The ±1-channel adjacent check for this chain."""
    leaks = _check(spec, "adjacent_leak_db") or {}
    spacing = _check(spec, "spacing_hz")
    return leaks.get(str(int(round(sign * spacing)))) if spacing else None


def _warning_list(specs: list) -> str:
    """What each chain's receiver warned about, in words."""
    items = []
    for s in specs:
        for w in (s.get("receive") or {}).get("warnings", []):
            items.append(f"<li><b>{_e(s['label'])}</b>: {_e(w)}</li>")
    return f'<ul class="warnings">{"".join(items)}</ul>' if items else ""


def _figure_rows(specs: list, spacing_hz: float | None) -> str:
    sp = f" (±{spacing_hz / 1e3:g} kHz)" if spacing_hz else ""
    rows = [
        ("chain name", lambda s: _e(s.get("name", ""))),
        ("spec", lambda s: _e(s.get("chain", ""))),
        ("−6 dB bandwidth", lambda s: _khz(s.get("bandwidth_6db_hz"))),
        ("−60 dB bandwidth", lambda s: _khz(s.get("bandwidth_60db_hz"))),
        ("shape factor (60/6 dB)", lambda s: _num(s.get("shape_factor"), ".2f")),
        ("adjacent-channel rejection" + sp + ", lower / upper",
         lambda s: (_num(s["adjacent_rejection_db"]["lower"], ".1f", " dB") + " / "
                    + _num(s["adjacent_rejection_db"]["upper"], ".1f", " dB"))
         if s.get("adjacent_rejection_db") else "&mdash;"),
        ("image rejection", lambda s: (_num(s.get("image_rejection_db"), ".1f", " dB")
                                       + (f" at {_e(format_frequency(s['image_hz']))}" if s.get("image_hz") else ""))),
        ("audio bandwidth (−3 dB re 1 kHz, test tones through the chain)",
         lambda s: _khz(s.get("audio_bandwidth_hz"))),
        ("SINAD (truth sidecar tone)", lambda s: _num(s.get("sinad_db"), ".1f", " dB")),
        ("carrier over the channel noise", lambda s: _num(_check(s, "carrier_snr_db"), ".1f", " dB")),
        ("image at the detector, re carrier", lambda s: _num(_check(s, "image_leak_db"), "+.1f", " dB")),
        ("adjacent at the detector" + sp + ", lower / upper",
         lambda s: " / ".join(_num(_adjacent(s, sign), "+.1f", " dB") for sign in (-1, 1))),
        ("carrier offset from the tune", lambda s: _num(_check(s, "tuning_error_hz"), "+.0f", " Hz")),
        ("loudness before matching", lambda s: _num(s.get("loudness_lufs_before"), ".1f", " LUFS")),
        ("loudness gain applied", lambda s: _num(s.get("gain_db"), "+.2f", " dB")),
        ("delay removed (re first)", lambda s: _num(s.get("delay_ms"), ".3f", " ms")),
    ]
    out = ["<tr><th>figure</th>" + "".join(f"<th>{_e(s['label'])}</th>" for s in specs) + "</tr>"]
    for title, fn in rows:
        out.append(f"<tr><th>{_e(title)}</th>" + "".join(f"<td>{fn(s)}</td>" for s in specs) + "</tr>")
    return "\n".join(out)


def render_page(model: dict) -> str:
    """Render the listening page.

    Parameters
    ----------
    model : dict
        ``title`` (str), ``subtitle`` (list of str lines), ``duration_s``,
        ``target_lufs``, ``spacing_hz``, ``specs`` (list of dicts with at least
        ``label``, ``wav`` — a file name beside the page — and the figures shown
        in the table), ``plot_png`` (bytes or None) and ``blind`` (None, or a dict
        with ``trials`` [{``trial``, ``a``, ``b``, ``a_index``, ``b_index``}],
        ``key`` and ``salt`` (base64 strings) and ``chance`` (P(K ≥ k), k = 0…n)).

    Returns
    -------
    str
        The HTML text.

    Examples
    --------
    >>> page = render_page({"title": "t", "subtitle": [], "duration_s": 1.0, "target_lufs": -20.0,
    ...     "spacing_hz": 10e3, "plot_png": None, "blind": None,
    ...     "specs": [{"label": "<b>", "wav": "b.wav"}, {"label": "c", "wav": "c.wav"}]})
    >>> "<b>" in page, "&lt;b&gt;" in page
    (False, True)
    """
    specs = model["specs"]
    blind = model.get("blind")
    parts = _head(model) + _player(specs, model["duration_s"])
    if blind:
        parts += _blind_trials(blind)
    parts += _figures(model)
    parts += _audio_and_data(specs, _script_data(model))
    return "\n".join(parts) + "\n"


def _script_data(model: dict) -> dict:
    """What the page's script reads: the duration, each output's label and file, the blind trials."""
    blind = model.get("blind")
    data = {
        "duration_s": float(model["duration_s"]),
        "specs": [{"label": s["label"], "wav": s["wav"]} for s in model["specs"]],
        "blind": None,
    }
    if blind:
        data["blind"] = {
            "trials": [{"a": t["a"], "b": t["b"], "a_index": t["a_index"], "b_index": t["b_index"]}
                       for t in blind["trials"]],
            "key": blind["key"],
            "salt": blind["salt"],
            "chance": blind["chance"],
        }
    return data


def _head(model: dict) -> list:
    """The document head, the title, the subtitle lines and how the outputs were matched."""
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(model['title'])}</title>",
        f"<style>{_CSS}</style></head><body>",
        f"<h1>{_e(model['title'])}</h1>",
    ]
    for line in model.get("subtitle", []):
        parts.append(f'<p class="meta">{_e(line)}</p>')
    parts.append(
        f'<p class="meta">Every output is time-aligned to the first and matched to '
        f"{_e(format(model['target_lufs'], '.1f'))} LUFS integrated loudness (ITU-R BS.1770), "
        "sample peaks at or below −1 dBFS.</p>"
    )
    parts += _cautions(model["specs"])
    return parts


def _cautions(specs: list) -> list:
    """Hearing (the gain the matching applied, peaks near full scale) and never transmitting a capture."""
    gains = [s["gain_db"] for s in specs if s.get("gain_db") is not None]
    if not gains:
        applied = ""
    elif len(gains) == 1 or min(gains) == max(gains):
        applied = f"the loudness matching applied {_e(format(gains[0], '+.1f'))} dB of gain and "
    else:
        applied = (f"the loudness matching applied {_e(format(min(gains), '+.1f'))} to "
                   f"{_e(format(max(gains), '+.1f'))} dB of gain and ")
    return [
        '<p class="caution" id="caution-hearing"><strong>Hearing:</strong> start at a low volume, above all on '
        f"headphones, and raise it slowly: {applied}the outputs' peaks reach up to −1 dBFS, just under "
        "full scale; an output is loud from its first moment (there is no fade-in).</p>",
        '<p class="caution" id="caution-transmit"><strong>Never transmit a capture:</strong> synthesized and recorded '
        "captures are for receiving software. Do not replay them through SDR hardware that can transmit "
        "(local licensing law applies).</p>",
    ]


def _player(specs: list, duration_s: float) -> list:
    """The transport (play, seek, loop) and one button per output."""
    parts = ['<h2>Listen</h2><section id="player"><div class="transport">']
    parts.append('<button id="play" type="button">Play</button>')
    parts.append(f'<input id="seek" type="range" min="0" max="{duration_s:.3f}" step="0.01" value="0">')
    parts.append('<span id="time">0:00.0</span>')
    parts.append('<label><input id="loop" type="checkbox" checked> loop</label></div>')
    parts.append('<div class="sources">')
    for i, s in enumerate(specs):
        parts.append(f'<button class="src" type="button" id="src-{i}" data-index="{i}">'
                     f"{i + 1} · {_e(s['label'])}</button>")
    parts.append("</div>")
    parts.append(f'<p id="now">Now playing: {_e(specs[0]["label"])}</p>')
    parts.append('<p class="hint">Switching keeps the playback position. Keys: 1–9 choose an output, '
                 "space plays or pauses.</p></section>")
    return parts


def _blind_trials(blind: dict) -> list:
    """One row per A/B/X trial, the count answered and the reveal button."""
    n = len(blind["trials"])
    parts = ['<h2>Blind trials (A/B/X)</h2><section id="blind">']
    parts.append("<p>In each trial X is either A or B. Listen, then say which. "
                 "The key and the score are shown only when you ask.</p>")
    parts.append('<table class="trial">')
    for t, tr in enumerate(blind["trials"]):
        parts.append(
            f'<tr id="trial-{t}"><td>Trial {t + 1}</td>'
            f"<td>A = {_e(tr['a'])}, B = {_e(tr['b'])}</td><td>"
            + "".join(f'<button type="button" class="play-trial" id="play-{t}-{r}" data-trial="{t}" '
                      f'data-role="{r}">{r}</button>' for r in ("A", "B", "X"))
            + "</td><td>X is "
            + "".join(f'<button type="button" class="answer" id="answer-{t}-{r}" data-trial="{t}" '
                      f'data-answer="{r}">{r}</button>' for r in ("A", "B"))
            + f'</td><td id="key-{t}"></td></tr>'
        )
    parts.append("</table>")
    parts.append(f'<p id="answered">Answered 0 of {n}.</p>')
    parts.append('<button type="button" id="reveal">Reveal key and score</button>')
    parts.append('<p class="result" id="result"></p></section>')
    return parts


def _figures(model: dict) -> list:
    """The table of figures, what they mean, the receivers' warnings and the selectivity plot."""
    specs = model["specs"]
    parts = ["<h2>Figures</h2><section id=\"figures\"><table>"]
    parts.append(_figure_rows(specs, model.get("spacing_hz")))
    parts.append("</table>")
    parts.append('<p class="hint">Bandwidths and rejections are of the designed chain (single-signal '
                 "response, AGC off). Audio bandwidth: the highest modulating frequency at which the output "
                 "is 3 dB below its output at 1 kHz, for AM test tones of equal depth through the chain with "
                 "the AGC held. SINAD: only when the capture's truth sidecar gives "
                 "the station a single tone. At the detector: what the receiver measured while it ran (the "
                 "carrier over the noise around the channel in the chain's noise bandwidth; the image and "
                 "adjacent carriers after the chain's response, against the wanted carrier; the carrier's "
                 "offset from the tune).</p>")
    parts.append(_warning_list(specs))
    if model.get("plot_png"):
        b64 = base64.b64encode(model["plot_png"]).decode("ascii")
        parts.append(f'<img class="plot" alt="selectivity of each chain" src="data:image/png;base64,{b64}">')
    parts.append("</section>")
    return parts


def _audio_and_data(specs: list, data: dict) -> list:
    """One audio element per output, the script's data and the script."""
    parts = []
    for i, s in enumerate(specs):
        parts.append(f'<audio class="sdrx-audio" id="audio-{i}" preload="auto" '
                     f'src="{_e(quote(s["wav"]))}"></audio>')
    parts.append(f'<script type="application/json" id="sdrx-data">{json_for_script(data)}</script>')
    parts.append(f"<script>{_JS}</script>")
    parts.append("</body></html>")
    return parts
