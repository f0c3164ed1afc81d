"""``sdrx compare`` on the command line: bad input (one line, exit 2, nothing written) and whole runs."""

import json

import numpy as np
import pytest

from sdrx.cli import main


def run(args, capsys):
    try:
        rc = main(args)
    except SystemExit as exc:
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


@pytest.fixture(scope="module")
def capture(tmp_path_factory):
    """1.5 s I/Q capture: a 1 kHz tone station at 1 MHz (30 %: common bench practice), a noisy neighbour 10 kHz up."""
    from sdrx.synth import parse_scenario, synthesize

    d = tmp_path_factory.mktemp("cap")
    sc = parse_scenario({
        "title": "compare test (invented)",
        "capture": {"kind": "iq", "rate": "240k", "center": "1M", "datatype": "ci16_le", "seconds": 1.5,
                    "noise_dbfs_per_hz": -120, "seed": 3},
        "station": [
            {"name": "Alpha", "frequency": "1M", "level_dbfs": -20, "depth": 0.3,
             "program": {"kind": "tone", "frequency": "1k"}},
            {"name": "Beta", "frequency": "1.01M", "level_dbfs": -30, "depth": 0.8,
             "program": {"kind": "noise", "low": "100", "high": "4.5k"}},
        ]})
    out = d / "test.sigmf-meta"
    synthesize(sc, out)
    return out


def _bad(capsys, args, match, out_dir):
    before = sorted(p.name for p in out_dir.iterdir()) if out_dir.exists() else None
    rc, out, err = run(args, capsys)
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("sdrx: error: ")
    assert match in lines[0], lines[0]
    after = sorted(p.name for p in out_dir.iterdir()) if out_dir.exists() else None
    assert after == before  # nothing written
    return lines[0]


def test_one_spec_only(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "-o", str(out)],
         "compare needs at least two specs (got 1: wide)", out)


def test_same_spec_twice_suggests_a_label(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    line = _bad(capsys, ["compare", str(capture), "--tune", "1M", "medium", "medium", "-o", str(out)],
                "the same spec is given twice (specs 1 and 2)", out)
    assert "medium@medium-2" in line


def test_same_label_twice(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide@x", "narrow@X", "-o", str(out)],
         "label X is also the label of spec 1", out)


def test_start_past_the_end(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out), "--start", "5"],
         "--start 5 s is past the end of the capture", out)


def test_excerpt_runs_past_the_end(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out),
                  "--start", "1", "--duration", "2"], "runs past the end of", out)


def test_excerpt_too_short(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out),
                  "--duration", "0.3"], "compare needs at least 1 s", out)


def test_folder_with_files_not_made_by_sdrx(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    out.mkdir()
    (out / "holiday.jpg").write_bytes(b"\xff\xd8")
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out)],
         "holds files not made by sdrx (holiday.jpg)", out)


def test_unknown_preset(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "widest", "-o", str(out)],
         "SPEC 2 (widest): widest: no such preset or file", out)


def test_bad_blind_count(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out), "--blind", "-3"],
         "--blind", out)
