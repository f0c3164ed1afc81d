"""Every multi-file output killed at every rename and unlink of its commit (see helpers_kill.py).

For each kill point: every file under a final name is a complete old or new
version, a head that is present vouches for its set, and the next run of the
same output (here: the same command again) finishes or replaces the set, with
no temporary or journal left behind. One real SIGKILL in a child process
checks that the in-process simulation is faithful.
"""

import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from helpers_cli import run
from helpers_kill import check_state, count_points, dead_pid, final_files, own_files, run_killed
from sdrx import fileset

SCENARIO = """title = "kill test (invented)"
[capture]
kind = "iq"
rate = "240k"
center = "1M"
datatype = "ci16_le"
seconds = {seconds}
seed = {seed}
noise_dbfs_per_hz = -120
[[station]]
name = "Alpha"
frequency = "1M"
level_dbfs = -20
depth = 0.3
[station.program]
kind = "tone"
frequency = "1k"
"""


@pytest.fixture(scope="module")
def capture(tmp_path_factory):
    from sdrx.synth import synthesize

    d = tmp_path_factory.mktemp("killcap")
    (d / "sc.toml").write_text(SCENARIO.format(seconds=1.3, seed=1))
    synthesize(d / "sc.toml", d / "cap.sigmf-meta")
    return d / "cap.sigmf-meta"


def _cli(capsys, args):
    rc, out, err = run(args, capsys)
    assert rc == 0, err
    return out


def _restore(folder, files: dict) -> None:
    for p in Path(folder).iterdir():
        p.unlink()
    for name, data in files.items():
        (Path(folder) / name).write_bytes(data)


def _recover(folder, names) -> None:
    """What the next run of the same output does before any work (sdrx.fileio.check_output)."""
    for name in sorted(names):
        fileset.recover(Path(folder) / name)
    fileset.clean_folder(folder)


def _every_kill(capsys, monkeypatch, folder, head, old_args, new_args):
    """Old set in ``folder``; the new command killed at every rename and unlink of its commit.

    At each point: the state is checked; the recovery the next run does first leaves exactly the old
    or exactly the new set and no temporaries; and (at the first point of each kind of state) the
    next run itself succeeds and leaves the new set.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    if old_args:
        _cli(capsys, old_args)
    old = final_files(folder)
    n = count_points(lambda: _cli(capsys, new_args), monkeypatch, [folder])
    new = final_files(folder)
    assert new != old and n >= 2
    states, rerun = [], set()
    for k in range(n):
        _restore(folder, old)
        run_killed(lambda: run(new_args, capsys), k, monkeypatch, [folder], dead_pid())
        state = check_state(folder, old, new, head)
        states.append(state)
        snap = {p.name: p.read_bytes() for p in folder.iterdir()}
        _recover(folder, set(old) | set(new))
        assert final_files(folder) in (old, new), f"kill point {k}: recovery left a mixture"
        assert own_files(folder) == [], f"kill point {k}"
        if state not in rerun:
            rerun.add(state)
            _restore(folder, snap)
            _cli(capsys, new_args)
            assert final_files(folder) == new and own_files(folder) == [], f"kill point {k}"
    return states


def test_synth_sigmf_pair_and_truth(tmp_path, capsys, monkeypatch):
    d = tmp_path / "out"
    (tmp_path / "a.toml").write_text(SCENARIO.format(seconds=0.05, seed=1))
    (tmp_path / "b.toml").write_text(SCENARIO.format(seconds=0.05, seed=2))
    out = d / "cap.sigmf-meta"
    states = _every_kill(capsys, monkeypatch, d, "cap.sigmf-meta",
                         ["synth", tmp_path / "a.toml", "-o", out, "--quiet"],
                         ["synth", tmp_path / "b.toml", "-o", out, "--quiet", "--force"])
    # journal, old head removed, data, truth, head, journal removed: all three states occur
    assert {"old", "incomplete", "new"} <= set(states)


def test_synth_wav_and_truth(tmp_path, capsys, monkeypatch):
    d = tmp_path / "out"
    (tmp_path / "a.toml").write_text(SCENARIO.format(seconds=0.05, seed=1))
    (tmp_path / "b.toml").write_text(SCENARIO.format(seconds=0.05, seed=2))
    _every_kill(capsys, monkeypatch, d, "cap.wav",
                ["synth", tmp_path / "a.toml", "-o", d / "cap.wav", "--quiet"],
                ["synth", tmp_path / "b.toml", "-o", d / "cap.wav", "--quiet", "--force"])


def test_receive_wav_and_summary(capture, tmp_path, capsys, monkeypatch):
    d = tmp_path / "out"
    common = [capture, "-o", d / "a.wav", "--summary", d / "a.json", "--duration", "0.3", "--quiet"]
    _every_kill(capsys, monkeypatch, d, "a.wav",
                ["receive", *common, "--tune", "1M"],
                ["receive", *common, "--tune", "1M", "--chain", "narrow", "--force"])


def test_compare_folder(capture, tmp_path, capsys, monkeypatch):
    d = tmp_path / "cmp"
    common = [capture, "--tune", "1M", "-o", d, "--duration", "1", "--quiet"]
    states = _every_kill(capsys, monkeypatch, d, ".sdrx-compare",
                         ["compare", *common, "wide", "narrow"],
                         ["compare", *common, "wide", "medium", "--force"])
    assert "incomplete" in states
    assert "narrow.wav" not in final_files(d)        # the earlier comparison's own file is retired


def test_report_folder(capture, tmp_path, capsys, monkeypatch):
    # the figures are the same in every run: draw them once (the CLI, the folder check and the
    # commit still run in full each time)
    from sdrx.report import build

    real, cache = build.build_report, {}

    def cached(chain, tune, **kw):
        key = (str(chain), str(tune), str(kw.get("capture")))
        if key not in cache:
            cache[key] = real(chain, tune, **kw)
        return cache[key]

    monkeypatch.setattr(build, "build_report", cached)
    d = tmp_path / "rep"
    _every_kill(capsys, monkeypatch, d, "report.html",
                ["report", "medium", "--tune", "1M", "-o", d, "--no-measure", "--quiet",
                 "--capture", capture, "--duration", "0.3"],
                ["report", "wide", "--tune", "1M", "-o", d, "--no-measure", "--quiet", "--force"])
    assert "spectrum.png" not in final_files(d)      # the earlier report's capture figure is retired


def test_refs_store(capture, tmp_path, capsys, monkeypatch):
    cases = tmp_path / "cases.toml"
    text = '[[case]]\nname = "k"\ncapture = "{cap}"\ntune = "1M"\nchain = "{chain}"\nduration = 0.3\n'
    store = tmp_path / "store"
    cases.write_text(text.format(cap=capture, chain="medium"))
    _cli(capsys, ["refs", "record", cases, "--store", store, "--quiet"])
    old = final_files(store)
    cases.write_text(text.format(cap=capture, chain="narrow"))
    args = ["refs", "record", cases, "--store", store, "--update", "--quiet"]
    n = count_points(lambda: _cli(capsys, args), monkeypatch, [store])
    new = final_files(store)
    for k in range(n):
        _restore(store, old)
        run_killed(lambda: run(args, capsys), k, monkeypatch, [store], dead_pid())
        # the manifest is never absent and always names WAVs that are there and whole
        manifest = json.loads((store / "sdrx-refs.json").read_text())
        wav = manifest["cases"]["k"]["audio"]["file"]
        assert final_files(store)[wav] in (old.get(wav), new.get(wav))
        check_state(store, old, new, "sdrx-refs.json")
        _cli(capsys, args)
        assert final_files(store) == new and own_files(store) == []


def test_refs_failures_folder(capture, tmp_path, capsys, monkeypatch):
    cases = tmp_path / "cases.toml"
    text = ('[[case]]\nname = "{name}"\ncapture = "{cap}"\ntune = "1M"\nchain = "{chain}"\nduration = 0.3\n'
            'tolerance = "exact"\n')
    store, fail = tmp_path / "store", tmp_path / "fail"
    both = lambda a, b: text.format(name="one", cap=capture, chain=a) + text.format(name="two", cap=capture, chain=b)
    cases.write_text(both("medium", "medium"))
    _cli(capsys, ["refs", "record", cases, "--store", store, "--quiet"])
    fail.mkdir()
    # old failures: case one fails; new: case two fails (one's files must go)
    cases.write_text(both("narrow", "medium"))
    old_args = ["refs", "verify", cases, "--store", store, "--failures", fail, "--quiet"]
    assert run(old_args, capsys)[0] == 1
    old = final_files(fail)
    cases.write_text(both("medium", "narrow"))
    new_args = list(old_args)
    n = count_points(lambda: run(new_args, capsys), monkeypatch, [fail])
    new = final_files(fail)
    assert sorted(new) == [".sdrx-failures", "two.diff.wav", "two.spectra.png"]
    for k in range(n):
        _restore(fail, old)
        run_killed(lambda: run(new_args, capsys), k, monkeypatch, [fail], dead_pid())
        check_state(fail, old, new, ".sdrx-failures")
        _recover(fail, set(old) | set(new))
        assert final_files(fail) in (old, new) and own_files(fail) == []
    assert run(new_args, capsys)[0] == 1
    assert final_files(fail) == new and own_files(fail) == []


KILLER = """
import os, signal, sys
real = os.replace
count = [0]
def replace(a, b, *x, **k):
    count[0] += 1
    if count[0] == int(os.environ["KILL_AT"]):
        os.kill(os.getpid(), signal.SIGKILL)
    return real(a, b, *x, **k)
os.replace = replace
from sdrx.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_real_sigkill_between_renames(tmp_path):
    """A real kill -9 in a child process, at the rename of the first member: the next run finishes the set."""
    (tmp_path / "a.toml").write_text(SCENARIO.format(seconds=0.05, seed=1))
    (tmp_path / "b.toml").write_text(SCENARIO.format(seconds=0.05, seed=2))
    out = tmp_path / "cap.sigmf-meta"
    base = [sys.executable, "-c", KILLER, "synth", "--quiet", "-o", str(out)]
    from sdrx.synth import synthesize

    synthesize(tmp_path / "a.toml", out)
    old = final_files(tmp_path)
    env = dict(os.environ)
    # renames: 1 journal, 2 data, 3 truth, 4 meta; kill at the second member's rename
    env["KILL_AT"] = "3"
    p = subprocess.run(base + [str(tmp_path / "b.toml"), "--force"], env=env)
    assert p.returncode == -signal.SIGKILL
    assert "cap.sigmf-meta" not in final_files(tmp_path)          # the old head went first
    assert fileset.journal_path(out).is_file() and own_files(tmp_path)
    env["KILL_AT"] = "0"
    p = subprocess.run(base + [str(tmp_path / "b.toml")], env=env, capture_output=True, text=True)
    # the interrupted commit is finished, so the output exists: refused without --force, as any output
    assert p.returncode == 2 and "exists already" in p.stderr
    assert own_files(tmp_path) == []
    now = final_files(tmp_path)
    assert now["cap.sigmf-data"] != old["cap.sigmf-data"]
    from sdrx.capture import open_capture

    assert open_capture(out).read().size == 12000


def test_band_folder(capture, tmp_path, capsys, monkeypatch):
    d = tmp_path / "band"
    common = [capture, "-o", d, "--duration", "0.5", "--segment", "0", "--quiet"]
    states = _every_kill(capsys, monkeypatch, d, ".sdrx-band",
                         ["band", *common, "--stations", "1M,1.05M"],
                         ["band", *common, "--stations", "1M", "--chain", "narrow", "--force"])
    assert "incomplete" in states
    assert "1050k.wav" not in final_files(d)         # the earlier run's station is retired
