"""Running one case: check it before any work, hash its capture, run it through the receiver.

Shared by :mod:`sdrx.refs.record` and :mod:`sdrx.refs.verify`; the chain is
always run by :func:`sdrx.run.receive`, never re-implemented here.
"""

from __future__ import annotations

import json
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

from ..errors import CaptureError, ParameterError
from .cases import Case
from .store import clean_json, file_sha256

__all__ = ["Prepared", "prepare_case", "capture_hashes", "run_case", "truth_tone_hz", "dict_differences",
           "temp_workdir"]


@dataclass(frozen=True)
class Prepared:
    """A case checked and ready to run: its capture info and resolved chain."""

    case: Case
    info: object            # sdrx.capture.CaptureInfo
    chain_name: str
    chain_spec: dict        # the resolved spec as plain JSON data




def prepare_case(case: Case) -> Prepared:
    """Check a case fully before anything is run or written.

    Opens the capture (validating its metadata and the excerpt), loads and
    designs the chain, and binds the design to the capture as the run will
    (tuning inside the capture's band, path), so that a bad later case
    stops the command before an earlier case is run or written.

    Raises
    ------
    CaptureError, ParameterError
        From the capture reader or the chain loader, prefixed with the case name.
    """
    from ..capture import open_capture
    from ..chain import design_chain, load_chain, spec_to_dict

    from ..receiver import Receiver

    try:
        reader = open_capture(case.capture, **case.capture_kwargs())
        first, _count = reader.sample_range(case.start_s, case.duration_s)
        info = reader.info
    except (CaptureError, ParameterError) as exc:
        raise type(exc)(f"case {case.name!r}: {exc}") from None
    try:
        spec = load_chain(case.chain)
        design = design_chain(spec)
        Receiver(design, info, case.tune_hz, path=case.path, first_sample=first)
    except (CaptureError, ParameterError) as exc:
        raise type(exc)(f"case {case.name!r}: {exc}") from None
    return Prepared(case=case, info=info, chain_name=str(design.name), chain_spec=clean_json(spec_to_dict(spec)))


def capture_hashes(info) -> dict:
    """SHA-256 of the capture's data file and, when separate, its metadata file."""
    data = Path(info.data_path)
    meta = Path(info.path)
    out = {"sha256": file_sha256(data), "meta_sha256": None}
    if meta.resolve() != data.resolve() and meta.is_file():
        out["meta_sha256"] = file_sha256(meta)
    return out


def run_case(prep: Prepared, workdir, *, progress=None) -> tuple:
    """Run a case through :func:`sdrx.run.receive` into ``workdir``.

    Returns
    -------
    (Path, dict)
        The float WAV written and the run summary.
    """
    from ..run import receive

    case = prep.case
    out = Path(workdir) / f"{case.name}.wav"
    summary = receive(
        case.capture, case.tune_hz, case.chain, out,
        path=case.path, start_s=case.start_s, duration_s=case.duration_s,
        float_output=True, force=True, progress=progress, **case.capture_kwargs(), **case.correction_kwargs(),
    )
    return out, summary


def _truth_path(capture: Path) -> Path:
    name = capture.name
    for suffix in (".sigmf-meta", ".sigmf-data", ".wav"):
        if name.lower().endswith(suffix):
            return capture.with_name(name[: -len(suffix)] + ".truth.json")
    return capture.with_name(capture.stem + ".truth.json")


def _number(v) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def truth_tone_hz(capture: Path, tune_hz: float) -> Optional[float]:
    """Frequency of the single-tone program of the station at ``tune_hz``, from the truth sidecar.

    The sidecar is ``<stem>.truth.json`` beside the capture (written by
    :func:`sdrx.synth.synthesize`). The station is the one whose nominal
    frequency (``frequency_hz``) is within 1 Hz of the tuning, or else whose
    carrier (``carrier_hz``) is within 100 Hz.

    Returns
    -------
    float or None
        None when there is no sidecar, no such station, or its program is
        not one steady tone (``program.kind == "tone"`` with one frequency).
    """
    p = _truth_path(Path(capture))
    if not p.is_file():
        return None
    try:
        truth = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError):
        return None
    stations = truth.get("stations") if isinstance(truth, dict) else None
    if not isinstance(stations, list):
        return None
    station = None
    for st in stations:
        if isinstance(st, dict) and _number(st.get("frequency_hz")) and abs(st["frequency_hz"] - tune_hz) <= 1.0:
            station = st
            break
    if station is None:
        for st in stations:
            if isinstance(st, dict) and _number(st.get("carrier_hz")) and abs(st["carrier_hz"] - tune_hz) <= 100.0:
                station = st
                break
    if station is None:
        return None
    prog = station.get("program")
    if not isinstance(prog, dict) or prog.get("kind") != "tone":
        return None
    tones = station.get("tones_hz")
    if isinstance(tones, list) and len(tones) == 1 and _number(tones[0]):
        return float(tones[0])
    if _number(prog.get("frequency")):
        return float(prog["frequency"])
    return None


def dict_differences(old, new, prefix: str = "", limit: int = 5) -> list:
    """Key paths at which two JSON values differ (at most ``limit``).

    List items count from 1, as the chain spec's validation messages and the
    report do: ``if_stage[1]`` is the first ``[[if_stage]]`` table.

    Examples
    --------
    >>> dict_differences({"a": 1, "b": {"c": 2}}, {"a": 1, "b": {"c": 3}})
    ['b.c: 2 -> 3']
    >>> dict_differences({"if_stage": [{"q": 60}]}, {"if_stage": [{"q": 50}]})
    ['if_stage[1].q: 60 -> 50']
    """
    out = []

    def walk(a, b, path):
        if len(out) >= limit:
            return
        if isinstance(a, dict) and isinstance(b, dict):
            for k in sorted(set(a) | set(b), key=str):
                walk(a.get(k, "<absent>"), b.get(k, "<absent>"), f"{path}.{k}" if path else str(k))
        elif isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
            for i, (x, y) in enumerate(zip(a, b)):
                walk(x, y, f"{path}[{i + 1}]")
        elif a != b:
            out.append(f"{path or '(root)'}: {a!r} -> {b!r}")

    walk(old, new, prefix)
    return out


def temp_workdir():
    """A temporary folder for a run's audio (removed afterwards)."""
    return tempfile.TemporaryDirectory(prefix="sdrx-refs-")
