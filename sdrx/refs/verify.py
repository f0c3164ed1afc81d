"""Verify stored references: rerun each case and compare its audio with the reference.

Every case, its reference WAV (size, SHA-256, header) and its manifest entry
are checked before the first case runs, so bad input writes nothing.

Outcomes per case:

- ``pass``: within the case's tolerance (from the cases file as it is now);
- ``fail``: outside it, a DSP regression; a difference WAV (new − reference)
  and a PNG of both spectra are written to the failures folder;
- ``changed``: the capture's SHA-256 differs from the recorded one, so the
  reference no longer applies; reported as a changed capture, not as a DSP
  regression, and not run.

Notes printed with a case (never a failure on their own): sdrx/numpy/scipy
versions that differ from the recording, a chain spec or case definition that
differs from the recorded one (key paths and values).

Failures folder: ``--failures DIR`` if given; otherwise beside the JUnit
report as ``<report stem>-failures/``; otherwise beside the store as
``<store>-failures/``.
"""

from __future__ import annotations

import contextlib
import json
import math
import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Optional

from ..errors import OutputError
from ..fileio import check_output
from .cases import load_cases, select_cases
from .junit import JUnitCase, write_junit
from .metrics import compare_audio, fmt_db, plot_spectra, write_difference
from .runcase import capture_hashes, dict_differences, prepare_case, run_case, temp_workdir
from .store import Store, versions

__all__ = ["CaseResult", "VerifyReport", "verify_cases", "default_failures_dir"]


@dataclass(frozen=True)
class CaseResult:
    """The outcome of verifying one case."""

    name: str
    status: str                       # "pass" | "fail" | "changed"
    summary: str                      # the figures and their limits, one line
    problems: tuple = field(default_factory=tuple)
    notes: tuple = field(default_factory=tuple)
    figures: Optional[dict] = None    # Comparison.to_json() when compared
    artifacts: tuple = field(default_factory=tuple)
    time_s: float = 0.0

    @property
    def passed(self) -> bool:
        """True when the case passed."""
        return self.status == "pass"

    def line(self) -> str:
        """One line: PASS/FAIL, the case, the figures with their limits, notes."""
        word = "PASS" if self.passed else "FAIL"
        text = f"{word} {self.name}: {self.summary}"
        if self.problems:
            text += " -- " + "; ".join(self.problems)
        if self.notes:
            text += " [" + "; ".join(self.notes) + "]"
        return text


@dataclass(frozen=True)
class VerifyReport:
    """All case results of one verify run."""

    cases_file: Path
    store: Path
    results: tuple
    failures_dir: Optional[Path] = None
    junit: Optional[Path] = None

    @property
    def ok(self) -> bool:
        """True when every case passed."""
        return all(r.passed for r in self.results)

    @property
    def exit_code(self) -> int:
        """0 when all passed, 1 otherwise."""
        return 0 if self.ok else 1

    def lines(self) -> list:
        """One line per case and a closing count."""
        out = [r.line() for r in self.results]
        n_fail = sum(1 for r in self.results if not r.passed)
        tail = f"{len(self.results) - n_fail} of {len(self.results)} cases passed"
        if n_fail and self.failures_dir is not None and any(r.artifacts for r in self.results):
            tail += f"; differences written to {self.failures_dir}"
        out.append(tail)
        return out


def default_failures_dir(store, junit=None) -> Path:
    """Where difference WAVs and spectra go when ``--failures`` is not given.

    Examples
    --------
    >>> default_failures_dir("tests/refs/store").as_posix()
    'tests/refs/store-failures'
    >>> default_failures_dir("s", junit="out/refs.xml").as_posix()
    'out/refs-failures'
    """
    if junit is not None:
        j = Path(junit)
        return j.with_name(j.stem + "-failures")
    s = Path(store)
    if s.name in ("", ".", ".."):
        s = s.resolve()
    return s.with_name(s.name + "-failures")


def _figures_summary(tol, cmp) -> str:
    if tol.exact:
        if cmp.identical:
            return "exact: identical samples"
        return f"exact: not identical (SNR {fmt_db(cmp.snr_db, 1)} dB)"
    return (f"SNR {fmt_db(cmp.snr_db, 1)} dB (min {fmt_db(tol.snr_db, 1)}), "
            f"level {fmt_db(cmp.level_change_db, 3, True)} dB (max {fmt_db(tol.level_db, 3)}), "
            f"spectrum {fmt_db(cmp.spectrum_db, 2)} dB (max {fmt_db(tol.spectrum_db, 2)})")


def _version_notes(recorded: dict, now: dict) -> list:
    out = []
    for k in ("sdrx", "numpy", "scipy", "python"):
        if k in recorded and recorded.get(k) != now.get(k):
            out.append(f"recorded with {k} {recorded.get(k)}, now {now.get(k)}")
    return out


#: marks a failures folder as written by sdrx (JSON listing the files of the last run)
FAILURES_MARKER = ".sdrx-failures"
_ARTIFACT_SUFFIXES = (".diff.wav", ".spectra.png")


def _failures_marker_files(d: Path) -> set:
    try:
        raw = json.loads((d / FAILURES_MARKER).read_text(encoding="utf-8"))
        files = raw["files"]
    except (OSError, ValueError, KeyError, TypeError):
        return set()
    if not isinstance(files, list):
        return set()
    return {f for f in files if isinstance(f, str) and Path(f).name == f and f not in (".", "..")}


def check_failures_dir(path: Path, force: bool) -> set:
    """Check the failures folder before any work; return the files an earlier run of sdrx left there.

    The folder is sdrx's own: what an earlier verify wrote (listed in its
    marker, or named ``<case>.diff.wav`` / ``<case>.spectra.png``) is
    replaced. Files of other origin are refused unless ``force``.

    Raises
    ------
    OutputError
        A file where the folder should be; a missing parent folder; files
        not made by sdrx without ``force``.
    """
    from ..fileset import clean_folder, is_own_temporary, recover

    if path.exists():
        if not path.is_dir():
            raise OutputError(f"--failures {path}: is a file, expected a folder")
        recover(path / FAILURES_MARKER)
        clean_folder(path)
        listed = _failures_marker_files(path)
        ours, foreign = set(), []
        for p in sorted(path.iterdir(), key=lambda q: q.name):
            name = p.name
            if is_own_temporary(name) or name == FAILURES_MARKER:
                continue
            if p.is_file() and (name in listed or name.endswith(_ARTIFACT_SUFFIXES)):
                ours.add(name)
            else:
                foreign.append(name)
        if foreign and not force:
            shown = ", ".join(foreign[:3]) + (", ..." if len(foreign) > 3 else "")
            raise OutputError(f"--failures {path}: holds files not made by sdrx ({shown}); choose another "
                              "folder, or pass --force to write beside them")
        return ours
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise OutputError(f"--failures {path}: folder {parent} does not exist")
    return set()


class _Failures:
    """The failures folder of one verify run: artifacts collected as one set, committed at the end."""

    def __init__(self, folder: Path, old_files: set):
        from ..fileset import OutputSet

        self.folder = folder
        self.old = old_files
        self.new: list = []
        self.outputs = OutputSet(folder / FAILURES_MARKER, option="--failures")
        self._created = False

    def path(self, name: str) -> Path:
        """Final path of an artifact (the folder is created when the first one is written)."""
        if not self.folder.exists():
            self.folder.mkdir()
            self._created = True
        self.new.append(name)
        return self.folder / name

    def commit(self) -> None:
        """Replace the earlier run's files by this run's (the marker last); nothing left when all pass."""
        for name in sorted(self.old - set(self.new)):
            self.outputs.retire(self.folder / name)
        marker = self.folder / FAILURES_MARKER
        if self.new:
            text = json.dumps({"made_by": "sdrx refs verify", "files": sorted(self.new)}, indent=1) + "\n"
            self.outputs.add(marker).write_text(text, encoding="utf-8")
        elif marker.is_file():
            self.outputs.retire(marker)
        self.outputs.commit()
        if not self.new and self.folder.is_dir():
            with contextlib.suppress(OSError):
                self.folder.rmdir()     # only when empty

    def abort(self) -> None:
        self.outputs.abort()
        if self._created:
            with contextlib.suppress(OSError):
                self.folder.rmdir()


def verify_cases(cases_file, store, *, names=None, junit=None, failures_dir=None, force: bool = False,
                 progress: Optional[Callable[[int, int], None]] = None,
                 on_result: Optional[Callable[[CaseResult], None]] = None) -> VerifyReport:
    """Rerun cases and compare each with its stored reference.

    Parameters
    ----------
    cases_file : str or Path
        The cases TOML file.
    store : str or Path
        A store folder made by :func:`sdrx.refs.record_cases`.
    names : str or list of str, optional
        Only these cases (default: all).
    junit : str or Path, optional
        Write a JUnit XML report here.
    failures_dir : str or Path, optional
        Folder for difference WAVs and spectra PNGs of failing cases (default:
        :func:`default_failures_dir`). Created only when a case fails.
    force : bool
        Replace an existing JUnit file and write into an existing failures folder.
    progress : callable, optional
        ``progress(done, total)`` in cases.
    on_result : callable, optional
        Called with each :class:`CaseResult` as soon as it is known.

    Returns
    -------
    VerifyReport

    Raises
    ------
    ParameterError, CaptureError
        Bad cases file, capture, chain, store, manifest or reference WAV
        (nothing written).
    OutputError
        The JUnit file or failures folder exists without ``force``.

    Notes
    -----
    Figures and limits are those of :func:`sdrx.refs.metrics.compare_audio`:
    SNR = 10·log10(Σ ref² / Σ (new − ref)²) without alignment, RMS level change,
    and the largest octave-band level change.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.synth import synthesize
    >>> from sdrx.refs import record_cases
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "sc.toml").write_text('[capture]\\nkind = "iq"\\nrate = "48k"\\ncenter = "1M"\\nseconds = 0.1\\n'
    ...     '[[station]]\\nname = "Point"\\nfrequency = "1005k"\\nlevel_dbfs = -20\\n'
    ...     '[station.program]\\nkind = "tone"\\nfrequency = "1k"\\n')
    >>> _ = synthesize(d / "sc.toml", d / "cap.sigmf-meta")
    >>> _ = (d / "cases.toml").write_text('[[case]]\\nname = "point"\\ncapture = "cap.sigmf-meta"\\n'
    ...                                   'tune = "1005k"\\nchain = "medium"\\n')
    >>> _ = record_cases(d / "cases.toml", d / "store")
    >>> report = verify_cases(d / "cases.toml", d / "store")
    >>> print(report.lines()[0])
    PASS point: SNR inf dB (min 60.0), level +0.000 dB (max 0.100), spectrum 0.00 dB (max 0.50)
    """
    cf = load_cases(cases_file)
    cases = select_cases(cf, names)
    st = Store.open(store)
    refs = _reference_wavs(st, cases)
    prepared = [prepare_case(c) for c in cases]
    junit_path = None
    if junit is not None:
        junit_path = check_output(junit, inputs=[cf.path, st.manifest_path, *refs.values()], force=force,
                                  option="--junit")
    fdir = Path(failures_dir) if failures_dir is not None else default_failures_dir(st.path, junit_path)
    failures = _Failures(fdir, check_failures_dir(fdir, force))
    try:
        results = _run_cases(prepared, st, refs, failures, on_result, progress)
    except BaseException:
        failures.abort()
        raise
    failures.commit()
    report = VerifyReport(cases_file=cf.path, store=st.path, results=tuple(results),
                          failures_dir=fdir, junit=junit_path)
    if junit_path is not None:
        _write_junit(junit_path, results, cf.path)
    return report


def _reference_wavs(st, cases) -> dict:
    """Each case's stored reference WAV, checked before any work (its entry and its hash)."""
    refs = {}
    for c in cases:
        st.entry(c.name)
        refs[c.name] = st.check_audio(c.name)
    return refs


def _run_cases(prepared, st, refs, failures, on_result, progress) -> list:
    now = versions()
    results = []
    for i, prep in enumerate(prepared):
        t0 = time.perf_counter()
        entry = st.entry(prep.case.name)
        notes = _case_notes(entry, prep.case, now)
        res = _capture_changed(prep, entry, notes)
        if res is None:
            res = _compare_case(prep, entry, refs[prep.case.name], failures, notes)
        res = replace(res, time_s=time.perf_counter() - t0)
        results.append(res)
        if on_result is not None:
            on_result(res)
        if progress is not None:
            progress(i + 1, len(prepared))
    return results


def _case_notes(entry, case, now) -> list:
    """Notes on what differs from the recording: versions, and the case's keys (its tolerance aside)."""
    notes = _version_notes(entry["versions"], now)
    recorded_case = dict(entry["case"])
    current_case = case.to_json()
    diffs = dict_differences({k: v for k, v in recorded_case.items() if k != "tolerance"},
                             {k: v for k, v in current_case.items() if k != "tolerance"})
    if diffs:
        notes.append("case differs from the recorded one: " + ", ".join(diffs))
    return notes


def _capture_changed(prep, entry, notes) -> Optional[CaseResult]:
    """A ``changed`` result when the capture's data or metadata hash is not the recorded one, else None."""
    hashes = capture_hashes(prep.info)
    rec_cap = entry["capture"]
    if hashes["sha256"] == rec_cap["sha256"] and hashes["meta_sha256"] == rec_cap["meta_sha256"]:
        return None
    which = "data" if hashes["sha256"] != rec_cap["sha256"] else "metadata"
    old = rec_cap["sha256"] if which == "data" else rec_cap["meta_sha256"]
    new = hashes["sha256"] if which == "data" else hashes["meta_sha256"]
    name = prep.case.name
    return CaseResult(
        name=name, status="changed",
        summary=f"capture changed ({which} sha256 {str(old)[:12]}... -> {str(new)[:12]}...), "
                "not a DSP regression; not compared",
        problems=(f"re-record with sdrx refs record --update --case {name} if the new capture is intended",),
        notes=tuple(notes))


def _compare_case(prep, entry, ref_wav, failures, notes) -> CaseResult:
    """Rerun the case, compare its audio with the reference, and write the artifacts of a failure."""
    case = prep.case
    spec_diffs = dict_differences(entry["chain"].get("spec"), prep.chain_spec)
    if spec_diffs:
        notes.append("chain spec differs from the recorded one: " + ", ".join(spec_diffs))
    with temp_workdir() as wd:
        wav, _summary = run_case(prep, wd)
        cmp = compare_audio(ref_wav, wav, case.tolerance)
        artifacts = [] if cmp.passed else _failure_artifacts(case.name, ref_wav, wav, cmp, failures)
    return CaseResult(name=case.name, status="pass" if cmp.passed else "fail",
                      summary=_figures_summary(case.tolerance, cmp), problems=cmp.problems,
                      notes=tuple(notes), figures=cmp.to_json(), artifacts=tuple(artifacts))


def _failure_artifacts(name, ref_wav, wav, cmp, failures) -> list:
    """The difference WAV (when the two can be subtracted) and the spectra PNG of a failing case."""
    artifacts = []
    if cmp.fs_ref == cmp.fs_new and cmp.samples_ref and cmp.samples_new:
        artifacts.append(write_difference(ref_wav, wav, failures.path(f"{name}.diff.wav"), failures.outputs))
    artifacts.append(plot_spectra(cmp, failures.path(f"{name}.spectra.png"), f"{name}: reference vs new",
                                  failures.outputs))
    return artifacts


def _write_junit(junit_path, results, cases_path) -> None:
    jcases = []
    for r in results:
        ftype = None if r.passed else ("capture-changed" if r.status == "changed" else "regression")
        details = r.line()
        if r.artifacts:
            details += "\n" + "\n".join(f"see {a}" for a in r.artifacts)
        jcases.append(JUnitCase(name=r.name, time_s=r.time_s, failure_type=ftype,
                                message=r.line() if ftype else "", details=details if ftype else "",
                                notes=r.notes))
    write_junit(junit_path, jcases, f"sdrx refs {cases_path.name}", f"sdrx.refs.{cases_path.stem}")
