"""`sdrx synth` from the command line: outputs, determinism, memory, bad input, the shipped demo."""

from __future__ import annotations

import hashlib
import json
import os
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from sdrx.capture import open_capture
from sdrx.synth import synthesize

import sys as _sys
from pathlib import Path as _Path

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_cli.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402

DEMO = Path(__file__).resolve().parent.parent / "demo_signals"

SCENARIO = '''
title = "cli test"
[capture]
kind = "iq"
rate = "400k"
center = "1M"
datatype = "ci16_le"
seconds = 0.1
noise_dbfs_per_hz = -120
seed = 4

[[station]]
name = "Tone"
frequency = "950k"
level_dbfs = -20
depth = 0.3
[station.program]
kind = "tone"
frequency = "1k"

[[station]]
name = "Talk"
frequency = "1.06M"
level_dbfs = -26
depth = 0.7
[station.program]
kind = "speech"
[station.fading]
model = "rician"
rate = 2
k_db = 6
'''


@pytest.fixture
def scenario(tmp_path):
    p = tmp_path / "scn.toml"
    p.write_text(SCENARIO)
    return p


def _digest(*paths):
    h = hashlib.sha256()
    for p in paths:
        h.update(Path(p).read_bytes())
    return h.hexdigest()


def test_sigmf_output_with_truth(tmp_path, scenario, capsys):
    out = tmp_path / "cap.sigmf-meta"
    rc, stdout, err = run(["synth", scenario, "-o", out], capsys)
    assert rc == 0, err
    assert "wrote" in stdout and "cap.truth.json" in stdout
    reader = open_capture(out)
    info = reader.info
    assert (info.kind, info.fs, info.center_hz, info.datatype, info.samples) == ("iq", 400e3, 1e6, "ci16_le", 40000)
    truth = json.loads((tmp_path / "cap.truth.json").read_text())
    assert truth["capture"]["samples"] == 40000 and truth["capture"]["seed"] == 4
    names = [s["name"] for s in truth["stations"]]
    assert names == ["Tone", "Talk"]
    tone = truth["stations"][0]
    assert tone["tones_hz"] == [1000.0] and tone["carrier_hz"] == 950e3 and tone["offset_hz"] == -50e3
    assert truth["stations"][1]["fading"] == {"model": "rician", "rate_hz": 2.0, "k_db": 6.0}
    # the capture carries the truth's carrier level (dBFS) after 16-bit quantisation
    x = np.concatenate(list(reader.blocks()))
    n = np.arange(x.size)
    carrier = np.mean(x * np.exp(2j * np.pi * 50e3 * n / 400e3))
    assert 20 * np.log10(abs(carrier)) == pytest.approx(-20.0, abs=0.003)   # measured deviation 2.8e-4 dB


def test_wav_output_is_stereo_iq(tmp_path, scenario, capsys):
    out = tmp_path / "cap.wav"
    rc, _, err = run(["synth", scenario, "-o", out, "--quiet"], capsys)
    assert rc == 0, err
    data, fs = sf.read(out)
    assert fs == 400000 and data.shape == (40000, 2)  # source: soundfile reading the same file
    assert (tmp_path / "cap.truth.json").exists()


def test_same_scenario_and_seed_give_identical_bytes(tmp_path, scenario, capsys):
    a, b, c = tmp_path / "a.sigmf-meta", tmp_path / "b.sigmf-meta", tmp_path / "c.sigmf-meta"
    for out, extra in ((a, []), (b, []), (c, ["--seed", "5"])):
        rc, _, err = run(["synth", scenario, "-o", out, "--quiet", *extra], capsys)
        assert rc == 0, err
    data = lambda p: p.with_name(p.name.replace("meta", "data"))  # noqa: E731
    assert data(a).read_bytes() == data(b).read_bytes()
    assert a.read_bytes() == b.read_bytes()
    assert (tmp_path / "a.truth.json").read_text() == (tmp_path / "b.truth.json").read_text().replace('"b.sigmf-meta"', '"a.sigmf-meta"')
    assert data(a).read_bytes() != data(c).read_bytes()


def test_seconds_override_and_block_size_invariance_of_the_file(tmp_path, scenario, capsys):
    rc, _, err = run(["synth", scenario, "-o", tmp_path / "s.sigmf-meta", "--seconds", "50ms", "--quiet"], capsys)
    assert rc == 0, err
    assert open_capture(tmp_path / "s.sigmf-meta").info.samples == 20000
    synthesize(scenario, tmp_path / "k1.sigmf-meta", seconds=0.05, block_size=7919)
    synthesize(scenario, tmp_path / "k2.sigmf-meta", seconds=0.05, block_size=10**6)
    ref = (tmp_path / "s.sigmf-data").read_bytes()
    assert (tmp_path / "k1.sigmf-data").read_bytes() == ref
    assert (tmp_path / "k2.sigmf-data").read_bytes() == ref


def test_existing_output_needs_force(tmp_path, scenario, capsys):
    out = tmp_path / "cap.sigmf-meta"
    assert run(["synth", scenario, "-o", out, "--quiet"], capsys)[0] == 0
    before = _digest(out, tmp_path / "cap.sigmf-data", tmp_path / "cap.truth.json")
    rc, _, err = run(["synth", scenario, "-o", out, "--seed", "9"], capsys)
    assert rc == 2 and err.count("\n") == 1 and "exists already; pass --force" in err
    assert _digest(out, tmp_path / "cap.sigmf-data", tmp_path / "cap.truth.json") == before
    rc, _, err = run(["synth", scenario, "-o", out, "--seed", "9", "--force", "--quiet"], capsys)
    assert rc == 0, err
    assert _digest(out, tmp_path / "cap.sigmf-data", tmp_path / "cap.truth.json") != before


def test_existing_truth_alone_blocks_the_capture(tmp_path, scenario, capsys):
    (tmp_path / "cap.truth.json").write_text("{}")
    rc, _, err = run(["synth", scenario, "-o", tmp_path / "cap.sigmf-meta"], capsys)
    assert rc == 2 and "cap.truth.json: exists already" in err
    assert not (tmp_path / "cap.sigmf-data").exists()


def _bad(text):
    assert text[0] in SCENARIO
    return SCENARIO.replace(text[0], text[1], 1)


BAD = [
    (("frequency = \"1.06M\"", "frequency = \"1.25M\""), "station 'Talk': occupies .* outside the capture band 800 kHz .. 1.2 MHz"),
    (("depth = 0.7", "depth = 1.5"), "station 'Talk': depth = 1.5 must be 0..1"),
    (("k_db = 6", "kdb = 6"), "station 'Talk': fading \\(rician\\): unknown key 'kdb'; did you mean 'k_db'?"),
    (("level_dbfs = -20", "levle_dbfs = -20"), "station 'Tone': unknown key 'levle_dbfs'; did you mean 'level_dbfs'?"),
    (("level_dbfs = -20", "level_dbfs = \"very\""), "station 'Tone': level_dbfs: cannot read 'very' as a level"),
    (("rate = \"400k\"", "rate = \"fast\""), r"\[capture\]: rate: cannot read 'fast' as a frequency"),
    (("kind = \"speech\"", "kind = \"chatter\""), "station 'Talk': program: kind = 'chatter' is not one of"),
]


@pytest.mark.parametrize("change, match", BAD, ids=[m[:30] for _, m in BAD])
def test_bad_scenario_exits_2_with_one_line_and_writes_nothing(tmp_path, change, match, capsys):
    import re

    p = tmp_path / "bad.toml"
    p.write_text(_bad(change))
    rc, stdout, err = run(["synth", p, "-o", tmp_path / "out.sigmf-meta"], capsys)
    assert rc == 2
    assert err.startswith(f"sdrx: error: {p}: ") and err.count("\n") == 1 and "Traceback" not in err
    assert re.search(match, err), err
    assert sorted(x.name for x in tmp_path.iterdir()) == ["bad.toml"]


@pytest.mark.parametrize("argv, match", [
    (["synth", "{d}/missing.toml", "-o", "{d}/o.sigmf-meta"], "missing.toml: scenario file not found"),
    (["synth", "{s}", "-o", "{d}/o.bin"], "unknown output type; name a .sigmf-meta, .sigmf-data or .wav"),
    (["synth", "{s}", "-o", "{d}/o.sigmf-meta", "--seconds", "-2"], "--seconds: '-2' must be a positive"),
    (["synth", "{s}", "-o", "{d}/o.sigmf-meta", "--seconds", "0"], "--seconds: '0' must be a positive"),
    (["synth", "{s}", "-o", "{d}/nodir/o.sigmf-meta"], "folder .*nodir does not exist"),
])
def test_bad_arguments_exit_2_and_write_nothing(tmp_path, scenario, argv, match, capsys):
    import re

    argv = [a.format(d=tmp_path, s=scenario) for a in argv]
    before = sorted(x.name for x in tmp_path.iterdir())
    rc, _, err = run(argv, capsys)
    assert rc == 2 and err.startswith("sdrx: error: ") and err.count("\n") == 1
    assert re.search(match, err), err
    assert sorted(x.name for x in tmp_path.iterdir()) == before


def test_datatype_a_wav_cannot_hold(tmp_path, capsys):
    p = tmp_path / "c8.toml"
    p.write_text(SCENARIO.replace('datatype = "ci16_le"', 'datatype = "ci8"'))
    rc, _, err = run(["synth", p, "-o", tmp_path / "o.wav"], capsys)
    assert rc == 2 and f"{p}: datatype ci8 cannot go into a WAV capture" in err
    assert sorted(x.name for x in tmp_path.iterdir()) == ["c8.toml"]


def test_wav_program_path_is_relative_to_the_scenario(tmp_path, capsys):
    sub = tmp_path / "scn"
    sub.mkdir()
    t = np.arange(8000) / 8000
    sf.write(sub / "voice.wav", 0.3 * np.sin(2 * np.pi * 300 * t), 8000)
    p = sub / "w.toml"
    p.write_text(SCENARIO.replace('kind = "speech"', 'kind = "wav"\npath = "voice.wav"'))
    rc, _, err = run(["synth", p, "-o", tmp_path / "w.sigmf-meta", "--quiet"], capsys)
    assert rc == 0, err
    truth = json.loads((tmp_path / "w.truth.json").read_text())
    prog = truth["stations"][1]["program"]
    assert prog["kind"] == "wav" and Path(prog["path"]) == (sub / "voice.wav").resolve()
    assert prog["sha256"] == hashlib.sha256((sub / "voice.wav").read_bytes()).hexdigest()
    # the program file is an input: it cannot be the output
    rc, _, err = run(["synth", p, "-o", sub / "voice.wav", "--force"], capsys)
    assert rc == 2 and "is one of the inputs" in err


@pytest.mark.parametrize("normalize", ["true", "false"])
def test_wav_program_with_a_nan_names_the_file_and_frame(tmp_path, capsys, normalize):
    # normalize = false: the NaN is met while the capture is being written, not while the
    # scenario is read; either way one line naming the WAV and the frame, and nothing left behind
    sub = tmp_path / "scn"
    sub.mkdir()
    x = np.zeros(8000, dtype=np.float32)
    x[1234] = np.nan
    sf.write(sub / "voice.wav", x, 8000, subtype="FLOAT")
    p = sub / "w.toml"
    p.write_text(SCENARIO.replace('kind = "speech"', f'kind = "wav"\npath = "voice.wav"\nnormalize = {normalize}'))
    out = tmp_path / "out"
    out.mkdir()
    rc, stdout, err = run(["synth", p, "-o", out / "w.sigmf-meta", "--quiet"], capsys)
    assert rc == 2 and stdout == "" and err.count("\n") == 1 and "Traceback" not in err
    assert err.startswith("sdrx: error: ")
    assert f"voice.wav: frame 1234 is not finite" in err, err
    assert list(out.iterdir()) == []


def _peak_bytes(scenario, out, seconds):
    tracemalloc.start()
    try:
        synthesize(scenario, out, seconds=seconds, block_size=1 << 14)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_memory_stays_flat_when_duration_grows_tenfold(tmp_path, scenario):
    short = _peak_bytes(scenario, tmp_path / "short.sigmf-meta", 0.25)
    long = _peak_bytes(scenario, tmp_path / "long.sigmf-meta", 2.5)
    assert (tmp_path / "long.sigmf-data").stat().st_size == 10 * (tmp_path / "short.sigmf-data").stat().st_size
    # the long capture's samples alone (1e6 complex128 = 16 MB) would dwarf this margin
    assert long < short * 1.2 + 1_000_000, (short, long)


def test_shipped_demo_regenerates_byte_for_byte(tmp_path, capsys):
    # demo_signals/README.md: sdrx synth demo_signals/coast.toml -o demo_signals/coast.sigmf-meta --force
    out = tmp_path / "coast.sigmf-meta"
    rc, _, err = run(["synth", DEMO / "coast.toml", "-o", out, "--quiet"], capsys)
    assert rc == 0, err
    for name in ("coast.sigmf-data", "coast.sigmf-meta", "coast.truth.json"):
        assert (tmp_path / name).read_bytes() == (DEMO / name).read_bytes(), name
    assert (DEMO / "coast.sigmf-data").stat().st_size <= 8_000_000


def test_demo_holds_the_image_pair_and_the_adjacent_pair():
    truth = json.loads((DEMO / "coast.truth.json").read_text())
    by_freq = {s["frequency_hz"]: s for s in truth["stations"]}
    lo, hi = truth["capture"]["band_hz"]
    for s in truth["stations"]:
        assert s["frequency_hz"] % 10e3 == 0  # source: ITU Region 2 MF plan, 10 kHz channel spacing
        assert lo < s["occupied_hz"][0] and s["occupied_hz"][1] < hi
    # image with a 455 kHz IF and high-side injection: f + 2 IF (common practice)
    wanted = by_freq[600e3]
    assert 600e3 + 2 * 455e3 in by_freq
    assert wanted["program"]["kind"] == "tones"
    strong, weak = by_freq[1130e3], by_freq[1140e3]
    assert strong["level_dbfs"] - weak["level_dbfs"] >= 20
    assert sum(1 for s in truth["stations"] if s["fading"]) >= 1
    kinds = {s["program"]["kind"] for s in truth["stations"]}
    assert {"speech", "music"} <= kinds
    assert truth["capture"]["over_full_scale"] == 0
    assert os.path.getsize(DEMO / "coast.sigmf-data") == truth["capture"]["samples"] * 4  # ci16_le


def test_frequencies_print_in_khz_and_mhz_not_exponents(tmp_path, capsys):
    p = tmp_path / "fast.toml"
    p.write_text(SCENARIO.replace('rate = "400k"', 'rate = "1.2M"').replace("seconds = 0.1", "seconds = 0.01"))
    rc, stdout, err = run(["synth", p, "-o", tmp_path / "cap.sigmf-meta"], capsys)
    assert rc == 0, err
    assert "iq ci16_le at 1.2 MHz, 0.01 s" in stdout and "e+0" not in stdout
    rc, _, err = run(["synth", p, "-o", tmp_path / "none.sigmf-meta", "--seconds", "1e-9"], capsys)
    assert rc == 2 and err.count("\n") == 1
    assert "1e-09 s holds no sample at 1.2 MHz" in err, err
