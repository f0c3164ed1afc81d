"""Command-line tests of ``sdrx plan``."""

import json

import pytest


import sys as _sys
from pathlib import Path as _Path

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_cli.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402


def test_table_and_q(capsys):
    rc, out, err = run(["plan", "--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "10k"], capsys)
    assert rc == 0, err
    assert "LO range 995-2155 kHz" in out
    assert "1227.5" in out  # half-IF spur of the 1000 kHz channel (common practice: f_LO - IF/2)
    assert "practical" in out and "common practice" in out


def test_json(capsys):
    rc, out, err = run(["plan", "--if", "455k", "--band", "540k:1700k", "--json"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    assert d["lo_range_hz"] == [995000.0, 2155000.0]
    assert d["image_range_hz"] == [1450000.0, 2610000.0]
    assert len(d["channels"]) == 117
    assert d["q_required"] is None


def test_comparison(capsys):
    rc, out, err = run(["plan", "--if", "455k", "--if", "10.7M", "--band", "540k:1700k"], capsys)
    assert rc == 0, err
    assert "455" in out and "10700" in out
    rc, out, err = run(["plan", "--if", "455k", "--if", "10.7M", "--band", "540k:1700k", "--json"], capsys)
    plans = json.loads(out)["plans"]
    assert [p["if_hz"] for p in plans] == [455e3, 10.7e6]


@pytest.mark.parametrize("args, match", [
    (["--if", "455k", "--band", "1700k:540k"], "--band '1700k:540k': low edge"),
    (["--if", "1M", "--band", "540k:1700k"], "--if 1 MHz: inside the band"),
    (["--if", "455k", "--band", "540k:1700k", "--reject", "40"], "--reject needs --at"),
    (["--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "3M"], "--at 3 MHz: offset is beyond the band"),
    (["--if", "455k", "--band", "540k:1700k", "--at", "10k"], "--at needs --reject"),
    (["--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "10k", "--max-q", "0"], "--max-q 0.0"),
    (["--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "10k", "--max-q", "-5"], "--max-q -5.0"),
    (["--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "10k", "--max-q", "nan"], "--max-q nan"),
])
def test_bad_input_one_line_exit_2(args, match, capsys):
    rc, out, err = run(["plan", *args], capsys)
    assert rc == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sdrx: error: ") and match in lines[0]


def test_help_has_an_unwrapped_example(capsys):
    rc, out, err = run(["plan", "--help"], capsys)
    assert rc == 0
    assert "    sdrx plan --if 455k --band 540k:1700k --spacing 10k --reject 40 --at 10k\n" in out


def test_capacitance_ratio_has_a_verdict(capsys):
    # low-side LO over 540-1700 kHz: 85-1245 kHz, a 14.6:1 tuning range, 215:1 in capacitance (f = 1/(2 pi
    # sqrt(LC)), physical identity): beyond any single variable capacitor; the RF section's 9.91:1 is usual
    rc, out, err = run(["plan", "--if", "455k", "--band", "540k:1700k", "--injection", "low"], capsys)
    assert rc == 0, err
    ratio = (1245 / 85) ** 2
    assert f"capacitance ratio {ratio:.3g} (= ratio squared): beyond any single variable capacitor" in out
    assert f"RF section: tuning ratio {1700 / 540:.4g}, capacitance ratio {(1700 / 540) ** 2:.3g}: a usual" in out
    rc, out, err = run(["plan", "--if", "455k", "--band", "540k:1700k", "--injection", "low", "--json"], capsys)
    d = json.loads(out)
    assert (d["lo_capacitance_verdict"], d["rf_capacitance_verdict"]) == ("beyond", "usual")
    assert d["capacitance_verdict_source"] == "common practice"
