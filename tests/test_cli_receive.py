"""`sdrx receive` from the command line: byte-identical reruns, summary, and every bad input."""

from __future__ import annotations

import hashlib
import json
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from sdrx.capture import open_writer

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_*.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402
from helpers_rx import am_station, complex_noise  # noqa: E402

FS = 240e3
CENTER = 1.0e6


@pytest.fixture
def capture(tmp_path):
    """A small ci16_le SigMF capture: two AM stations and a little noise, written with sdrx's writer."""
    rng = np.random.default_rng(3)
    n = int(0.1 * FS)
    x = am_station(1.0e6, -20.0, 0.3, 1000.0, FS, CENTER, n)
    x += am_station(1.05e6, -26.0, 0.6, 700.0, FS, CENTER, n, phase=0.4)
    x += complex_noise(rng, 1e-7, n)
    path = tmp_path / "cap.sigmf-meta"
    with open_writer(path, fs=FS, kind="iq", datatype="ci16_le", center_hz=CENTER) as w:
        for i in range(0, n, 5000):
            w.write(x[i:i + 5000].astype(np.complex64))
    return path


def _sha(p):
    return hashlib.sha256(Path(p).read_bytes()).hexdigest()


def test_receive_writes_audio_and_summary_and_reruns_byte_identical(tmp_path, capture, capsys):
    outs = []
    for k in range(2):
        out, summ = tmp_path / f"a{k}.wav", tmp_path / f"a{k}.json"
        rc, so, se = run(["receive", capture, "--tune", "1M", "-o", out, "--summary", summ, "--quiet"], capsys)
        assert rc in (0, None), se
        outs.append((out, summ))
    assert _sha(outs[0][0]) == _sha(outs[1][0])                 # byte-identical WAV on a rerun
    data, rate = sf.read(outs[0][0])
    assert rate == 48000 and len(data) == 4800
    s = json.loads(outs[0][1].read_text())
    for key in ("tune_hz", "lo_hz", "if_hz", "image_hz", "path", "capture", "output", "carrier_dbfs",
                "agc_gain_db", "clipped_samples", "warnings"):
        assert key in s
    assert s["tune_hz"] == 1e6 and s["lo_hz"] == 1.455e6 and s["image_hz"] == 1.91e6
    assert s["carrier_dbfs"]["mean"] == pytest.approx(-20.0, abs=3e-3)   # measured deviation 2e-4 dB
    assert s["capture"]["rate_hz"] == FS and s["capture"]["kind"] == "iq"
    s2 = json.loads(outs[1][1].read_text())
    s.pop("output"), s2.pop("output")
    assert s == s2


def test_exact_path_rerun_is_byte_identical(tmp_path, capture, capsys):
    hashes = []
    for k in range(2):
        out = tmp_path / f"e{k}.wav"
        rc, _, se = run(["receive", capture, "--tune", "1M", "--path", "exact", "-o", out, "--quiet"], capsys)
        assert rc in (0, None), se
        hashes.append(_sha(out))
    assert hashes[0] == hashes[1]


def test_list_chains(capsys):
    rc, so, _ = run(["receive", "--list-chains"], capsys)
    assert rc == 0
    names = [line.split()[0] for line in so.strip().splitlines()]
    assert {"wide", "medium", "narrow"} <= set(names)


def _write_chain(tmp_path, text):
    p = tmp_path / "chain.toml"
    p.write_text(text)
    return p


BAD_CHAINS = [
    ("[agc]\natack_ms = 5\n", r"agc\.atack_ms: unknown key; did you mean 'attack_ms'\?"),
    ("[detector]\nknd = \"diode\"\n", r"detector\.knd: unknown key; did you mean 'kind'\?"),
    ("[agc]\nattack_ms = \"quick\"\n", r"agc\.attack_ms: expected a number, got 'quick'"),
    ("if_frequency = true\n", r"if_frequency: "),
    ("[[if_stage]]\nresponse = \"butterworth\"\nbandwidth = \"1.2M\"\n",
     r"if_stage\[1\]\.bandwidth: 1\.2 MHz is wider than twice the IF \(910 kHz\)"),
    ("[[if_stage]]\nresponse = \"butterworth\"\nbandwidth = \"9k\"\n[[if_stage]]\nresponse = \"butterworth\"\nbandwidth = \"1.2M\"\n",
     r"if_stage\[2\]\.bandwidth: 1\.2 MHz is wider than twice the IF \(910 kHz\)"),
    ("[[if_stage]]\nresponse = \"single_tuned\"\nq = 0\n", r"if_stage\[1\]\.q: 0 must be above 0\.5 and at most 10000"),
    ("[[if_stage]]\nresponse = \"double_tuned\"\nq = -3\n", r"if_stage\[1\]\.q: -3 must be above 0\.5"),
    ("[preselector]\nkind = \"tracking\"\nq = 0\n", r"preselector\.q: 0 must be above 0\.5"),
    ("[agc]\nmin_gain_db = 40\nmax_gain_db = 30\n", r"agc\.min_gain_db: 40 is above agc\.max_gain_db \(30\)"),
    ("[mixer]\nkind = \"analog\"\n", r"mixer\.kind: 'analog' is not one of real, quadrature"),
]


def _assert_clean_failure(rc, so, se, tmp_path, before, pattern):
    assert rc == 2
    lines = se.strip().splitlines()
    assert len(lines) == 1, se
    assert lines[0].startswith("sdrx: error: ")
    import re

    assert re.search(pattern, lines[0]), lines[0]
    assert "Traceback" not in se
    assert sorted(p.name for p in tmp_path.iterdir()) == before       # nothing written


@pytest.mark.parametrize("text, pattern", BAD_CHAINS)
def test_bad_chain_specs_fail_with_one_line_and_exit_2(tmp_path, capture, capsys, text, pattern):
    chain = _write_chain(tmp_path, text)
    before = sorted(p.name for p in tmp_path.iterdir())
    rc, so, se = run(["receive", capture, "--tune", "1M", "--chain", chain, "-o", tmp_path / "out.wav",
                      "--summary", tmp_path / "out.json", "--quiet"], capsys)
    _assert_clean_failure(rc, so, se, tmp_path, before, pattern)
    assert "chain.toml" in se      # names the file


@pytest.mark.parametrize("extra, pattern", [
    # IF above half the IF sample rate (the exact path's --if-rate too low for the IF itself)
    (["--path", "exact", "--if-rate", "800k"], r"--if-rate 800 kHz: the IF 455 kHz is above half the IF sample rate"),
    # an LO the exact path cannot represent: --if-rate below 2·LO (LO 1455 kHz)
    (["--path", "exact", "--if-rate", "2M"], r"--if-rate 2 MHz: the LO 1\.455 MHz falls outside what that rate can represent"),
    (["--path", "exact", "--if-rate", "3.6M"], r"--if-rate 3\.6 MHz: too low to hold every mixing product"),
    (["--if-rate", "9.6M"], r"--if-rate: only the exact path has an IF sample rate"),
    # not a multiple of fs/512 (240 kHz / 512 = 468.75 Hz)
    (["--path", "exact", "--if-rate", "7.777M"],
     r"--if-rate 7777000: not a usable IF sample rate for the capture rate 240 kHz \(use a multiple of 468\.75 Hz"),
    (["--chain", "mediun"], r"--chain mediun: no such preset or file \(presets: medium, narrow, wide"),
])
def test_bad_options_fail_with_one_line_and_exit_2(tmp_path, capture, capsys, extra, pattern):
    before = sorted(p.name for p in tmp_path.iterdir())
    rc, so, se = run(["receive", capture, "--tune", "1M", "-o", tmp_path / "out.wav", "--summary",
                      tmp_path / "out.json", "--quiet", *extra], capsys)
    _assert_clean_failure(rc, so, se, tmp_path, before, pattern)


@pytest.mark.parametrize("tune", ["1.2M", "850k"])
def test_tuning_outside_the_capture_names_both(tmp_path, capture, capsys, tune):
    before = sorted(p.name for p in tmp_path.iterdir())
    rc, so, se = run(["receive", capture, "--tune", tune, "-o", tmp_path / "out.wav", "--quiet"], capsys)
    _assert_clean_failure(rc, so, se, tmp_path, before, r"--tune .*: outside the capture's band 880 kHz to 1\.12 MHz")
    assert "cap.sigmf-meta" in se


def test_existing_output_is_refused_without_force(tmp_path, capture, capsys):
    out = tmp_path / "out.wav"
    out.write_bytes(b"keep")
    rc, so, se = run(["receive", capture, "--tune", "1M", "-o", out, "--quiet"], capsys)
    assert rc == 2 and se.startswith("sdrx: error: ") and len(se.strip().splitlines()) == 1
    assert out.read_bytes() == b"keep"
    rc, _, se = run(["receive", capture, "--tune", "1M", "-o", out, "--quiet", "--force"], capsys)
    assert rc in (0, None), se
    assert sf.info(str(out)).samplerate == 48000


def test_low_side_lo_at_or_below_0_hz_is_refused_in_both_paths(tmp_path, capture, capsys):
    # tune 400 kHz, IF 455 kHz, low side: LO = 400 − 455 = −55 kHz (common practice: low-side LO = f − IF)
    chain = tmp_path / "low.toml"
    chain.write_text('injection = "low"\n')
    wide = tmp_path / "wide.sigmf-meta"
    n = int(0.02 * FS)
    with open_writer(wide, fs=FS, kind="iq", datatype="ci16_le", center_hz=400e3) as w:
        w.write(am_station(400e3, -20.0, 0.3, 1000.0, FS, 400e3, n).astype(np.complex64))
    for path in ("fast", "exact"):
        before = sorted(p.name for p in tmp_path.iterdir())
        rc, so, se = run(["receive", wide, "--tune", "400k", "--chain", chain, "--path", path,
                          "-o", tmp_path / "out.wav", "--quiet"], capsys)
        _assert_clean_failure(rc, so, se, tmp_path, before,
                              r"--tune 400 kHz: with low-side injection and IF 455 kHz the LO would be at -55 kHz; "
                              r"tune above 455 kHz")


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_both_paths_warn_when_the_image_is_outside_the_capture(tmp_path, capture, capsys, path):
    # capture 880 kHz .. 1.12 MHz, tune 1 MHz: image 1.91 MHz (common practice: f + 2·IF, high side)
    rc, so, se = run(["receive", capture, "--tune", "1M", "--path", path, "-o", tmp_path / "out.wav",
                      "--summary", tmp_path / "out.json", "--quiet"], capsys)
    assert rc in (0, None), se
    warnings = json.loads((tmp_path / "out.json").read_text())["warnings"]
    assert any("image channel 1.91 MHz is outside the capture" in w for w in warnings), warnings


def test_help_example_names_its_outputs_after_the_station_it_tunes(capsys):
    import re

    from sdrx.tomlfile import read_toml

    rc, out, _ = run(["receive", "--help"], capsys)
    assert rc == 0
    example = " ".join(out.split("Example:")[1].split("With --correct")[0].replace("\\", " ").split())
    tune = re.search(r"--tune (\S+)", example).group(1)
    scenario = read_toml(Path(__file__).resolve().parents[1] / "demo_signals" / "coast.toml")
    station = next(s for s in scenario["station"] if s["frequency"] == tune)
    word = station["name"].split()[0].lower()          # Tidewater Voice at 1130k
    outputs = re.findall(r"(?:-o|--summary) (\S+)", example)
    assert len(outputs) == 2
    for path in outputs:
        assert word in path and tune in path, (path, station["name"])


def test_the_run_line_prints_rates_and_frequencies_in_khz_and_mhz(tmp_path, capture, capsys):
    rc, out, err = run(["receive", capture, "--tune", "1M", "-o", tmp_path / "a.wav", "--quiet"], capsys)
    assert rc == 0, err
    assert "s at 48 kHz;" in out and "LO 1.455 MHz, image 1.91 MHz" in out and "e+0" not in out
