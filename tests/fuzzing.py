"""Property-based fuzz of sdrx's promises (hypothesis): SigMF metadata, chain specs, command-line options,
and hand-damaged WAV/RF64/W64 captures.

Every case runs the real command line in process and is judged as a user would see it:

- ``error``: exit status 2 and exactly one line on stderr, ``sdrx: error: ...``;
- ``accepted``: exit status 0 and nothing on stderr but ``warning:`` lines;
- anything else is a failure: a traceback (an exception out of ``main``), another status, a second line,
  a Python warning, a run over :data:`HANG_S`, a temporary or journal left behind, an output file that
  does not open, an input file changed, or a file left after an error.

Used by ``tests/test_fuzz.py`` (derandomized, a few hundred cases in ``make test``) and by
``tests/fuzz.py`` (``make fuzz``: ten thousand or more, with the counts by outcome).
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import signal
import time
import warnings
from collections import Counter
from pathlib import Path

from hypothesis import strategies as st

from sdrx.cli import main
from sdrx.fileset import is_own_temporary

__all__ = ["Workspace", "run_case", "check", "OUTCOMES", "TARGETS", "sigmf_cases", "spec_cases", "cli_cases",
           "wav_cases", "HANG_S", "to_toml"]

HANG_S = 20.0
#: outcome counts of this process, by target and outcome
OUTCOMES: Counter = Counter()


class Hang(BaseException):
    """Raised by the alarm when a case runs longer than HANG_S."""


# --- the workspace: inputs (never to be written) and a fresh output folder per case ----------------

SCENARIO = """title = "fuzz (invented)"
[capture]
kind = "iq"
rate = "240k"
center = "1M"
datatype = "ci16_le"
seconds = 1.25
noise_dbfs_per_hz = -110
seed = 4
[[station]]
name = "Gull"
frequency = "1M"
level_dbfs = -20
depth = 0.4
[station.program]
kind = "tone"
frequency = "1k"
[[station]]
name = "Tern"
frequency = "1.01M"
level_dbfs = -30
depth = 0.6
"""

BASE_META_NAME = "cap.sigmf-meta"


class Workspace:
    """Inputs made once (a capture, a scenario, a chain spec, a cases file); an output folder per case."""

    def __init__(self, root: Path):
        from sdrx.synth import synthesize

        self.root = Path(root)
        self.inputs = self.root / "in"
        self.inputs.mkdir(parents=True, exist_ok=True)
        (self.inputs / "scenario.toml").write_text(SCENARIO.replace("seconds = 1.25", "seconds = 0.05"))
        (self.inputs / "long.toml").write_text(SCENARIO)
        synthesize(self.inputs / "long.toml", self.inputs / BASE_META_NAME, force=True)
        self.meta_doc = json.loads((self.inputs / BASE_META_NAME).read_text())
        (self.inputs / "spec.toml").write_text('name = "fuzz spec"\n[[if_stage]]\nbandwidth = "8k"\n')
        (self.inputs / "cases.toml").write_text(
            '[[case]]\nname = "c"\ncapture = "cap.sigmf-meta"\ntune = "1M"\nchain = "medium"\nduration = 0.2\n')
        (self.inputs / "folder").mkdir(exist_ok=True)
        self.n = 0
        self._snapshot = self._hashes()

    def path(self, name: str) -> Path:
        return self.inputs / name

    def new_out(self) -> Path:
        self.n += 1
        d = self.root / "out" / f"case{self.n}"
        d.mkdir(parents=True)
        return d

    def _hashes(self) -> dict:
        # size, modification time and inode: a write or a replacement changes one of them
        out = {}
        for p in sorted(self.inputs.rglob("*")):
            st_ = p.lstat()
            out[p] = (st_.st_size, st_.st_mtime_ns, st_.st_ino)
        return out

    def inputs_changed(self) -> list:
        now = self._hashes()
        return sorted(str(p) for p in set(now) | set(self._snapshot) if now.get(p) != self._snapshot.get(p))

    def resnapshot(self) -> None:
        self._snapshot = self._hashes()

    def add_input(self, name: str, data: bytes = None, link_to: Path = None) -> Path:
        """A per-case input (a mutated metadata file, a spec, a link to the capture data); it must stay as it is."""
        p = self.inputs / name
        if link_to is not None:
            p.symlink_to(link_to)
        else:
            p.write_bytes(data)
        st_ = p.lstat()
        self._snapshot[p] = (st_.st_size, st_.st_mtime_ns, st_.st_ino)
        return p

    def drop_inputs(self, paths) -> None:
        for p in paths:
            with contextlib.suppress(FileNotFoundError):
                p.unlink()
            self._snapshot.pop(p, None)


# --- judging one case ------------------------------------------------------------------------------

def _alarm(signum, frame):
    raise Hang()


def _files(d: Path) -> list:
    return sorted(p for p in d.rglob("*") if p.is_file()) if d.exists() else []


def _opens(p: Path) -> bool:
    """An output under a final name is whole: it opens with the reader of its kind."""
    name = p.name.lower()
    try:
        if name.endswith(".wav"):
            import soundfile as sf

            sf.info(str(p))
        elif name.endswith(".json") or name.endswith(".sigmf-meta"):
            json.loads(p.read_text(encoding="utf-8"))
        elif name.endswith(".png"):
            return p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        elif name.endswith(".html"):
            return p.read_text(encoding="utf-8").rstrip().endswith("</html>")
    except Exception:
        return False
    return True


def run_case(ws: Workspace, target: str, argv: list, out: Path) -> tuple:
    """Run ``sdrx ARGV`` and judge it; returns (outcome, detail). Counts the outcome in OUTCOMES."""
    err, std = io.StringIO(), io.StringIO()
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, HANG_S)
    t0 = time.monotonic()
    exc = None
    try:
        with contextlib.redirect_stderr(err), contextlib.redirect_stdout(std), warnings.catch_warnings():
            warnings.simplefilter("always")
            try:
                rc = main([str(a) for a in argv])
            except SystemExit as e:
                rc = e.code
    except Hang:
        rc, exc = None, "hang"
    except BaseException as e:                     # a traceback the user would have seen
        rc, exc = None, f"{type(e).__name__}: {str(e)[:300]}"
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
    elapsed = time.monotonic() - t0
    lines = [ln for ln in err.getvalue().splitlines() if ln.strip()]
    outcome, detail = _judge(ws, rc, exc, lines, out, elapsed)
    OUTCOMES[(target, outcome)] += 1
    return outcome, f"{detail} | argv={[str(a) for a in argv]} | stderr={lines[:4]}"


def _judge(ws, rc, exc, lines, out: Path, elapsed: float) -> tuple:
    if exc == "hang" or elapsed > HANG_S:
        return "hang", f"ran {elapsed:.1f} s"
    if exc is not None:
        return "traceback", exc
    left = [p for d in (out, ws.inputs) for p in _files(d) if is_own_temporary(p.name)]
    if left:
        return "partial", f"temporaries left: {[p.name for p in left]}"
    changed = ws.inputs_changed()
    if changed:
        ws.resnapshot()              # one broken promise is counted once, not in every later case
        return "input written", f"changed: {changed}"
    if rc == 2:
        if len(lines) == 1 and lines[0].startswith("sdrx: error: "):
            if _files(out):
                return "written on error", f"files: {[p.name for p in _files(out)]}"
            return "error", ""
        return "bad message", f"status 2 with {len(lines)} line(s)"
    if rc in (0, None):
        bad = [ln for ln in lines if not (ln.startswith("warning: ") or ln.startswith("sdrx: warning: "))]
        if bad:
            return "stderr noise", f"lines: {bad[:3]}"
        broken = [p.name for p in _files(out) if not _opens(p)]
        if broken:
            return "partial", f"outputs that do not open: {broken}"
        return "accepted", ""
    return "bad status", f"exit {rc!r}"


# --- values ----------------------------------------------------------------------------------------

NASTY_NUMBERS = [0, -1, 1, 0.5, 1e-308, 5e-324, 1e308, -1e308, 2 ** 63, -(2 ** 63), 10 ** 400, 3e38,
                 float("inf"), float("-inf"), float("nan"), 455000, 1e30, -0.0, 12, 13, 17, 1e6, 2.5, 48000]
NASTY_TEXT = ["", " ", "abc", "455k", "1.13M", "9k", "10k", "inf", "-inf", "nan", "1e400", "9" * 400,
              "0x10", "1_000", "１２", "-30 dBFS", "300ms", "\u0000", "../x", "x" * 300, "--tune", "-o"]


def nasty_values():
    """Values of any JSON/TOML type, weighted towards the edges of their ranges."""
    scalar = st.one_of(
        st.sampled_from(NASTY_NUMBERS),
        st.sampled_from(NASTY_TEXT),
        st.booleans(),
        st.floats(allow_nan=True, allow_infinity=True),
        st.integers(min_value=-(2 ** 70), max_value=2 ** 70),
        st.text(max_size=6),
    )
    return st.one_of(scalar, st.lists(scalar, max_size=3), st.dictionaries(st.text(max_size=4), scalar, max_size=2))


def plausible_values():
    """Values a user might well write: frequencies, levels, times, orders, names."""
    return st.one_of(
        st.sampled_from(["455k", "10.7M", "9k", "6k", "4.5k", "80", "50", "1.8M", "520k", "48000", "-12 dB"]),
        st.floats(min_value=-200, max_value=2e6, allow_nan=False),
        st.integers(min_value=-5, max_value=20),
        st.sampled_from(["butterworth", "chebyshev", "elliptic", "bessel", "single_tuned", "double_tuned",
                         "high", "low", "none", "tracking", "lowpass", "bandpass", "real", "quadrature",
                         "envelope", "diode", "synchronous"]),
        st.booleans(),
    )


def values():
    """Half plausible, half nasty: enough accepted cases to exercise the receiver, report and writers."""
    return st.one_of(plausible_values(), nasty_values())


# --- TOML text of a dict (the values nasty_values makes) --------------------------------------------

def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(str(k))} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(doc: dict) -> str:
    """TOML text of a chain spec: top-level keys, [section] tables, [[if_stage]] arrays of tables."""
    top, tables, arrays = [], [], []
    for k, v in doc.items():
        key = json.dumps(str(k))
        if isinstance(v, dict) and v and all(not isinstance(x, dict) for x in v.values()):
            body = "".join(f"{json.dumps(str(a))} = {_toml_value(b)}\n" for a, b in v.items())
            tables.append(f"[{key}]\n{body}")
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            for item in v:
                body = "".join(f"{json.dumps(str(a))} = {_toml_value(b)}\n" for a, b in item.items())
                arrays.append(f"[[{key}]]\n{body}")
        else:
            top.append(f"{key} = {_toml_value(v)}\n")
    return "".join(top) + "".join(tables) + "".join(arrays)


# --- target 1: SigMF metadata ----------------------------------------------------------------------

META_PATHS = [
    ("global", "core:datatype"), ("global", "core:sample_rate"), ("global", "core:version"),
    ("global", "core:num_channels"), ("global", "core:sha512"), ("global", "core:dataset"),
    ("captures", 0, "core:frequency"), ("captures", 0, "core:header_bytes"), ("captures", 0, "core:sample_start"),
    ("annotations",), ("captures",), ("global",),
]
META_VALUES = st.one_of(
    values(),
    st.sampled_from(["ci16_le", "cf32_le", "cu8", "ci8", "ri16_le", "rf32_le", "cf64_le", "ci32_be", "cx16",
                     "cap.sigmf-data", "../cap.sigmf-data", "/etc/hostname", "folder", "..", "a" * 129,
                     "0" * 128, [{"core:sample_start": 10 ** 9}], [{"core:sample_start": 0, "core:sample_count": 3e5}],
                     1e9, 120e3, 8000, 1.5e6, 2.4e6]),
)


@st.composite
def sigmf_cases(draw):
    """(mutations of the workspace capture's metadata, command, how the text is damaged)."""
    mutations = [(draw(st.sampled_from(META_PATHS)), draw(st.sampled_from(["set", "set", "set", "delete"])),
                  draw(META_VALUES)) for _ in range(draw(st.sampled_from([1, 1, 1, 2, 3])))]
    command = draw(st.sampled_from(["info", "info", "receive", "receive-exact"]))
    raw = draw(st.sampled_from(["json", "json", "json", "garbage", "truncated"]))
    return mutations, command, raw


def _mutate(doc, path, action, value):
    node = doc
    for key in path[:-1]:
        if isinstance(node, dict) and key in node:
            node = node[key]
        elif isinstance(node, list) and isinstance(key, int) and len(node) > key:
            node = node[key]
        else:
            return
    last = path[-1]
    if isinstance(node, dict):
        if action == "delete":
            node.pop(last, None)
        else:
            node[last] = value
    elif isinstance(node, list) and isinstance(last, int) and len(node) > last:
        node[last] = value


def sigmf_argv(ws: Workspace, case, out: Path) -> tuple:
    mutations, command, raw = case
    doc = json.loads(json.dumps(ws.meta_doc))
    for path, action, value in mutations:
        _mutate(doc, path, action, value)
    text = json.dumps(doc, allow_nan=True)
    if raw == "garbage":
        text = text[: len(text) // 2] + "\x00{]"
    elif raw == "truncated":
        text = text[: max(1, len(text) - 7)]
    meta = ws.add_input(f"m{ws.n}.sigmf-meta", text.encode("utf-8", "surrogatepass"))
    data = ws.add_input(f"m{ws.n}.sigmf-data", link_to=ws.path("cap.sigmf-data"))
    if command == "info":
        return ["info", meta, "--json", "--quiet"], (meta, data)
    extra = ["--path", "exact"] if command == "receive-exact" else []
    return ["receive", meta, "--tune", "1M", "-o", out / "a.wav", "--summary", out / "a.json", "--duration", "0.2",
            "--quiet", *extra], (meta, data)


# --- target 2: chain specs -------------------------------------------------------------------------

BASE_SPEC = {
    "name": "fuzz",
    "if_frequency": "455k",
    "injection": "high",
    "preselector": {"kind": "tracking", "q": 40},
    "mixer": {"kind": "real"},
    "if_stage": [{"response": "butterworth", "order": 2, "bandwidth": "9k", "gain_db": 30, "agc": True},
                 {"response": "single_tuned", "q": 60, "gain_db": 20}],
    "agc": {"enabled": True, "reference_dbfs": -12, "attack_ms": 5, "release_ms": 300, "hang_ms": 0,
            "max_gain_db": 60, "min_gain_db": -20},
    "detector": {"kind": "envelope", "rc_us": 100, "pll_bandwidth": "50"},
    "audio": {"rate": 48000, "highpass": "80", "lowpass": "4.5k", "highpass_order": 2, "lowpass_order": 4,
              "gain_db": 6},
}
SPEC_KEYS = {
    "": ["name", "description", "if_frequency", "injection", "ifx"],
    "preselector": ["kind", "q", "cutoff", "low", "high", "order", "qq"],
    "mixer": ["kind", "gain_error_db", "phase_error_deg"],
    "if_stage": ["response", "order", "bandwidth", "q", "ripple_db", "stopband_db", "gain_db", "agc", "bw"],
    "agc": ["enabled", "reference_dbfs", "attack_ms", "release_ms", "hang_ms", "max_gain_db", "min_gain_db"],
    "detector": ["kind", "rc_us", "pll_bandwidth"],
    "audio": ["rate", "highpass", "lowpass", "highpass_order", "lowpass_order", "gain_db"],
}


@st.composite
def spec_cases(draw):
    """(chain spec document, command, tune)."""
    doc = json.loads(json.dumps(BASE_SPEC))
    for _ in range(draw(st.sampled_from([1, 1, 1, 2, 3]))):
        section = draw(st.sampled_from(sorted(SPEC_KEYS)))
        key = draw(st.sampled_from(SPEC_KEYS[section]))
        action = draw(st.sampled_from(["set", "set", "set", "delete", "stages", "section"]))
        value = draw(values())
        if action == "stages":
            n = draw(st.integers(0, 20))
            stages = doc.get("if_stage")
            if not (isinstance(stages, list) and stages and all(isinstance(x, dict) for x in stages)):
                stages = BASE_SPEC["if_stage"]
            doc["if_stage"] = [dict(stages[i % len(stages)]) for i in range(n)]
            if not doc["if_stage"]:
                doc.pop("if_stage")
        elif action == "section":
            doc[section or "name"] = value
        elif section == "":
            doc.pop(key, None) if action == "delete" else doc.__setitem__(key, value)
        elif section == "if_stage":
            stages = doc.get("if_stage")
            if isinstance(stages, list) and stages and all(isinstance(s, dict) for s in stages):
                s = stages[draw(st.integers(0, len(stages) - 1))]
                s.pop(key, None) if action == "delete" else s.__setitem__(key, value)
        else:
            table = doc.get(section)
            if isinstance(table, dict):
                table.pop(key, None) if action == "delete" else table.__setitem__(key, value)
    command = draw(st.sampled_from(["receive"] * 12 + ["receive-exact"] * 3 + ["report"]))
    tune = draw(st.sampled_from(["1M", "1M", "1M", "1.01M", "990k", "2M"]))
    return doc, command, tune


def spec_argv(ws: Workspace, case, out: Path) -> tuple:
    doc, command, tune = case
    try:
        text = to_toml(doc)
    except (TypeError, ValueError):
        text = "x = 1\n"
    spec = ws.add_input(f"s{ws.n}.toml", text.encode("utf-8", "surrogatepass"))
    if command == "report":
        return ["report", spec, "--tune", tune, "-o", out / "r", "--no-measure", "--quiet"], (spec,)
    extra = ["--path", "exact"] if command == "receive-exact" else []
    return ["receive", ws.path(BASE_META_NAME), "--tune", tune, "--chain", spec, "-o", out / "a.wav", "--summary",
            out / "a.json", "--duration", "0.25", "--quiet", *extra], (spec,)


# --- target 3: command-line options ----------------------------------------------------------------

def _opt_values(kind: str):
    plausible = {
        "freq": ["1M", "1.01M", "990k", "455k", "10k", "9k", "1000000", "1.2M", "2.4M", "1.02M"],
        "seconds": ["0", "0.1", "0.5", "1", "1.2", "300ms", "2"],
        "synth-seconds": ["0", "0.1", "0.5", "1", "1.2", "300ms", "2"],
        "int": ["0", "1", "7", "10", "31", "3"],
        "band": ["540k:1700k", "1.7M:540k", "520k:1610k", "3M:30M", "100k:200k"],
        "path": ["fast", "exact", "slow"],
        "injection": ["high", "low", "side"],
        "format": ["cu8", "ci16_le", "cf32_le", "rf32_le", "xyz"],
        "chain": ["medium", "wide", "narrow", "mediun", "{spec}"],
    }[kind]
    numbers = NASTY_NUMBERS
    if kind == "synth-seconds":
        # a synthesis of hours that fits the disk is accepted and runs for hours: long work, not a hang;
        # what cannot be meant (beyond the disk or the sample-count bound) is still drawn and refused
        numbers = [v for v in NASTY_NUMBERS if not (isinstance(v, (int, float)) and 60 < v <= 1e5)]
    return st.one_of(st.sampled_from(plausible), st.sampled_from(NASTY_TEXT),
                     st.sampled_from([str(v) for v in numbers]), st.sampled_from(["{dir}", "{missing}"]))


OPTIONS = {
    "info": {"--spacing": "freq", "--start": "seconds", "--duration": "seconds", "--format": "format",
             "--rate": "freq", "--center": "freq"},
    "receive": {"--tune": "freq", "--chain": "chain", "--path": "path", "--if-rate": "freq", "--start": "seconds",
                "--duration": "seconds", "--format": "format", "--rate": "freq", "--center": "freq"},
    "report": {"--tune": "freq", "--spacing": "freq", "--path": "path", "--points": "int", "--start": "seconds",
               "--duration": "seconds"},
    "plan": {"--if": "freq", "--band": "band", "--spacing": "freq", "--injection": "injection", "--reject": "int",
             "--at": "freq", "--max-q": "int"},
    "synth": {"--seconds": "synth-seconds", "--seed": "int"},
    "compare": {"--tune": "freq", "--start": "seconds", "--duration": "seconds", "--blind": "int", "--seed": "int",
                "--spacing": "freq", "--path": "path"},
}
FLAGS = {"info": ["--json", "--quiet"], "receive": ["--float", "--force"], "report": ["--no-measure", "--force"],
         "plan": ["--json"], "synth": ["--force", "--quiet"], "compare": ["--force", "--quiet"]}
REQUIRED = {"receive": ["--tune"], "report": ["--tune"], "plan": ["--if", "--band"], "compare": ["--tune"]}
OUTPUTS = ["{out}/a.wav", "{out}", "{cap}", "{spec}", "{missing}/a.wav", "{out}/a.txt", "{out}/x.sigmf-meta", ""]


@st.composite
def cli_cases(draw):
    """An argv template ('{out}' etc. filled in by :func:`cli_argv`)."""
    weights = ["info"] * 4 + ["receive"] * 5 + ["plan"] * 4 + ["synth"] * 2 + ["report"] + ["compare"]
    command = draw(st.sampled_from(weights))
    opts = OPTIONS[command]
    argv = [command]
    if command in ("info", "receive", "compare"):
        argv.append(draw(st.sampled_from(["{cap}"] * 6 + ["{data}", "{dir}", "{missing}", "{spec}", "{raw}"])))
    if command == "report":
        argv.append(draw(st.sampled_from(["medium", "wide", "{spec}", "nosuch"])))
    if command == "synth":
        argv.append(draw(st.sampled_from(["{scenario}"] * 4 + ["{spec}", "{dir}", "{missing}"])))
    if command == "compare":
        argv += draw(st.lists(st.sampled_from(["wide", "narrow", "medium", "medium@m2", "{spec}", "x@", "@"]),
                              min_size=0, max_size=3))
    chosen = set()
    for name in REQUIRED.get(command, []):
        if draw(st.integers(0, 9)) > 0:
            chosen.add(name)
    for name in sorted(opts):
        if name not in chosen and draw(st.integers(0, 3)) == 0:
            chosen.add(name)
    for name in sorted(chosen):
        argv += [name, draw(_opt_values(opts[name]))]
    if command in ("receive", "synth", "report", "compare"):
        if draw(st.integers(0, 9)) > 0:
            default = {"receive": "{out}/a.wav", "synth": "{out}/x.sigmf-meta", "report": "{out}/r",
                       "compare": "{out}/c"}[command]
            # the workspace capture is an input of the others, not of synth (which may replace it with --force)
            choices = [o.replace("{cap}", "{scenario}") for o in OUTPUTS] if command == "synth" else OUTPUTS
            argv += ["-o", draw(st.sampled_from([default] * 5 + choices))]
    if command == "receive" and draw(st.booleans()):
        argv += ["--summary", draw(st.sampled_from(["{out}/a.json"] * 3 + OUTPUTS))]
    if command == "report" and draw(st.integers(0, 3)) > 0:
        argv.append("--no-measure")
    if command == "report" and draw(st.integers(0, 3)) == 0:
        argv += ["--capture", "{cap}"]
    for flag in FLAGS[command]:
        if draw(st.integers(0, 3)) == 0:
            argv.append(flag)
    extra = draw(st.integers(0, 9))
    if extra == 0 and chosen:
        name = sorted(chosen)[0]
        argv += [name, draw(_opt_values(opts[name]))]          # given twice
    elif extra == 1:
        argv.append(draw(st.sampled_from(["--nope", "-x", "--tune=", "--", "stray"])))
    if command in ("receive", "info", "report", "compare") and "--duration" not in chosen:
        argv += ["--duration", "0.25" if command != "compare" else "1"]
    if command == "plan" and "--reject" in chosen and "--at" not in chosen and draw(st.booleans()):
        argv += ["--at", "10k"]
    if command != "plan":
        argv.append("--quiet")
    return argv


def cli_argv(ws: Workspace, template: list, out: Path) -> list:
    fill = {"out": out, "cap": ws.path(BASE_META_NAME), "data": ws.path("cap.sigmf-data"), "dir": ws.path("folder"),
            "missing": ws.root / "missing", "spec": ws.path("spec.toml"), "scenario": ws.path("scenario.toml"),
            "raw": ws.path("cap.sigmf-data")}
    out_args = []
    for a in template:
        text = str(a)
        for k, v in fill.items():
            text = text.replace("{" + k + "}", str(v))
        out_args.append(text)
    return out_args


# --- target 4: hand-damaged WAV captures ------------------------------------------------------------

@st.composite
def wav_cases(draw):
    """(format, channels, subtype, damage list, command): a small WAV/RF64/W64 file, its bytes damaged."""
    fmt = draw(st.sampled_from(["WAV", "WAV", "RF64", "W64"]))
    channels = draw(st.sampled_from([1, 2]))
    subtype = draw(st.sampled_from(["PCM_16", "FLOAT", "PCM_U8", "PCM_24", "DOUBLE"]))
    damage = draw(st.lists(st.one_of(
        st.tuples(st.just("cut"), st.floats(0.0, 1.0)),
        st.tuples(st.just("flip"), st.integers(0, 95), st.integers(1, 255)),
        st.tuples(st.just("size"), st.sampled_from([4, 40, 44, 56, 72, 76, 80]),
                  st.sampled_from([0, 1, 7, 0x7FFFFFFF, 0xFFFFFFFF, 2 ** 31 + 3])),
    ), min_size=0, max_size=3))
    command = draw(st.sampled_from(["info", "info", "receive"]))
    return fmt, channels, subtype, damage, command


def wav_argv(ws: Workspace, case, out: Path) -> tuple:
    import io as _io
    import struct

    import numpy as np
    import soundfile as sf

    fmt, channels, subtype, damage, command = case
    n = 24000
    t = np.arange(n) / 96000.0
    x = 0.3 * np.cos(2 * np.pi * 10e3 * t)
    data = np.stack([x, 0.3 * np.sin(2 * np.pi * 10e3 * t)], axis=1) if channels == 2 else x
    buf = _io.BytesIO()
    sf.write(buf, data, 96000, format=fmt, subtype=subtype)
    b = bytearray(buf.getvalue())
    for d in damage:
        if d[0] == "cut":
            b = b[: int(len(b) * d[1])]
        elif d[0] == "flip" and d[1] < len(b):
            b[d[1]] ^= d[2]
        elif d[0] == "size" and d[1] + 4 <= len(b):
            b[d[1]:d[1] + 4] = struct.pack("<I", d[2])
    ext = {"WAV": "wav", "RF64": "rf64", "W64": "w64"}[fmt]
    p = ws.add_input(f"w{ws.n}.{ext}", bytes(b))
    center = ["--center", "100k"] if channels == 2 else []
    tune = "110k" if channels == 2 else "10k"
    if command == "info":
        return ["info", p, "--json", "--quiet", *center], (p,)
    return ["receive", p, "--tune", tune, "-o", out / "a.wav", "--quiet", "--chain", "narrow",
            *center], (p,)


# --- the targets, as functions of one drawn case -------------------------------------------------

BAD: list = []          # (target, outcome, detail) of every case that broke a promise
STRICT = True           # raise at the first bad case (the test suite: hypothesis then shrinks it)


def check(ws: Workspace, target: str, case) -> str:
    """Run one drawn case of ``target`` and judge it; raise (STRICT) or record a broken promise."""
    out = ws.new_out()
    made = ()
    if target == "sigmf":
        argv, made = sigmf_argv(ws, case, out)
    elif target == "spec":
        argv, made = spec_argv(ws, case, out)
    elif target == "wav":
        argv, made = wav_argv(ws, case, out)
    else:
        argv = cli_argv(ws, case, out)
    import shutil

    try:
        outcome, detail = run_case(ws, target, argv, out)
        if outcome not in ("error", "accepted") and made and made[0].suffix in (".toml", ".sigmf-meta"):
            detail += f" | {made[0].name}: {made[0].read_text(errors='replace')[:800]!r}"
    finally:
        ws.drop_inputs(made)
        shutil.rmtree(out, ignore_errors=True)
    if outcome not in ("error", "accepted"):
        BAD.append((target, outcome, detail))
        if STRICT:
            raise AssertionError(f"{target}: {outcome}: {detail}")
    return outcome


TARGETS = {"sigmf": sigmf_cases, "spec": spec_cases, "cli": cli_cases, "wav": wav_cases}
