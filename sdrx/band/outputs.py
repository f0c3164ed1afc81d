"""The band folder as one set of outputs: names, the folder check, and the commit at the end.

Every file of a band run is written under a temporary name first and all of
them are committed as one set (:class:`sdrx.fileset.OutputSet`) only when the
whole run has succeeded (:func:`output_set`); an error or an interrupt removes
the temporaries and leaves the folder as it was, and a kill during the commit
is finished by the next run. The folder is marked as sdrx's with
:data:`MARKER`, a JSON list of the files it holds, so that ``--force`` may
replace an earlier band run (and remove the files it listed that the new
run does not write) but never a file sdrx did not make.
"""

from __future__ import annotations

import contextlib
import json
from pathlib import Path
from typing import Iterator

from ..errors import OutputError
from ..fileio import check_output, same_file

__all__ = ["MARKER", "station_name", "capture_folders", "check_band_dir", "output_set"]

MARKER = ".sdrx-band"


def station_name(tune_hz: float) -> str:
    """File stem of a station: its frequency in kHz ("1130k", "1130.5k").

    Examples
    --------
    >>> station_name(1130e3), station_name(1130.5e3), station_name(15.12e6)
    ('1130k', '1130.5k', '15120k')
    """
    return f"{tune_hz / 1e3:.10g}k"


def capture_folders(paths) -> list:
    """Folder name per capture: "" for a single capture, else the file's stem (made unique with -2, -3, ...).

    Examples
    --------
    >>> capture_folders(["a/night.sigmf-meta"]), capture_folders(["a/n1.wav", "b/n1.wav", "c/n2.sigmf-data"])
    ([''], ['n1', 'n1-2', 'n2'])
    """
    if len(paths) == 1:
        return [""]
    out, seen = [], set()
    for p in paths:
        name = Path(p).name
        for suffix in (".sigmf-meta", ".sigmf-data"):
            if name.endswith(suffix):
                name = name[: -len(suffix)]
                break
        else:
            name = Path(name).stem
        name = name or "capture"
        cand, k = name, 2
        while cand.lower() in seen:
            cand, k = f"{name}-{k}", k + 1
        seen.add(cand.lower())
        out.append(cand)
    return out


def _marker_files(d: Path):
    try:
        files = json.loads((d / MARKER).read_text(encoding="utf-8"))["files"]
    except (OSError, ValueError, KeyError, TypeError):
        return None
    if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        return None
    return set(files)


def check_band_dir(out_dir, names, inputs, *, force: bool = False) -> set:
    """Check ``-o DIR`` before any work; return the files an earlier band run listed there.

    Parameters
    ----------
    out_dir : str or Path
    names : iterable of str
        Relative paths this run will write.
    inputs : iterable of paths
        Files no output may be.
    force : bool
        Replace an earlier band run's files, or write beside files sdrx did not make.

    Raises
    ------
    OutputError
        A file in place of the folder, a missing parent, a non-empty folder
        without ``--force``, an output that would be an input or a folder.
    """
    d = Path(out_dir)
    if d.exists() and not d.is_dir():
        raise OutputError(f"-o {d}: is a file; give a folder for the band run")
    if not d.exists():
        parent = d.parent if str(d.parent) else Path(".")
        if not parent.is_dir():
            raise OutputError(f"-o {d}: folder {parent} does not exist")
        ours = set()
    else:
        entries = sorted(p.name for p in d.iterdir())
        ours = _marker_files(d)
        known = (ours or set()) | ({MARKER} if ours is not None else set())
        tops = {Path(n).parts[0] for n in known}
        foreign = [e for e in entries if e not in tops and e not in known]
        if foreign and not force:
            shown = ", ".join(foreign[:3]) + (", ..." if len(foreign) > 3 else "")
            raise OutputError(f"-o {d}: holds files not made by sdrx ({shown}); choose a new or empty folder, "
                              "or pass --force to write beside them")
        if entries and not force:
            raise OutputError(f"-o {d}: holds an earlier band run; pass --force to replace it")
        ours = ours or set()
    for name in names:
        target = d / name
        if target.is_dir():
            raise OutputError(f"-o {d}: {name} is a folder; sdrx would write a file of that name")
        for src in inputs:
            if src is not None and same_file(target, src):
                raise OutputError(f"-o {d}: {name} would overwrite an input; choose another folder")
    return ours


@contextlib.contextmanager
def output_set(out_dir, names, *, stale=(), streamed=()) -> Iterator[tuple]:
    """Temporary paths for the outputs; all committed as one set when the block ends without an error.

    Parameters
    ----------
    out_dir : Path
    names : sequence of str
        Relative paths (a folder per capture is made as needed).
    stale : iterable of str
        Files of an earlier band run that this one does not write: removed once the new set is in place.
    streamed : iterable of str
        Those of ``names`` that a writer joins to the set itself (the WAVs: a
        :class:`~sdrx.capture.wavio.WavStream` with ``outputs=``); no
        temporary is made for them here.

    Yields
    ------
    (dict, OutputSet)
        name -> temporary path beside its final path (the other names), and the set.

    Notes
    -----
    :class:`sdrx.fileset.OutputSet` with the marker as its head (renamed
    last): every file complete, then a journal, then the renames, so that a
    run killed at any moment leaves the old set or the new one (the next run
    finishes an interrupted commit from the journal). Folders this run made
    are removed again when it fails.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with output_set(d, ["a.txt", "sub/b.txt"]) as (tmp, _):
    ...     _ = tmp["a.txt"].write_text("1"); _ = tmp["sub/b.txt"].write_text("2")
    >>> sorted(str(p.relative_to(d)) for p in d.rglob("*.txt"))
    ['a.txt', 'sub/b.txt']
    """
    from ..fileset import OutputSet

    d = Path(out_dir)
    made = []
    if not d.exists():
        d.mkdir()
        made.append(d)
    head = d / MARKER if MARKER in names else None
    outputs = OutputSet(head, option="-o")
    try:
        tmp = {}
        for name in names:
            target = d / name
            if not target.parent.exists():
                target.parent.mkdir(parents=True)
                made.append(target.parent)
            check_output(target, force=True)
            if name not in streamed:
                tmp[name] = outputs.add(target)
        for name in sorted(set(stale) - set(names) - {MARKER}):
            parts = Path(name).parts
            if ".." not in parts and not Path(name).is_absolute():
                outputs.retire(d / name)
        yield tmp, outputs
        outputs.commit()
    except BaseException:
        outputs.abort()
        for folder in reversed(made):
            with contextlib.suppress(OSError):
                folder.rmdir()
        raise
    for name in stale:
        parts = Path(name).parts
        if len(parts) > 1 and name not in names:
            with contextlib.suppress(OSError):
                (d / name).parent.rmdir()     # a capture folder the new run no longer has
