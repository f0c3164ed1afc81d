"""``sdrx refs record`` / ``sdrx refs verify`` on the command line: outputs, exit status, bad input."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import pytest

from sdrx.cli import main
from sdrx.refs.store import MANIFEST_NAME, Store


def _support():
    import importlib.util
    from pathlib import Path

    spec = importlib.util.spec_from_file_location("sdrx_refs_test_support", Path(__file__).with_name("test_refs_support.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


_S = _support()
CHAIN, TUNE, make_capture = _S.CHAIN, _S.TUNE, _S.make_capture


def run(argv, capsys):
    """Run the console entry point; return (status, stdout, stderr)."""
    try:
        code = main(argv)
    except SystemExit as exc:
        code = exc.code
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def tree(folder):
    """Every file under a folder with its bytes, to show that nothing was written."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def one_line_error(code, err, match):
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("sdrx: error: ") and match in lines[0], lines[0]


CASE = """
[[case]]
name = "{name}"
capture = "{capture}"
tune = "{tune}"
chain = "chains/two.toml"
duration = 0.2
"""


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "captures").mkdir()
    make_capture(tmp_path / "captures" / "bench.sigmf-meta")
    (tmp_path / "chains").mkdir()
    (tmp_path / "chains" / "two.toml").write_text(CHAIN.format(bw="9k"))
    (tmp_path / "cases.toml").write_text(CASE.format(name="bench", capture="captures/bench.sigmf-meta",
                                                     tune=f"{TUNE / 1e3:g}k"))
    return tmp_path


def cli_args(folder, *rest):
    return [str(folder / "cases.toml"), "--store", str(folder / "store"), *rest]


# ---- bad input that is found before anything runs ----------------------------------------------

def test_missing_capture(folder, capsys):
    (folder / "cases.toml").write_text(CASE.format(name="bench", capture="captures/gone.sigmf-meta", tune="1010k"))
    before = tree(folder)
    code, out, err = run(["refs", "record", *cli_args(folder)], capsys)
    one_line_error(code, err, "gone.sigmf-meta: no such file")
    assert tree(folder) == before


def test_unknown_case_name(folder, capsys):
    before = tree(folder)
    code, out, err = run(["refs", "record", *cli_args(folder, "--case", "nope")], capsys)
    one_line_error(code, err, "--case 'nope': no such case")
    assert tree(folder) == before


def test_duplicate_case_names(folder, capsys):
    one = CASE.format(name="bench", capture="captures/bench.sigmf-meta", tune="1010k")
    (folder / "cases.toml").write_text(one + one)
    before = tree(folder)
    for verb in ("record", "verify"):
        code, out, err = run(["refs", verb, *cli_args(folder)], capsys)
        one_line_error(code, err, "duplicate case name 'bench'")
    assert tree(folder) == before


def test_case_name_escaping_store(folder, capsys):
    (folder / "cases.toml").write_text(CASE.format(name="../outside", capture="captures/bench.sigmf-meta",
                                                   tune="1010k"))
    before = tree(folder)
    code, out, err = run(["refs", "record", *cli_args(folder)], capsys)
    one_line_error(code, err, "case name '../outside' is not allowed")
    assert tree(folder) == before


def test_store_that_is_not_one(folder, capsys):
    (folder / "store").mkdir()
    (folder / "store" / "mine.txt").write_text("not a reference")
    before = tree(folder)
    code, out, err = run(["refs", "verify", *cli_args(folder)], capsys)
    one_line_error(code, err, "not an sdrx reference store")
    code, out, err = run(["refs", "record", *cli_args(folder)], capsys)
    one_line_error(code, err, "is not an sdrx reference store")
    assert tree(folder) == before


def test_bad_later_case_stops_record_before_any_case_runs(folder, capsys):
    # the tuning is checked against the capture's band when the cases are checked, not when
    # the second case runs: the first case's reference must not have been written by then
    good = CASE.format(name="bench", capture="captures/bench.sigmf-meta", tune=f"{TUNE / 1e3:g}k")
    far = CASE.format(name="far", capture="captures/bench.sigmf-meta", tune="5M")
    (folder / "cases.toml").write_text(good + far)
    before = tree(folder)
    code, out, err = run(["refs", "record", *cli_args(folder)], capsys)
    one_line_error(code, err, "case 'far': --tune 5 MHz: outside the capture's band")
    assert out == ""
    assert tree(folder) == before and not (folder / "store").exists()


def test_verify_missing_store(folder, capsys):
    before = tree(folder)
    code, out, err = run(["refs", "verify", *cli_args(folder)], capsys)
    one_line_error(code, err, "no such folder")
    assert tree(folder) == before


def test_help_has_examples(capsys):
    for argv in (["refs", "--help"], ["refs", "record", "--help"], ["refs", "verify", "--help"]):
        code, out, err = run(argv, capsys)
        assert code == 0 and "sdrx refs" in out


# ---- the cycle and bad input that needs a recorded store ---------------------------------------

@pytest.fixture
def recorded(folder, capsys):
    code, out, err = run(["refs", "record", *cli_args(folder), "--quiet"], capsys)
    assert code == 0, err
    return folder


def test_record_verify_cycle(folder, capsys):
    code, out, err = run(["refs", "record", *cli_args(folder)], capsys)
    assert code == 0, err
    assert out.splitlines()[0].startswith("recorded bench: level ")
    code, out, err = run(["refs", "verify", *cli_args(folder, "--junit", str(folder / "r.xml"))], capsys)
    assert code == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("PASS bench: SNR inf dB (min 60.0), level +0.000 dB (max 0.100), "
                               "spectrum 0.00 dB (max 0.50)")
    assert lines[1] == "1 of 1 cases passed"
    suite = ET.parse(folder / "r.xml").getroot().find("testsuite")
    assert (suite.get("tests"), suite.get("failures")) == ("1", "0")
    # change one IF stage's bandwidth by 5 %: the verify fails with status 1 and names the case
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))
    code, out, err = run(["refs", "verify", *cli_args(folder, "--failures", str(folder / "fail"))], capsys)
    assert code == 1
    assert out.splitlines()[0].startswith("FAIL bench: SNR ")
    assert "0 of 1 cases passed; differences written to" in out
    assert sorted(p.name for p in (folder / "fail").iterdir()) == [".sdrx-failures", "bench.diff.wav",
                                                                    "bench.spectra.png"]
    # a rerun after a red run is the normal loop: what the earlier verify wrote is replaced, no --force
    code, out, err = run(["refs", "verify", *cli_args(folder, "--failures", str(folder / "fail"))], capsys)
    assert code == 1 and err == ""
    assert sorted(p.name for p in (folder / "fail").iterdir()) == [".sdrx-failures", "bench.diff.wav",
                                                                    "bench.spectra.png"]
    # once the case passes again its stale difference files go, and so does the folder
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9k"))
    code, out, err = run(["refs", "verify", *cli_args(folder, "--failures", str(folder / "fail"))], capsys)
    assert code == 0, err
    assert not (folder / "fail").exists()


def test_failures_folder_with_foreign_files_needs_force(recorded, capsys):
    fail = recorded / "fail"
    fail.mkdir()
    (fail / "notes.txt").write_text("mine")
    code, out, err = run(["refs", "verify", *cli_args(recorded, "--failures", str(fail))], capsys)
    one_line_error(code, err, "holds files not made by sdrx (notes.txt)")
    code, out, err = run(["refs", "verify", *cli_args(recorded, "--failures", str(fail), "--force")], capsys)
    assert code == 0, err
    assert (fail / "notes.txt").read_text() == "mine"


def test_record_refuses_existing_without_update(recorded, capsys):
    before = tree(recorded)
    code, out, err = run(["refs", "record", *cli_args(recorded)], capsys)
    one_line_error(code, err, "exists already; pass --update")
    assert tree(recorded) == before
    code, out, err = run(["refs", "record", *cli_args(recorded, "--update")], capsys)
    assert code == 0 and out.startswith("updated bench")


@pytest.mark.parametrize("damage, match", [
    ("truncate", "truncated or replaced"),
    ("corrupt", "content does not match its SHA-256 in the manifest (corrupted)"),
    ("missing-field", "missing field 'audio.sha256'"),
    ("escape", "escapes the store folder"),
])
def test_damaged_store(recorded, capsys, damage, match):
    store = recorded / "store"
    wav, mp = Store.open(store).audio_path("bench"), store / MANIFEST_NAME
    if damage == "truncate":
        wav.write_bytes(wav.read_bytes()[:-64])
    elif damage == "corrupt":
        b = bytearray(wav.read_bytes())
        b[-10] ^= 0x55
        wav.write_bytes(bytes(b))
    else:
        m = json.loads(mp.read_text())
        if damage == "missing-field":
            del m["cases"]["bench"]["audio"]["sha256"]
        else:
            m["cases"]["bench"]["audio"]["file"] = "../" + wav.name
        mp.write_text(json.dumps(m))
    before = tree(recorded)
    code, out, err = run(["refs", "verify", *cli_args(recorded, "--junit", str(recorded / "r.xml"))], capsys)
    one_line_error(code, err, match)
    assert tree(recorded) == before


def test_changed_capture_and_version_notes(recorded, capsys):
    mp = recorded / "store" / MANIFEST_NAME
    m = json.loads(mp.read_text())
    m["cases"]["bench"]["versions"]["sdrx"] = "0.0.1"
    mp.write_text(json.dumps(m))
    code, out, err = run(["refs", "verify", *cli_args(recorded)], capsys)
    assert code == 0 and "[recorded with sdrx 0.0.1, now " in out.splitlines()[0]
    make_capture(recorded / "captures" / "bench.sigmf-meta", seed=99)
    code, out, err = run(["refs", "verify", *cli_args(recorded)], capsys)
    assert code == 1 and out.startswith("FAIL bench: capture changed (data sha256 ")
