"""Safe output files: temporary name in the target folder, renamed when complete.

Nothing is lost: an existing output is not replaced without ``force``, an
output may not be one of the inputs, and an interrupted write leaves no
partial file under the final name.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterable, Iterator

from .errors import OutputError

__all__ = ["check_output", "atomic_path", "same_file"]


def same_file(a, b) -> bool:
    """True when two paths name the same file (existing or not)."""
    pa, pb = Path(a), Path(b)
    try:
        if pa.exists() and pb.exists():
            return os.path.samefile(pa, pb)
    except OSError:
        pass
    return pa.resolve() == pb.resolve()


def check_output(path, *, inputs: Iterable = (), force: bool = False, option: str = "-o") -> Path:
    """Validate an output path before any work starts.

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
        If the output is one of the inputs, exists without ``force``, or its
        folder does not exist.
    """
    p = Path(path)
    for src in inputs:
        if src is not None and same_file(p, src):
            raise OutputError(f"{option} {p}: is one of the inputs; choose another output path")
    if p.exists() and not force:
        raise OutputError(f"{option} {p}: exists already; pass --force to replace it")
    if p.is_dir():
        raise OutputError(f"{option} {p}: is a folder, expected a file path")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise OutputError(f"{option} {p}: folder {parent} does not exist")
    return p


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
    p = Path(path)
    parent = p.parent if str(p.parent) else Path(".")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".partial", dir=parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        # mkstemp makes the file private (0600); give it the mode any new file gets here
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise
