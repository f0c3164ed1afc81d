"""Kill a command at every rename and unlink of its commit, and check what a kill -9 would leave.

In process: ``os.replace`` and ``os.unlink`` are wrapped; at the k-th call the
output folders are photographed and the run is stopped with an exception that
nothing in sdrx catches. Once the exception has unwound (running sdrx's
clean-up handlers, which a real kill -9 would not run), the folders are put
back exactly as photographed: the disk as a SIGKILL at that moment leaves it.
The temporaries are named with the process number of a process that has
exited, so the next run treats them as a killed run's.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

from sdrx import fileset

__all__ = ["Killed", "photograph", "check_state", "count_points", "run_killed", "dead_pid", "own_files", "final_files"]


class Killed(BaseException):
    """Stands for SIGKILL: derives from BaseException so that no handler in sdrx catches it."""


def dead_pid() -> int:
    """The process number of a process that has exited."""
    p = subprocess.Popen(["true"])
    p.wait()
    return p.pid


def photograph(folders) -> dict:
    """{path: bytes} of every file under the folders ({path: None} for the folders themselves)."""
    snap = {}
    for d in folders:
        d = Path(d)
        if d.is_dir():
            snap[d] = None
            for p in sorted(d.rglob("*")):
                snap[p] = p.read_bytes() if p.is_file() else None
    return snap


def _restore(folders, snap: dict) -> None:
    for d in folders:
        if Path(d).exists():
            shutil.rmtree(d)
    for p in sorted(snap, key=lambda q: len(q.parts)):
        if snap[p] is None:
            p.mkdir(parents=True, exist_ok=True)
        else:
            p.write_bytes(snap[p])


def check_state(folder, old: dict, new: dict, head: str) -> str:
    """Check a folder as a kill left it; returns "old", "new" or "incomplete".

    Every file under a final name is a complete old or new version; a head
    that is present vouches for its set (an old head: no member replaced yet;
    a new head: every new member in place); without the head the journal of
    the commit is there (the set is visibly incomplete and the next run
    finishes it).
    """
    have = final_files(folder)
    for name, data in have.items():
        assert data in (old.get(name), new.get(name)), f"{name}: neither the old nor the new file"
    if head in have and have[head] == new[head]:
        for name, data in new.items():
            assert have.get(name) == data, f"new {head} but {name} is not the new one"
        return "new"
    if head in have:
        for name, data in old.items():
            assert have.get(name) == data, f"old {head} but {name} is not the old one"
        return "old"
    assert not old or fileset.journal_path(Path(folder) / head).is_file(), f"no {head} and no journal"
    return "incomplete"


def _wrap(monkeypatch, on_call):
    real_replace, real_unlink = os.replace, os.unlink

    def replace(src, dst, *a, **kw):
        on_call("replace", src, dst)
        return real_replace(src, dst, *a, **kw)

    def unlink(path, *a, **kw):
        on_call("unlink", path, None)
        return real_unlink(path, *a, **kw)

    monkeypatch.setattr(os, "replace", replace)
    monkeypatch.setattr(os, "unlink", unlink)


def count_points(action, monkeypatch, folders) -> int:
    """Run ``action`` once with the wrappers in place; return the number of renames and unlinks
    under the folders (the kill points)."""
    calls = []
    folders = [Path(d).resolve() for d in folders]

    def on_call(kind, a, b):
        if _inside(a, folders):
            calls.append((kind, a, b))

    with monkeypatch.context() as m:
        _wrap(m, on_call)
        action()
    return len(calls)


def _inside(path, folders) -> bool:
    p = Path(os.path.abspath(path))
    return any(p == d or d in p.parents for d in folders)


def run_killed(action, k: int, monkeypatch, folders, pid: int) -> list:
    """Run ``action`` and stop it at the k-th rename/unlink (0-based) under the folders; leave the
    folders as a kill -9 at that moment would. Returns the call it was stopped at."""
    folders = [Path(d).resolve() for d in folders]
    seen = []
    snap = {}

    def on_call(kind, a, b):
        if not _inside(a, folders):
            return
        if len(seen) == k:
            seen.append((kind, a, b))
            snap.update(photograph(folders))
            raise Killed()
        seen.append((kind, a, b))

    with monkeypatch.context() as m:
        m.setattr(fileset.os, "getpid", lambda: pid)
        _wrap(m, on_call)
        try:
            action()
        except Killed:
            pass
        else:
            raise AssertionError(f"the run finished before kill point {k}")
    _restore(folders, snap)
    return seen[-1]


def own_files(folder) -> list:
    """Names of sdrx temporaries and journals in a folder."""
    return sorted(p.name for p in Path(folder).iterdir() if fileset.is_own_temporary(p.name))


def final_files(folder) -> dict:
    """{name: bytes} of the files in a folder that are not sdrx temporaries or journals."""
    return {p.name: p.read_bytes() for p in sorted(Path(folder).iterdir())
            if p.is_file() and not fileset.is_own_temporary(p.name)}
