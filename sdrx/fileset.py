"""Outputs committed as a set: every file complete, then renamed in a recoverable order.

A command that writes several files (a SigMF pair and its truth sidecar; a WAV
and its run summary; a report or comparison folder) must leave either the old
set or the new set, never a mixture, whatever moment it is killed at. One
:class:`OutputSet` does that for every such command:

1. Each member is written under a temporary name beside its final path,
   ``.NAME.<pid>-<token>.partial`` (same folder, so the rename is atomic).
2. :meth:`OutputSet.commit`, once every member is complete: flush each
   temporary to disk; write the *journal* ``.HEAD.sdrx-commit`` beside the
   head file (the renames still to do, and the files of the old set to
   retire); remove the old head when a member is about to replace an old
   file, so that the old set no longer looks complete; rename the members;
   rename the head last; remove the retired files; remove the journal.
3. Recovery (:func:`recover`, run by :func:`sdrx.fileio.check_output`, so by
   the next run that writes any file of the set in the head's folder): an
   interrupted commit is finished from its journal (every temporary it lists
   was complete before the journal was written, so rolling forward is always
   safe), then the temporaries of runs that were killed before they
   committed are removed (those whose process no longer exists and that no
   journal names).

The *head* is the file a reader opens first: the ``.sigmf-meta`` of a SigMF
pair, the WAV named with ``-o``, a folder's marker or page. While a head is
absent the set is visibly incomplete; once it is present, every member is the
new one. A set of one file needs no journal: a single rename is atomic.

Examples
--------
>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> with OutputSet(d / "a.json") as out:
...     _ = out.add(d / "a.wav").write_bytes(b"RIFF")
...     _ = out.add(d / "a.json").write_text("{}")
>>> sorted(p.name for p in d.iterdir())
['a.json', 'a.wav']
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import secrets
from pathlib import Path
from typing import List, Optional, Tuple

from .errors import OutputError

__all__ = ["OutputSet", "recover", "clean_stale", "clean_folder", "journal_path", "is_own_temporary", "TEMP_SUFFIX",
           "JOURNAL_SUFFIX"]

TEMP_SUFFIX = ".partial"
JOURNAL_SUFFIX = ".sdrx-commit"
JOURNAL_FORMAT = 1
# longest part of the final name kept in a temporary's name (file names are limited to 255 bytes)
_NAME_KEEP = 200
_TEMP_RE = re.compile(r"^\.(?P<name>.+)\.(?P<pid>\d+)-(?P<token>[0-9a-f]{8})\.partial$")


def _prefix(name: str) -> str:
    """The final name as kept in a temporary's name: cut to 200 bytes (and marked ``~``) when longer."""
    raw = name.encode("utf-8", "surrogateescape")
    if len(raw) <= _NAME_KEEP:
        return name
    return raw[:_NAME_KEEP].decode("utf-8", "ignore") + "~"


def journal_path(head) -> Path:
    """The journal of an interrupted commit whose head is ``head``: ``.HEAD.sdrx-commit`` beside it.

    Examples
    --------
    >>> journal_path("out/a.sigmf-meta").as_posix()
    'out/.a.sigmf-meta.sdrx-commit'
    """
    p = Path(head)
    return p.with_name(f".{_prefix(p.name)}{JOURNAL_SUFFIX}")


def is_own_temporary(name: str) -> bool:
    """True for the name of an sdrx temporary or journal (``.X.<pid>-<token>.partial``, ``.X.sdrx-commit``).

    Examples
    --------
    >>> is_own_temporary(".a.wav.123-0badf00d.partial"), is_own_temporary("a.wav")
    (True, False)
    """
    return bool(_TEMP_RE.match(name)) or (name.startswith(".") and name.endswith(JOURNAL_SUFFIX))


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True          # exists (another user's) or cannot tell: keep the file
    return True


def _fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:          # some file systems cannot sync a folder
        pass
    finally:
        os.close(fd)


def _parent(p: Path) -> Path:
    return p.parent if str(p.parent) else Path(".")


def _journal_refs(folder: Path) -> set:
    """Temporaries named by any journal in ``folder`` (they belong to an unfinished commit)."""
    refs = set()
    for j in _journals(folder):
        doc = _read_journal(j, strict=False)
        if doc is None:
            continue
        for tmp, _final in doc["renames"]:
            refs.add(os.path.normpath(os.path.join(folder, tmp)))
    return refs


def clean_stale(path) -> List[Path]:
    """Remove the temporaries of ``path`` left by runs that were killed before committing.

    A temporary ``.NAME.<pid>-<token>.partial`` is stale when its process no
    longer exists and no journal names it; one of the older form (no process
    number) is always stale. Returns the files removed.
    """
    p = Path(path)
    folder = _parent(p)
    prefix = _prefix(p.name)
    removed = []
    try:
        candidates = list(folder.glob(f".{glob_escape(prefix)}.*{TEMP_SUFFIX}"))
    except OSError:
        return removed
    protected = None
    for c in candidates:
        m = _TEMP_RE.match(c.name)
        if m is not None:
            if m.group("name") not in (prefix, prefix + JOURNAL_SUFFIX) or _pid_alive(int(m.group("pid"))):
                continue
        elif not c.name.startswith(f".{prefix}."):
            continue
        if protected is None:
            protected = _journal_refs(folder)
        if os.path.normpath(str(c)) in protected:
            continue
        with contextlib.suppress(FileNotFoundError, IsADirectoryError):
            c.unlink()
            removed.append(c)
    return removed


def clean_folder(folder) -> List[Path]:
    """Remove every stale temporary in a folder sdrx owns (a report or comparison folder).

    As :func:`clean_stale`, for every name: temporaries whose process no
    longer exists and that no journal names. Returns the files removed.
    """
    d = Path(folder)
    removed = []
    try:
        names = sorted(p.name for p in d.iterdir() if _TEMP_RE.match(p.name))
    except OSError:
        return removed
    for prefix in sorted({_TEMP_RE.match(n).group("name") for n in names}):
        removed += clean_stale(d / prefix)
    return removed


def glob_escape(text: str) -> str:
    """``text`` with glob metacharacters escaped (``[`` ``]`` ``*`` ``?``)."""
    return re.sub(r"([\[\]*?])", r"[\1]", text)


def _read_journal(j: Path, strict: bool = True) -> Optional[dict]:
    try:
        doc = json.loads(j.read_text(encoding="utf-8"))
        ok = (isinstance(doc, dict) and doc.get("sdrx_commit") == JOURNAL_FORMAT
              and isinstance(doc.get("renames"), list) and isinstance(doc.get("retire"), list)
              and all(isinstance(r, list) and len(r) == 2 and all(isinstance(x, str) for x in r)
                      for r in doc["renames"])
              and all(isinstance(x, str) for x in doc["retire"]))
    except (OSError, ValueError):
        ok = False
    if ok:
        return doc
    if strict:
        raise OutputError(f"{j}: not a commit journal written by sdrx; remove it by hand if you know where it came from")
    return None


def recover(path) -> bool:
    """Finish an interrupted commit that ``path`` belongs to, then remove its stale temporaries.

    Every journal in the folder of ``path`` whose set holds ``path`` (as its
    head or as a member) is rolled forward, so checking any output of a set
    in its head's folder finishes the whole set.

    Returns
    -------
    bool
        True when an interrupted commit was found and finished.

    Raises
    ------
    OutputError
        A journal is unreadable, or a rename it asks for fails.
    """
    p = Path(path)
    folder = _parent(p)
    target = os.path.normpath(os.path.abspath(p))
    finished = False
    own = journal_path(p)
    for j in _journals(folder):
        if j == own:
            doc = _read_journal(j)
            if _in_progress(doc):
                continue
        else:
            doc = _read_journal(j, strict=False)
            if doc is None:
                continue
            finals = {os.path.normpath(os.path.abspath(os.path.join(folder, f))) for _t, f in doc["renames"]}
            if target not in finals or _in_progress(doc):
                continue
        _roll_forward(j, doc)
        finished = True
    clean_stale(p)
    return finished


def _in_progress(doc: dict) -> bool:
    """A journal whose process still runs belongs to a commit in progress (a few renames away): not ours to finish."""
    pid = doc.get("pid")
    return isinstance(pid, int) and not isinstance(pid, bool) and pid != os.getpid() and _pid_alive(pid)


def _journals(folder: Path) -> list:
    try:
        return sorted(j for j in folder.iterdir() if j.name.startswith(".") and j.name.endswith(JOURNAL_SUFFIX)
                      and j.is_file())
    except OSError:
        return []


def _roll_forward(j: Path, doc: dict) -> None:
    folder = _parent(j)
    pairs = [(Path(os.path.join(folder, t)), Path(os.path.join(folder, f))) for t, f in doc["renames"]]
    retire = [Path(os.path.join(folder, r)) for r in doc["retire"]]
    try:
        _do_renames(pairs, drop_head=bool(doc.get("drop_head", False)))
        for r in retire:
            with contextlib.suppress(FileNotFoundError, IsADirectoryError):
                r.unlink()
        for d in {_parent(f) for _t, f in pairs}:
            _fsync_dir(d)
        j.unlink()
    except OSError as exc:
        raise OutputError(f"{pairs[-1][1] if pairs else j}: cannot finish writing the set of files "
                          f"({exc.strerror}); its journal {j} is kept for the next run") from None


def _do_renames(pairs: List[Tuple[Path, Path]], drop_head: bool) -> None:
    """Rename members, the head (the last pair) last; drop the old head first when asked."""
    head_tmp, head = pairs[-1]
    pending_members = [(t, f) for t, f in pairs[:-1] if t.exists()]
    if drop_head and pending_members and head_tmp.exists():
        with contextlib.suppress(FileNotFoundError):
            head.unlink()
    for t, f in pending_members:
        os.replace(t, f)
    if head_tmp.exists():
        os.replace(head_tmp, head)


class OutputSet:
    """Files written under temporary names and committed together (see the module notes).

    Parameters
    ----------
    head : str or Path, optional
        The file renamed last (a reader opens it first). Default: the last
        member added.
    option : str
        Option or argument that named the outputs, for messages.

    Notes
    -----
    Use as a context manager (commit on a normal exit, abort on an
    exception) or call :meth:`commit` / :meth:`abort`. A member may be added
    at any time before the commit; writing it is the caller's business (the
    temporary exists, empty, when :meth:`add` returns). Cost: one fsync per
    member and one small journal file for sets of two or more.
    """

    def __init__(self, head=None, *, option: str = "-o"):
        self.head = None if head is None else Path(head)
        self.option = option
        self._members: List[Tuple[Path, Path]] = []   # (final, temporary)
        self._retire: List[Path] = []
        self.state = "open"

    # -- building -------------------------------------------------------------------
    def add(self, path) -> Path:
        """Reserve the temporary of a member (created empty); returns its path."""
        if self.state != "open":
            raise OutputError(f"{self.option} {path}: the set of outputs is already {self.state}")
        p = Path(path)
        if any(f == p for f, _t in self._members):
            raise OutputError(f"{self.option} {p}: named twice among the outputs")
        tmp = self._create_temp(p)
        self._members.append((p, tmp))
        return tmp

    def _create_temp(self, p: Path) -> Path:
        folder = _parent(p)
        for _ in range(16):
            tmp = folder / f".{_prefix(p.name)}.{os.getpid()}-{secrets.token_hex(4)}{TEMP_SUFFIX}"
            try:
                fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
            except FileExistsError:
                continue
            except OSError as exc:
                raise OutputError(f"{self.option} {p}: cannot create a file in {folder} ({exc.strerror})") from None
            os.close(fd)
            return tmp
        raise OutputError(f"{self.option} {p}: cannot create a temporary file in {folder}")  # pragma: no cover

    def temporary(self, path) -> Path:
        """The temporary of a member added earlier."""
        p = Path(path)
        for f, t in self._members:
            if f == p:
                return t
        raise KeyError(str(p))

    def retire(self, path) -> None:
        """Remove ``path`` (a file of the old set that the new one does not hold) after the head is renamed."""
        p = Path(path)
        if p not in self._retire and all(f != p for f, _t in self._members):
            self._retire.append(p)

    @property
    def members(self) -> list:
        """Final paths of the members, in the order they are renamed (the head last)."""
        return [f for f, _t in self._ordered()]

    def _ordered(self) -> List[Tuple[Path, Path]]:
        head = self.head if self.head is not None else (self._members[-1][0] if self._members else None)
        rest = [(f, t) for f, t in self._members if f != head]
        last = [(f, t) for f, t in self._members if f == head]
        return rest + last

    # -- committing ------------------------------------------------------------------
    def commit(self) -> List[Path]:
        """Rename every member into place, the head last; returns the final paths.

        Raises
        ------
        OutputError
            A temporary is missing, or the file system refuses a write or a
            rename (the message names the file; an interrupted rename is
            finished by the next run from the journal).
        """
        if self.state != "open":
            if self.state == "committed":
                return self.members
            raise OutputError(f"{self.option}: the set of outputs was {self.state}")
        ordered = self._ordered()
        if not ordered and not self._retire:
            self.state = "committed"
            return []
        if ordered and self.head is not None and all(f != self.head for f, _t in ordered):
            raise OutputError(f"{self.option} {self.head}: the head of the set was never written")
        try:
            for f, t in ordered:
                _fsync_file(t)
        except FileNotFoundError as exc:
            self.abort()
            raise OutputError(f"{self.option}: temporary file {exc.filename} vanished before the commit") from None
        except OSError as exc:
            self.abort()
            raise OutputError(f"{self.option}: cannot write {exc.filename} ({exc.strerror})") from None
        pairs = [(t, f) for f, t in ordered]
        if not pairs:
            self._retire_files()
            self.state = "committed"
            return []
        drop_head = any(f.exists() for _t, f in pairs[:-1])
        if len(pairs) == 1 and not self._retire:
            try:
                _do_renames(pairs, drop_head=False)
            except OSError as exc:
                self.abort()
                raise OutputError(f"{self.option} {pairs[0][1]}: cannot rename into place ({exc.strerror})") from None
            _fsync_dir(_parent(pairs[0][1]))
            self.state = "committed"
            return self.members
        j = journal_path(pairs[-1][1])
        doc = self._write_journal(j, pairs, drop_head)
        self.state = "committed"          # from here on the set rolls forward, never back
        _roll_forward(j, doc)
        return self.members

    def _retire_files(self) -> None:
        try:
            for r in self._retire:
                with contextlib.suppress(FileNotFoundError, IsADirectoryError):
                    r.unlink()
        except OSError as exc:
            raise OutputError(f"{self.option} {exc.filename}: cannot remove ({exc.strerror})") from None

    def _write_journal(self, j: Path, pairs, drop_head: bool) -> dict:
        folder = _parent(j)
        doc = {
            "sdrx_commit": JOURNAL_FORMAT,
            "note": "renames sdrx still has to do to finish writing a set of files; the next run finishes them",
            "renames": [[os.path.relpath(t, folder), os.path.relpath(f, folder)] for t, f in pairs],
            "retire": [os.path.relpath(r, folder) for r in self._retire],
            "drop_head": drop_head,
            "pid": os.getpid(),
        }
        tmp = folder / f"{j.name}.{os.getpid()}-{secrets.token_hex(4)}{TEMP_SUFFIX}"
        try:
            with open(tmp, "w", encoding="utf-8") as fh:
                fh.write(json.dumps(doc, indent=1) + "\n")
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, j)
            _fsync_dir(folder)
        except OSError as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            self.abort()
            raise OutputError(f"{self.option} {pairs[-1][1]}: cannot write its commit journal in {folder} "
                              f"({exc.strerror})") from None
        return doc

    def abort(self) -> None:
        """Remove every temporary; the final paths are left as they were (no effect once committed)."""
        if self.state != "open":
            return
        self.state = "aborted"
        for _f, t in self._members:
            with contextlib.suppress(OSError):
                t.unlink()

    def __enter__(self) -> "OutputSet":
        return self

    def __exit__(self, exc_type, exc, tb) -> bool:
        if exc_type is None:
            self.commit()
        else:
            self.abort()
        return False
