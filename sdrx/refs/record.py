"""Record stored references: run each case and keep its audio and a manifest entry.

Every case is checked before the first one runs (capture readable, excerpt
inside it, chain valid, no reference overwritten without ``update``), so bad
input writes nothing.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Optional

from ..analysis.audio_response import AUDIO_BANDWIDTH_DEFINITION, audio_bandwidth_hz
from ..chain import design_chain
from ..errors import OutputError
from .cases import load_cases, select_cases
from .metrics import audio_figures, tone_sinad_db
from .runcase import capture_hashes, prepare_case, run_case, temp_workdir, truth_tone_hz
from .store import Store, clean_json, versions

__all__ = ["RecordResult", "record_cases"]


@dataclass(frozen=True)
class RecordResult:
    """What recording one case produced."""

    name: str
    audio_path: Path
    level_dbfs: Optional[float]
    audio_bandwidth_hz: Optional[float]
    occupied_bandwidth_hz: float
    sinad_db: Optional[float]
    replaced: bool
    time_s: float

    def line(self) -> str:
        """One line for the terminal."""
        lvl = "n/a" if self.level_dbfs is None else f"{self.level_dbfs:.2f} dBFS"
        sinad = "" if self.sinad_db is None else f", SINAD {self.sinad_db:.1f} dB"
        verb = "updated" if self.replaced else "recorded"
        audio = "n/a" if self.audio_bandwidth_hz is None else f"{self.audio_bandwidth_hz:.0f} Hz"
        return (f"{verb} {self.name}: level {lvl}, audio bandwidth {audio}, occupied bandwidth "
                f"{self.occupied_bandwidth_hz:.0f} Hz{sinad} -> {self.audio_path}")


def record_cases(cases_file, store, *, names=None, update: bool = False,
                 progress: Optional[Callable[[int, int], None]] = None,
                 on_result: Optional[Callable[[RecordResult], None]] = None) -> list:
    """Run cases and store their references.

    Parameters
    ----------
    cases_file : str or Path
        The cases TOML file.
    store : str or Path
        Store folder: new, empty, or an existing store.
    names : str or list of str, optional
        Only these cases (default: all).
    update : bool
        Replace references that exist already.
    progress : callable, optional
        ``progress(done, total)`` in cases.
    on_result : callable, optional
        Called with each :class:`RecordResult` as soon as the case is stored.

    Returns
    -------
    list of RecordResult

    Raises
    ------
    ParameterError, CaptureError
        Bad cases file, capture, chain or store (nothing written).
    OutputError
        A reference exists and ``update`` is False (nothing written).

    Notes
    -----
    The manifest entry holds the case as run, the resolved chain spec, the
    SHA-256 of the capture, the versions of sdrx/numpy/scipy and the output
    figures (:func:`sdrx.refs.metrics.audio_figures`; SINAD by
    :func:`sdrx.refs.metrics.tone_sinad_db` when the capture's truth sidecar
    gives the tuned station a single-tone program) and the chain's audio
    bandwidth (:func:`sdrx.analysis.audio_response.audio_bandwidth_hz` on the
    case's chain, tuning and path: test tones through the chain).
    """
    cf = load_cases(cases_file)
    cases = select_cases(cf, names)
    st = Store.for_record(store)
    if not update:
        _refuse_existing(st, cases)
    prepared = [prepare_case(c) for c in cases]
    ver = versions()
    results = []
    for i, prep in enumerate(prepared):
        res = _record_case(prep, st, ver)
        results.append(res)
        if on_result is not None:
            on_result(res)
        if progress is not None:
            progress(i + 1, len(prepared))
    return results


def _refuse_existing(st, cases) -> None:
    """Refuse, before any work, to replace a reference without --update."""
    for c in cases:
        if st.has(c.name):
            raise OutputError(f"--store {st.path}: a reference for case {c.name!r} exists already; "
                              "pass --update to replace it")


def _record_case(prep, st, ver) -> RecordResult:
    """Run one case, measure its audio and store it with its manifest entry."""
    t0 = time.perf_counter()
    case = prep.case
    hashes = capture_hashes(prep.info)
    replaced = st.has(case.name)
    with temp_workdir() as wd:
        wav, summary = run_case(prep, wd)
        fig = audio_figures(wav)
        metrics = _case_metrics(prep, wav, fig)
        entry = {
            "case": case.to_json(),
            "chain": {"name": prep.chain_name, "spec": prep.chain_spec},
            "capture": {**hashes, "info": _portable_info(prep.info, case.capture_text)},
            "versions": ver,
            "metrics": metrics,
            "summary": clean_json(_portable_summary(summary)),
        }
        dest = st.write_case(case.name, entry, wav)
    return RecordResult(name=case.name, audio_path=dest, level_dbfs=metrics["level_dbfs"],
                        audio_bandwidth_hz=metrics["audio_bandwidth_hz"],
                        occupied_bandwidth_hz=fig.occupied_bandwidth_hz, sinad_db=clean_json(metrics["sinad_db"]),
                        replaced=replaced,
                        time_s=time.perf_counter() - t0)


def _case_metrics(prep, wav, fig) -> dict:
    """The output figures of a case: level and bandwidths, SINAD of a single-tone station, audio bandwidth."""
    case = prep.case
    tone = truth_tone_hz(case.capture, case.tune_hz)
    sinad = None if tone is None else tone_sinad_db(wav, tone)
    metrics = fig.to_json()
    metrics["sinad_db"] = sinad
    metrics["sinad_tone_hz"] = tone
    metrics["audio_bandwidth_hz"] = audio_bandwidth_hz(design_chain(prep.chain_spec), case.tune_hz, path=case.path)
    metrics["audio_bandwidth_definition"] = AUDIO_BANDWIDTH_DEFINITION
    return metrics


def _portable_info(info, capture_text: str) -> dict:
    """Capture metadata with the path as the cases file wrote it."""
    d = clean_json(info.to_json())
    d["path"] = capture_text
    return d


def _portable_summary(summary) -> dict:
    """The run summary without machine-specific paths or timings (so manifests are reproducible)."""
    if not isinstance(summary, dict):
        return {}
    drop = {"out", "output", "capture", "summary_path", "elapsed_s", "time_s", "wall_s", "realtime_factor",
            "seconds_per_second", "speed"}
    return {k: v for k, v in summary.items() if k not in drop and not k.endswith("_path")}
