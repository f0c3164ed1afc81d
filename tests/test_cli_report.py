"""Command-line tests of ``sdrx report``."""

import json

import numpy as np

import pytest


import sys as _sys
from pathlib import Path as _Path

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_cli.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402


def test_designed_only_writes_folder(tmp_path, capsys):
    out = tmp_path / "rep"
    rc, so, err = run(["report", "medium", "--tune", "1130k", "--no-measure", "-o", str(out)], capsys)
    assert rc == 0, err
    assert so.strip() == str(out / "report.html")
    d = json.loads((out / "report.json").read_text())
    assert d["tune_hz"] == 1130e3 and d["measured"] is None
    assert sorted(p.name for p in out.iterdir()) == sorted(["report.json", "report.html", *d["figures"]])


@pytest.mark.parametrize("args, match", [
    (["medium", "--tune", "20k"], "--tune 20 kHz: offsets of 3 channel spacings"),
    (["medium", "--tune", "1M", "--spacing", "500k"], "--spacing 500 kHz: must be above 0"),
    (["medium", "--tune", "1M", "--points", "3"], "--points 3"),
    (["no-such-preset", "--tune", "1M"], "no-such-preset"),
    # capture options without --capture would be silently ignored
    (["medium", "--tune", "1M", "--start", "1"], "--start 1: only applies with --capture"),
    (["medium", "--tune", "1M", "--duration", "2"], "--duration 2: only applies with --capture"),
    (["medium", "--tune", "1M", "--center", "1M"], "--center 1M: only applies with --capture"),
])
def test_bad_input_one_line_exit_2_nothing_written(args, match, tmp_path, capsys):
    out = tmp_path / "rep"
    rc, so, err = run(["report", *args, "--no-measure", "-o", str(out)], capsys)
    assert rc == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sdrx: error: ") and match in lines[0], err
    assert not out.exists()


def test_existing_output_refused(tmp_path, capsys):
    out = tmp_path / "rep"
    args = ["report", "wide", "--tune", "1M", "--no-measure", "-o", str(out)]
    assert run(args, capsys)[0] == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    rc, so, err = run(args, capsys)
    assert rc == 2 and "exists already; pass --force" in err and len(err.strip().splitlines()) == 1
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert run([*args, "--force", "--quiet"], capsys)[:2] == (0, "")


def test_tune_outside_capture(tmp_path, capsys):
    import numpy as np
    from sdrx.capture import open_writer

    cap = tmp_path / "c.sigmf-meta"
    with open_writer(cap, fs=100e3, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
        w.write(np.zeros(1000, np.complex64))
    out = tmp_path / "rep"
    rc, so, err = run(["report", "medium", "--tune", "1.2M", "--capture", str(cap), "--no-measure",
                       "-o", str(out)], capsys)
    assert rc == 2 and "outside the band of capture" in err and len(err.strip().splitlines()) == 1
    assert not out.exists()


def test_help_has_an_unwrapped_example(capsys):
    rc, out, err = run(["report", "--help"], capsys)
    assert rc == 0
    assert "    sdrx report medium --tune 1130k -o demo_out/report\n" in out


@pytest.mark.parametrize("args, match", [
    (["--noise-figure", "80"], "--noise-figure: 80 must lie from 0 to 60 dB"),
    (["--noise-figure", "quiet"], "--noise-figure: cannot read 'quiet' as a level in dB"),
    (["--noise-figure", "6", "--no-measure"], "--noise-figure 6: only applies to the measured figures"),
])
def test_bad_noise_figure_one_line_exit_2(args, match, tmp_path, capsys):
    out = tmp_path / "rep"
    rc, so, err = run(["report", "medium", "--tune", "1M", *args, "-o", str(out)], capsys)
    assert rc == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sdrx: error: ") and match in lines[0], err
    assert not out.exists()


def test_noise_figure_and_full_scale_options_set_the_sensitivity_bench(tmp_path, capsys):
    out = tmp_path / "rep"
    rc, so, err = run(["report", "narrow", "--tune", "1M", "--points", "7", "--noise-figure", "20", "--quiet",
                       "--full-scale-dbm", "-30", "-o", str(out)], capsys)
    assert rc == 0, err
    s = json.loads((out / "report.json").read_text())["measured"]["sensitivity"]
    assert s["noise_figure_db"] == 20.0 and s["noise_figure_from"] == "--noise-figure"
    # the full scale places the test levels in dBFS (dBm - full scale); the S/N, and so what follows, does
    # not depend on it
    assert s["full_scale_dbm"] == -30.0 and s["full_scale_from"] == "--full-scale-dbm"
    # S/N = m²(C/N0)/(2W) with N0 = kT0 + NF: the prediction, recomputed from the reported W
    want = 20 + 10 * np.log10(2 * s["noise_bandwidth_hz"]) - 20 * np.log10(0.3) - 174.0 + 20.0 + s["image_noise_db"]
    assert s["predicted_dbm"] == pytest.approx(want, abs=0.05)
    assert s["level_dbm"] == pytest.approx(want, abs=0.5)

