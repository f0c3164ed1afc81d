"""The cases file: TOML -> validated, immutable :class:`Case` objects.

A cases file lists the runs whose audio is kept as a stored reference::

    [[case]]
    name = "harbour-1130"
    capture = "captures/harbour.sigmf-meta"   # relative to the cases file
    tune = "1130k"
    chain = "chains/two-stage.toml"           # a chain file (relative) or a preset name
    start = 0.5                               # optional excerpt, seconds (default 0)
    duration = 4.0                            # optional (default: to the end)
    path = "fast"                             # optional: fast (default) | exact
    tolerance = { snr_db = 60, level_db = 0.1, spectrum_db = 0.5 }   # or "exact"

Optional capture keys for captures that need them: ``center`` (I/Q WAV or raw
file centre frequency), ``format`` and ``rate`` (headerless raw files).
Capture corrections, as ``--correct``/``--ppm``/``--spacing`` of ``receive``:
``correct = ["dc", "iq", "clock"]`` (or ``"all"``), ``ppm = 60``, ``spacing = "9k"``.

Tolerance defaults (any key left out of the table takes these):

- ``snr_db = 60``: minimum SNR of the new output against the reference,
  ``10·log10(Σ ref² / Σ (new − ref)²)``, sample by sample with no alignment.
- ``level_db = 0.1``: maximum change of RMS level, ``|20·log10(rms_new / rms_ref)|``.
- ``spectrum_db = 0.5``: maximum change of level in any octave band centred on
  125, 250, 500, 1000, 2000 and 4000 Hz (band edges fc/√2 … fc·√2, bands above
  the audio Nyquist frequency left out; see :mod:`sdrx.refs.metrics`).

``tolerance = "exact"`` asks for identical samples (same rate, same length,
every float32 sample equal).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from ..errors import CaptureError, ParameterError
from ..tomlfile import read_toml
from ..units import parse_frequency, parse_seconds

__all__ = [
    "DEFAULT_SNR_DB",
    "DEFAULT_LEVEL_DB",
    "DEFAULT_SPECTRUM_DB",
    "PATHS",
    "Tolerance",
    "Case",
    "CasesFile",
    "load_cases",
    "select_cases",
    "check_case_name",
]

DEFAULT_SNR_DB = 60.0
DEFAULT_LEVEL_DB = 0.1
DEFAULT_SPECTRUM_DB = 0.5
PATHS = ("fast", "exact")

_CASE_KEYS = ("name", "capture", "tune", "chain", "start", "duration", "path", "tolerance",
              "center", "format", "rate", "correct", "ppm", "spacing")
_TOLERANCE_KEYS = ("snr_db", "level_db", "spectrum_db")
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$")


@dataclass(frozen=True)
class Tolerance:
    """How close a new output must be to its reference.

    Parameters
    ----------
    exact : bool
        Identical samples required; the numeric limits are then not used.
    snr_db : float
        Minimum SNR of new against reference, dB.
    level_db : float
        Maximum RMS level change, dB.
    spectrum_db : float
        Maximum level change in any octave band, dB.

    Examples
    --------
    >>> Tolerance().to_json()
    {'exact': False, 'snr_db': 60.0, 'level_db': 0.1, 'spectrum_db': 0.5}
    """

    exact: bool = False
    snr_db: float = DEFAULT_SNR_DB
    level_db: float = DEFAULT_LEVEL_DB
    spectrum_db: float = DEFAULT_SPECTRUM_DB

    def to_json(self) -> dict:
        """The tolerance as written into the manifest."""
        return {"exact": self.exact, "snr_db": self.snr_db, "level_db": self.level_db,
                "spectrum_db": self.spectrum_db}


@dataclass(frozen=True)
class Case:
    """One validated case of a cases file.

    Paths are resolved against the cases file's folder; the ``*_text`` fields
    keep what the file said, which is what the manifest records (so that a
    store is portable between machines).
    """

    name: str
    capture: Path
    capture_text: str
    tune_hz: float
    chain: str                      # resolved chain file path, or a preset name
    chain_text: str
    chain_is_file: bool
    start_s: float = 0.0
    duration_s: Optional[float] = None
    path: str = "fast"
    tolerance: Tolerance = field(default_factory=Tolerance)
    center_hz: Optional[float] = None
    datatype: Optional[str] = None
    fs: Optional[float] = None
    correct: tuple = ()             # capture corrections (dc, iq, clock), as --correct
    ppm: Optional[float] = None     # the clock error given, as --ppm
    spacing_hz: float = 10e3        # channel grid of the clock estimate

    def correction_kwargs(self) -> dict:
        """Keyword arguments for ``receive`` describing the capture corrections."""
        return {"correct": self.correct, "ppm": self.ppm, "spacing_hz": self.spacing_hz}

    def capture_kwargs(self) -> dict:
        """Keyword arguments for ``open_capture`` / ``receive`` describing the capture."""
        return {"datatype": self.datatype, "fs": self.fs, "center_hz": self.center_hz}

    def to_json(self) -> dict:
        """The case as run, for the manifest (paths as written in the cases file)."""
        return {
            "name": self.name,
            "capture": self.capture_text,
            "tune_hz": self.tune_hz,
            "chain": self.chain_text,
            "chain_is_file": self.chain_is_file,
            "start_s": self.start_s,
            "duration_s": self.duration_s,
            "path": self.path,
            "center_hz": self.center_hz,
            "format": self.datatype,
            "rate_hz": self.fs,
            "tolerance": self.tolerance.to_json(),
            # only when used, so that manifests recorded before corrections existed still match
            **({"correct": list(self.correct), "ppm": self.ppm, "spacing_hz": self.spacing_hz}
               if self.correct else {}),
        }


@dataclass(frozen=True)
class CasesFile:
    """A loaded cases file: its path and its cases in file order."""

    path: Path
    cases: tuple

    def names(self) -> list:
        """Case names in file order."""
        return [c.name for c in self.cases]


def check_case_name(name, where: str) -> str:
    """Check that a case name is safe as a file name inside a store folder.

    Raises
    ------
    ParameterError
        If the name is empty, has a path separator, starts with a dot or
        holds characters other than letters, digits, ``.``, ``_``, ``-``.

    Examples
    --------
    >>> check_case_name("harbour-1130", "cases.toml")
    'harbour-1130'
    """
    if not isinstance(name, str) or not _NAME_RE.match(name) or ".." in name:
        raise ParameterError(
            f"{where}: case name {name!r} is not allowed (use letters, digits, '.', '_', '-', "
            "no path separators or '..', at most 100 characters; it names files in the store folder)"
        )
    return name


def _tolerance(value, where: str) -> Tolerance:
    if value is None:
        return Tolerance()
    if isinstance(value, str):
        if value.strip().lower() == "exact":
            return Tolerance(exact=True)
        raise ParameterError(f"{where}.tolerance: {value!r} is not allowed; write \"exact\" or a table "
                             f"with keys {', '.join(_TOLERANCE_KEYS)}")
    if not isinstance(value, dict):
        raise ParameterError(f"{where}.tolerance: expected \"exact\" or a table, got {value!r}")
    unknown = sorted(set(value) - set(_TOLERANCE_KEYS))
    if unknown:
        raise ParameterError(f"{where}.tolerance: unknown key {unknown[0]!r}; allowed: {', '.join(_TOLERANCE_KEYS)}")
    out = {}
    for key, default in (("snr_db", DEFAULT_SNR_DB), ("level_db", DEFAULT_LEVEL_DB),
                         ("spectrum_db", DEFAULT_SPECTRUM_DB)):
        v = value.get(key, default)
        if isinstance(v, bool) or not isinstance(v, (int, float)) or v != v or v in (float("inf"), float("-inf")):
            raise ParameterError(f"{where}.tolerance.{key}: expected a finite number of dB, got {v!r}")
        if key != "snr_db" and v < 0:
            raise ParameterError(f"{where}.tolerance.{key}: must be >= 0 dB, got {v!r}")
        out[key] = float(v)
    return Tolerance(exact=False, **out)


def _is_chain_file(text: str) -> bool:
    return text.endswith(".toml") or "/" in text or "\\" in text


def _case(raw, index: int, base: Path, file_label: str) -> Case:
    where = f"{file_label}: case[{index}]"
    if not isinstance(raw, dict):
        raise ParameterError(f"{where}: expected a table ([[case]]), got {raw!r}")
    if "name" not in raw:
        raise ParameterError(f"{where}: missing key 'name'")
    name = check_case_name(raw["name"], where)
    where = f"{file_label}: case {name!r}"
    unknown = sorted(set(raw) - set(_CASE_KEYS))
    if unknown:
        raise ParameterError(f"{where}: unknown key {unknown[0]!r}; allowed: {', '.join(_CASE_KEYS)}")
    for key in ("capture", "tune", "chain"):
        if key not in raw:
            raise ParameterError(f"{where}: missing key {key!r}")
    capture_text = raw["capture"]
    if not isinstance(capture_text, str) or not capture_text:
        raise ParameterError(f"{where}.capture: expected a file path, got {capture_text!r}")
    capture = base / capture_text
    if not capture.is_file():
        raise CaptureError(f"{where}.capture: {capture}: no such file")
    chain_text = raw["chain"]
    if not isinstance(chain_text, str) or not chain_text:
        raise ParameterError(f"{where}.chain: expected a chain file or a preset name, got {chain_text!r}")
    chain_is_file = _is_chain_file(chain_text)
    chain = chain_text
    if chain_is_file:
        chain_path = base / chain_text
        if not chain_path.is_file():
            raise ParameterError(f"{where}.chain: {chain_path}: no such chain file")
        chain = str(chain_path)
    tune_hz = parse_frequency(raw["tune"], f"{where}.tune")
    if tune_hz <= 0:
        raise ParameterError(f"{where}.tune: must be above 0 Hz, got {raw['tune']!r}")
    start_s = parse_seconds(raw.get("start", 0.0), f"{where}.start")
    duration_s = None
    if raw.get("duration") is not None:
        duration_s = parse_seconds(raw["duration"], f"{where}.duration", allow_zero=False)
    path = raw.get("path", "fast")
    if path not in PATHS:
        raise ParameterError(f"{where}.path: {path!r} is not allowed; choose {' or '.join(PATHS)}")
    center_hz = None if raw.get("center") is None else parse_frequency(raw["center"], f"{where}.center")
    fs = None if raw.get("rate") is None else parse_frequency(raw["rate"], f"{where}.rate")
    datatype = raw.get("format")
    if datatype is not None and (not isinstance(datatype, str) or not datatype):
        raise ParameterError(f"{where}.format: expected a SigMF datatype such as ci16_le, got {datatype!r}")
    correct, ppm, spacing = _corrections(raw, where)
    return Case(
        name=name, capture=capture, capture_text=capture_text, tune_hz=tune_hz,
        chain=chain, chain_text=chain_text, chain_is_file=chain_is_file,
        start_s=start_s, duration_s=duration_s, path=path,
        tolerance=_tolerance(raw.get("tolerance"), where),
        center_hz=center_hz, datatype=datatype, fs=fs,
        correct=correct, ppm=ppm, spacing_hz=spacing,
    )


def _corrections(raw, where: str) -> tuple:
    """``correct = ["dc", "iq", "clock"]`` (or "all"), ``ppm``, ``spacing`` of a case."""
    from ..capture.correct import parse_correct, parse_ppm

    value = raw.get("correct")
    if value is not None and not isinstance(value, (str, list)):
        raise ParameterError(f"{where}.correct: expected a list such as [\"dc\", \"iq\"] or \"all\", got {value!r}")
    correct = parse_correct(value, f"{where}.correct")
    ppm = None if raw.get("ppm") is None else parse_ppm(raw["ppm"], f"{where}.ppm")
    if ppm is not None and "clock" not in correct:
        raise ParameterError(f"{where}.ppm: gives the clock error that correct = [\"clock\"] undoes; add \"clock\"")
    spacing = parse_frequency(raw.get("spacing", 10e3), f"{where}.spacing")
    if spacing <= 0:
        raise ParameterError(f"{where}.spacing: must be above 0 Hz, got {raw.get('spacing')!r}")
    return correct, ppm, spacing


def load_cases(path) -> CasesFile:
    """Read and validate a cases file.

    Parameters
    ----------
    path : str or Path
        The cases TOML file; capture and chain paths in it are relative to
        its folder.

    Returns
    -------
    CasesFile

    Raises
    ------
    CaptureError
        If the cases file or a capture it names does not exist.
    ParameterError
        On a TOML syntax error, an unknown or missing key, a bad value, a
        case name unfit for a file name, or two cases with the same name.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "c.wav").write_bytes(b"")
    >>> _ = (d / "cases.toml").write_text('[[case]]\\nname = "a"\\ncapture = "c.wav"\\n'
    ...                                   'tune = "1130k"\\nchain = "medium"\\ntolerance = { snr_db = 50 }\\n')
    >>> cf = load_cases(d / "cases.toml")
    >>> cf.cases[0].tune_hz, cf.cases[0].tolerance.snr_db, cf.cases[0].tolerance.level_db
    (1130000.0, 50.0, 0.1)
    """
    p = Path(path)
    if not p.is_file():
        raise CaptureError(f"cases file {p}: no such file")
    data = read_toml(p, "cases file")
    unknown = sorted(set(data) - {"case"})
    if unknown:
        raise ParameterError(f"cases file {p}: unknown top-level key {unknown[0]!r}; allowed: case ([[case]] tables)")
    raw_cases = data.get("case")
    if not isinstance(raw_cases, list) or not raw_cases:
        raise ParameterError(f"cases file {p}: no [[case]] tables")
    base = p.parent
    cases = []
    seen = {}
    for i, raw in enumerate(raw_cases):
        c = _case(raw, i, base, f"cases file {p}")
        if c.name in seen:
            raise ParameterError(f"cases file {p}: duplicate case name {c.name!r} (case[{seen[c.name]}] and case[{i}]); names must be unique")
        seen[c.name] = i
        cases.append(c)
    return CasesFile(path=p, cases=tuple(cases))


def select_cases(cases_file: CasesFile, names=None) -> tuple:
    """The cases to run: all of them, or those named (in the order given).

    Raises
    ------
    ParameterError
        If a name is not a case of the file.

    Examples
    --------
    >>> cf = CasesFile(Path("cases.toml"), ())
    >>> select_cases(cf)
    ()
    """
    if not names:
        return cases_file.cases
    if isinstance(names, str):
        names = [names]
    by_name = {c.name: c for c in cases_file.cases}
    out = []
    for n in names:
        if n not in by_name:
            raise ParameterError(f"--case {n!r}: no such case in {cases_file.path}; cases: {', '.join(by_name) or '(none)'}")
        if by_name[n] not in out:
            out.append(by_name[n])
    return tuple(out)
