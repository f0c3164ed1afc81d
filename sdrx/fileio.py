"""Safe output files: checked before any work, written under a temporary name, renamed when complete.

Nothing is lost: an existing output is not replaced without ``force``, an
output may not be one of the inputs, a large output needs the free space
first, and an interrupted write leaves no partial file under the final name.
Several files that belong together are committed as one set by
:class:`sdrx.fileset.OutputSet`; :func:`atomic_path` is the set of one file.
"""

from __future__ import annotations

import contextlib
import os
import shutil
from pathlib import Path
from typing import Iterable, Iterator

from .errors import OutputError
from .fileset import OutputSet, recover

__all__ = ["check_output", "atomic_path", "member_path", "write_folder", "same_file", "check_free_space", "format_bytes",
           "SPACE_MARGIN"]

#: free space kept on top of what an output needs (the file system's own needs, logs, ...)
SPACE_MARGIN = 64 << 20


def same_file(a, b) -> bool:
    """True when two paths name the same file (existing or not)."""
    pa, pb = Path(a), Path(b)
    try:
        if pa.exists() and pb.exists():
            return os.path.samefile(pa, pb)
        return pa.resolve() == pb.resolve()
    except OSError:
        return os.path.abspath(pa) == os.path.abspath(pb)


def check_output(path, *, inputs: Iterable = (), force: bool = False, option: str = "-o") -> Path:
    """Validate an output path before any work starts.

    An interrupted earlier write of the same output is finished first, and
    the temporaries of killed runs are removed (:func:`sdrx.fileset.recover`).

    Parameters
    ----------
    path : str or Path
        The final output path.
    inputs : iterable of paths
        Input files the output must not overwrite.
    force : bool
        Allow replacing an existing output.
    option : str
        The option the path came from, for the message.

    Returns
    -------
    Path

    Raises
    ------
    OutputError
        If the output is one of the inputs, exists without ``force``, is a
        folder, its folder does not exist, or its name is too long.
    """
    p = Path(path)
    shown = str(p) if len(str(p)) <= 80 else str(p)[:77] + "..."
    if str(path) == "" or p.name in ("", ".", ".."):
        raise OutputError(f"{option} {str(path)!r}: give a file name")
    try:
        if len(os.fsencode(p.name)) > 250:
            raise OutputError(f"{option} {shown}: file name longer than 250 bytes")
        for src in inputs:
            if src is not None and same_file(p, src):
                raise OutputError(f"{option} {p}: is one of the inputs; choose another output path")
        parent = p.parent if str(p.parent) else Path(".")
        if not parent.is_dir():
            raise OutputError(f"{option} {p}: folder {parent} does not exist")
        if p.is_dir():
            raise OutputError(f"{option} {p}: is a folder, expected a file path")
        recover(p)
        if p.exists() and not force:
            raise OutputError(f"{option} {p}: exists already; pass --force to replace it")
    except OSError as exc:
        raise OutputError(f"{option} {shown}: {exc.strerror}") from None
    return p


def format_bytes(n: float) -> str:
    """Bytes in a short human form.

    Examples
    --------
    >>> format_bytes(480e9), format_bytes(1536)
    ('480 GB', '1.5 kB')
    """
    for unit, scale in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{int(n)} bytes"


def check_free_space(path, nbytes: float, *, option: str = "-o") -> None:
    """Refuse an output of about ``nbytes`` when its folder's file system has not that much free.

    The old file (with ``--force``) stays until the new one is complete, so
    the new size is needed in full; :data:`SPACE_MARGIN` is kept on top.

    Raises
    ------
    OutputError
        Naming the output, the size needed and the space free.

    Examples
    --------
    >>> check_free_space(".", 1000)   # a kilobyte fits
    """
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    try:
        free = shutil.disk_usage(folder).free
    except OSError:
        return
    if nbytes + SPACE_MARGIN > free:
        raise OutputError(f"{option} {p}: needs about {format_bytes(nbytes)}, but only {format_bytes(free)} "
                          f"is free on {folder}; free some space or write elsewhere")


@contextlib.contextmanager
def atomic_path(path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; rename it onto ``path`` on success.

    On any exception (including KeyboardInterrupt) the temporary file is
    removed and ``path`` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_path(d / "a.txt") as tmp:
    ...     _ = tmp.write_text("hello")
    >>> (d / "a.txt").read_text()
    'hello'
    """
    with OutputSet(path) as out:
        yield out.add(path)


@contextlib.contextmanager
def member_path(path, outputs=None) -> Iterator[Path]:
    """The temporary to write ``path`` into: a member of ``outputs`` (renamed with the set), or a set of one.

    On an exception the whole set is aborted.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with OutputSet(d / "b.txt") as s:
    ...     with member_path(d / "a.txt", s) as tmp:
    ...         _ = tmp.write_text("a")
    ...     with member_path(d / "b.txt", s) as tmp:
    ...         _ = tmp.write_text("b")
    >>> sorted(p.name for p in d.iterdir())
    ['a.txt', 'b.txt']
    """
    if outputs is None:
        with atomic_path(path) as tmp:
            yield tmp
        return
    try:
        yield outputs.add(path)
    except BaseException:
        outputs.abort()
        raise


def write_folder(out, files: dict, *, head: str, retire=(), option: str = "-o") -> list:
    """Write small files (name -> bytes) into the folder ``out`` as one set, ``head`` renamed last.

    The folder is created when missing (its parent must exist; it is
    removed again when the write fails). ``retire`` lists files of an earlier
    run to remove once the new set is in place. The free space for every file
    is checked first. Large files are better streamed into an
    :class:`~sdrx.fileset.OutputSet` by a writer (``AudioWriter(...,
    outputs=set)``).

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputError
        No space, or a write or rename the file system refuses.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()) / "page"
    >>> [p.name for p in write_folder(d, {"a.png": b"x", "index.html": b"<p>"}, head="index.html")]
    ['a.png', 'index.html']
    """
    d = Path(out)
    check_free_space(d / head, sum(len(b) for b in files.values()), option=option)
    created = not d.exists()
    try:
        d.mkdir(exist_ok=True)
        with OutputSet(d / head, option=option) as outputs:
            for name, data in files.items():
                tmp = outputs.add(d / name)
                try:
                    tmp.write_bytes(data)
                except OSError as exc:
                    raise OutputError(f"{option} {d}: cannot write {name} ({exc.strerror})") from None
            for p in retire:
                outputs.retire(p)
    except OSError as exc:
        if created:
            with contextlib.suppress(OSError):
                d.rmdir()
        raise OutputError(f"{option} {d}: cannot write ({exc.strerror})") from None
    except BaseException:
        if created:
            with contextlib.suppress(OSError):
                d.rmdir()
        raise
    return [d / name for name in files]
