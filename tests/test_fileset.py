"""The set-of-outputs mechanism (sdrx.fileset): order, abort, recovery, stale temporaries, full disks."""

import errno
import json
import os

import pytest

from helpers_cli import run
from helpers_kill import dead_pid
from sdrx import fileset
from sdrx.errors import OutputError
from sdrx.fileset import OutputSet, clean_stale, journal_path, recover
from test_cli_errors import one_line


def test_members_renamed_in_order_head_last(tmp_path, monkeypatch):
    order = []
    real = os.replace
    monkeypatch.setattr(os, "replace", lambda a, b: (order.append(os.path.basename(b)), real(a, b)))
    (tmp_path / "b.bin").write_bytes(b"old")
    with OutputSet(tmp_path / "head.json") as out:
        out.add(tmp_path / "head.json").write_text("{}")
        out.add(tmp_path / "a.bin").write_bytes(b"a")
        out.add(tmp_path / "b.bin").write_bytes(b"b")
    assert order == [".head.json.sdrx-commit", "a.bin", "b.bin", "head.json"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.bin", "b.bin", "head.json"]


def test_abort_leaves_the_old_set(tmp_path):
    (tmp_path / "x.wav").write_bytes(b"old")
    with pytest.raises(RuntimeError):
        with OutputSet(tmp_path / "x.wav") as out:
            out.add(tmp_path / "x.wav").write_bytes(b"new")
            raise RuntimeError("boom")
    assert [p.name for p in tmp_path.iterdir()] == ["x.wav"] and (tmp_path / "x.wav").read_bytes() == b"old"


def test_stale_temporaries_of_dead_runs_only_are_removed(tmp_path):
    dead, alive = dead_pid(), os.getppid()
    stale = tmp_path / f".a.wav.{dead}-0badf00d.partial"
    live = tmp_path / f".a.wav.{alive}-0badf00d.partial"
    legacy = tmp_path / ".a.wav.x7k2_q1.partial"        # made by an older sdrx (no process number)
    other = tmp_path / f".b.wav.{dead}-0badf00d.partial"
    for p in (stale, live, legacy, other):
        p.write_bytes(bytes(1000))
    assert sorted(p.name for p in clean_stale(tmp_path / "a.wav")) == sorted([stale.name, legacy.name])
    assert live.exists() and other.exists()


def test_recovery_finishes_an_interrupted_commit(tmp_path):
    """A journal written and the process gone before its renames: the next check of any member finishes it."""
    dead = dead_pid()
    (tmp_path / "x.sigmf-meta").write_text("old meta")
    (tmp_path / "x.sigmf-data").write_bytes(b"old data")
    tmp_data = tmp_path / f".x.sigmf-data.{dead}-00000001.partial"
    tmp_meta = tmp_path / f".x.sigmf-meta.{dead}-00000002.partial"
    tmp_data.write_bytes(b"new data")
    tmp_meta.write_text("new meta")
    journal_path(tmp_path / "x.sigmf-meta").write_text(json.dumps({
        "sdrx_commit": 1, "renames": [[tmp_data.name, "x.sigmf-data"], [tmp_meta.name, "x.sigmf-meta"]],
        "retire": [], "drop_head": True}))
    # cleaning the data file's own stale temporaries must not touch those the journal names
    assert clean_stale(tmp_path / "x.sigmf-data") == []
    assert recover(tmp_path / "x.sigmf-data")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.sigmf-data", "x.sigmf-meta"]
    assert (tmp_path / "x.sigmf-data").read_bytes() == b"new data"
    assert (tmp_path / "x.sigmf-meta").read_text() == "new meta"


def test_foreign_journal_is_refused(tmp_path):
    journal_path(tmp_path / "a.wav").write_text("not ours")
    with pytest.raises(OutputError, match="not a commit journal written by sdrx"):
        recover(tmp_path / "a.wav")


def test_long_names_keep_temporaries_within_255_bytes(tmp_path):
    name = "n" * 240 + ".wav"
    with OutputSet(tmp_path / name) as out:
        tmp = out.add(tmp_path / name)
        assert len(tmp.name) <= 255
        tmp.write_bytes(b"x")
    assert (tmp_path / name).read_bytes() == b"x"


@pytest.fixture(scope="module")
def capture(tmp_path_factory):
    from sdrx.synth import parse_scenario, synthesize

    d = tmp_path_factory.mktemp("fscap")
    sc = parse_scenario({"capture": {"kind": "iq", "rate": "240k", "center": "1M", "seconds": 1.3},
                         "station": [{"name": "A", "frequency": "1M", "level_dbfs": -20, "depth": 0.3}]})
    synthesize(sc, d / "c.sigmf-meta")
    return d / "c.sigmf-meta"


def test_full_disk_while_writing(capture, tmp_path, capsys, monkeypatch):
    """ENOSPC part-way: one line naming the file, no file under a final name, no temporary left."""
    from sdrx.capture import wavio

    class Full:
        """The temporary's file object, on a disk that fills after 3000 bytes."""

        def __init__(self, f):
            self.f = f

        def write(self, data):
            if self.f.tell() + len(memoryview(data).cast("B")) > 3000:
                raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
            return self.f.write(data)

        def __getattr__(self, k):
            return getattr(self.f, k)

    real_init = wavio.AtomicFile.__init__

    def init(self, path, outputs=None):
        real_init(self, path, outputs)
        self.file = Full(self.file)

    monkeypatch.setattr(wavio.AtomicFile, "__init__", init)
    out = tmp_path / "out"
    out.mkdir()
    rc, _, err = run(["receive", capture, "--tune", "1M", "-o", out / "a.wav", "--summary", out / "a.json"], capsys)
    one_line(rc, err, "a.wav: cannot write (No space left on device); nothing was left under that name")
    assert list(out.iterdir()) == []
    (tmp_path / "sc.toml").write_text('[capture]\nkind = "iq"\nrate = "240k"\ncenter = "1M"\nseconds = 0.2\n'
                                      '[[station]]\nname = "A"\nfrequency = "1M"\nlevel_dbfs = -20\n')
    rc, _, err = run(["synth", tmp_path / "sc.toml", "-o", out / "s.sigmf-meta"], capsys)
    one_line(rc, err, "s.sigmf-data: cannot write (No space left on device)")
    assert list(out.iterdir()) == []


def test_full_disk_in_a_folder_output(capture, tmp_path, capsys, monkeypatch):
    from pathlib import Path

    real = Path.write_bytes

    def write_bytes(self, data):
        if self.name.endswith(".partial") and ".index.html." in self.name:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, data)

    monkeypatch.setattr(Path, "write_bytes", write_bytes)
    rc, _, err = run(["compare", capture, "--tune", "1M", "wide", "narrow", "-o", tmp_path / "cmp", "--duration", "1"],
                     capsys)
    one_line(rc, err, "cannot write index.html (No space left on device)")
    assert list(tmp_path.iterdir()) == []          # not even the folder (it was made by this run)


def test_failed_summary_leaves_no_wav(capture, tmp_path, monkeypatch):
    """The summary is complete before anything is renamed: a summary that cannot be made leaves nothing."""
    import sdrx.run as run_mod

    def broken(obj):
        raise ValueError("Out of range float values are not JSON compliant")

    monkeypatch.setattr(run_mod, "json_text", broken)
    with pytest.raises(ValueError):
        run_mod.receive(capture, "1M", "medium", tmp_path / "a.wav", summary_path=tmp_path / "a.json",
                        duration_s=0.2)
    assert list(tmp_path.iterdir()) == []


def test_interrupted_temporaries_are_cleaned_by_the_next_run(capture, tmp_path, capsys):
    dead = dead_pid()
    junk = tmp_path / f".a.wav.{dead}-12345678.partial"
    junk.write_bytes(bytes(1 << 20))
    rc, out, err = run(["receive", capture, "--tune", "1M", "-o", tmp_path / "a.wav", "--duration", "0.2", "--quiet"],
                       capsys)
    assert rc == 0, err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav"]


def test_fileset_module_keeps_to_the_standard_library():
    """fileset is the base the writers and the future band command build on: no numpy, no sdrx layers above."""
    import ast
    import inspect

    tree = ast.parse(inspect.getsource(fileset))
    mods = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)} | \
           {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    assert mods <= {"__future__", "contextlib", "json", "os", "re", "secrets", "pathlib", "typing", "errors"}, mods


def test_a_commit_in_progress_in_another_process_is_left_alone(tmp_path):
    """Two records into one store at once: the second must not finish (race) the first one's renames."""
    tmp = tmp_path / f".m.json.{os.getppid()}-00000001.partial"
    tmp.write_text("new")
    journal_path(tmp_path / "m.json").write_text(json.dumps({
        "sdrx_commit": 1, "renames": [[tmp.name, "m.json"]], "retire": [], "pid": os.getppid()}))
    assert not recover(tmp_path / "m.json")
    assert tmp.exists() and not (tmp_path / "m.json").exists()
