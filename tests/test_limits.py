"""Bounds on every size a user can ask for, and values that cannot be meant: one line naming the limit, exit 2.

The values are those of issue 13's fuzz findings (tracebacks, runaway memory, silently accepted nonsense).
"""

import json

import numpy as np
import pytest

from helpers_cli import run
from test_cli_errors import one_line


@pytest.fixture(scope="module")
def capture(tmp_path_factory):
    from sdrx.synth import parse_scenario, synthesize

    d = tmp_path_factory.mktemp("limcap")
    sc = parse_scenario({"capture": {"kind": "iq", "rate": "240k", "center": "1M", "seconds": 0.2},
                         "station": [{"name": "A", "frequency": "1M", "level_dbfs": -20, "depth": 0.3}]})
    synthesize(sc, d / "c.sigmf-meta")
    return d / "c.sigmf-meta"


@pytest.mark.parametrize("toml, match", [
    ("if_frequency = 1e300\n", "if_frequency: 1e+300 Hz is outside 50 kHz to 50 MHz"),
    ("if_frequency = 1e30\n", "if_frequency: 1e+30 Hz is outside 50 kHz to 50 MHz"),
    ("if_frequency = " + "9" * 400 + "\n", "if_frequency: 9999999999999999... is beyond the range of numbers"),
    ("[agc]\nreference_dbfs = 455000\n", "agc.reference_dbfs: 455000 is outside -80 to 0"),
    ("[agc]\nmax_gain_db = 1e6\n", "agc.max_gain_db: 1e+06 is outside -100 to 120"),
    ("[agc]\nrelease_ms = 1e-30\n", "agc.release_ms: 1e-30 is outside 1 to 100000"),
    ("[agc]\nhang_ms = 1e30\n", "agc.hang_ms: 1e+30 is outside 0 to 60000"),
    ("[preselector]\nq = 1e300\n", "preselector.q: 1e+300 must be above 0.5 and at most 1000"),
    ("[audio]\ngain_db = -1e300\n", "audio.gain_db: -1e+300 is outside -60 to 60"),
    ("[audio]\nlowpass = 1e-300\n", "audio.lowpass: 1e-300 Hz is outside 1 Hz to 96 kHz"),
    ("[mixer]\nkind = \"quadrature\"\nphase_error_deg = 90\n", "mixer.phase_error_deg: 90 must be below 90"),
    ("[[if_stage]]\n" * 17, "if_stage: 17 stages; at most 16 are supported"),
    ("[[if_stage]]\norder = 12\n" * 5, "if_stage: the stages' orders add up to 60; at most 48"),
    ("[[if_stage]]\ngain_db = 100\n" * 3, "if_stage: the stage gains add up to 300 dB; at most 200 dB"),
    ("a = " + "[" * 5000 + "]" * 5000 + "\n", "nested too deeply to read"),
])
def test_chain_spec_values_out_of_range(capture, tmp_path, capsys, toml, match):
    spec = tmp_path / "s.toml"
    spec.write_text(toml)
    rc, out, err = run(["receive", capture, "--tune", "1M", "--chain", spec, "-o", tmp_path / "o.wav",
                        "--summary", tmp_path / "o.json"], capsys)
    one_line(rc, err, match)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.toml"]


@pytest.mark.parametrize("args, match", [
    (["receive", "{cap}", "--tune", "1M", "--duration", "1e308", "-o", "{out}"],
     "--duration 1e+308 s from --start 0 s runs to 1e+308 s, past the end of the capture (0.2 s)"),
    (["receive", "{cap}", "--tune", "1M", "--start", "1e308", "-o", "{out}"],
     "--start 1e+308 s is past the end of the capture (0.2 s)"),
    (["receive", "{cap}", "--tune", "1M", "--start", "0.1", "--duration", "0.5", "-o", "{out}"],
     "runs to 0.6 s, past the end of the capture (0.2 s); at most 0.1 s from there"),
    (["receive", "{cap}", "--tune", "0", "-o", "{out}"], "--tune: 0 Hz must be above 0 Hz"),
    (["receive", "{cap}", "--tune", "1M", "--path", "exact", "--if-rate", "1e12", "-o", "{out}"],
     "--if-rate: 1e+12 Hz must be above 0 Hz and at most 1 GHz"),
    (["report", "medium", "--tune", "1e308", "-o", "{dir}/r"], "--tune: 1e+308 Hz must be at most 3 GHz"),
    (["report", "medium", "--tune", "1e12", "-o", "{dir}/r"], "--tune: 1e+12 Hz must be at most 3 GHz"),
    (["report", "medium", "--tune", "1M", "--points", "1000000000", "-o", "{dir}/r"],
     "--points 1000000000: must be a whole number from 7 to 301"),
    (["report", "medium", "--tune", "1M", "--spacing", "1e-308", "-o", "{dir}/r"],
     "--spacing: 1e-308 Hz is outside 100 Hz to 1 MHz"),
    (["report", "medium", "--tune", "1M", "--capture", "{cap}", "--duration", "3", "--no-measure", "-o", "{dir}/r"],
     "--duration 3 s from --start 0 s runs to 3 s, past the end of the capture (0.2 s)"),
    (["plan", "--if", "455k", "--band", "540k:1700k", "--spacing", "2.5"], "--spacing: 2.5 Hz is outside 100 Hz"),
    (["plan", "--if", "455k", "--band", "1M:2.9G", "--spacing", "100"],
     "gives 28990001 channels over the band; at most 20000"),
    (["plan", "--if", "1e-308", "--band", "540k:1700k"], "--if: 1e-308 Hz is outside 50 kHz to 50 MHz"),
    (["plan", "--if", "455k", "--band", "540k:1700k", "--reject", "40", "--at", "10k", "--max-q", "-inf"],
     "--max-q -inf: the practical loaded Q must be a finite number above 0"),
    (["plan", "--if", "455k", "--band", "540k:1e300"], "high edge: 1e+300 Hz must be at most 3 GHz"),
    (["info", "{cap}", "--spacing", "1e-308"], "--spacing: 1e-308 Hz is outside 100 Hz to 1 MHz"),
    (["info", "{raw}", "--format", "cu8", "--rate", "1e308", "--center", "1M"], "--rate: 1e+308 Hz is outside 1 kHz"),
    (["info", "{raw}", "--format", "cu8", "--rate", "2.4M", "--center", "1M"],
     "the I/Q band -200 kHz to 2.2 MHz reaches below 0 Hz; --center 1 MHz must be at least rate/2 = 1.2 MHz"),
    (["info", "{raw}", "--format", "cu8", "--rate", "2.4M", "--center", "0"], "reaches below 0 Hz"),
    (["info", "{raw}", "--format", "cu8", "--rate", "2.4M", "--center", "1e300"], "reaches above 3 GHz"),
    (["compare", "{cap}", "--tune", "1M", "wide", "narrow", "--spacing", "2.5", "-o", "{dir}/c"],
     "--spacing: 2.5 Hz is outside 100 Hz"),
])
def test_sizes_and_values_out_of_range(capture, tmp_path, capsys, args, match):
    raw = tmp_path / "in" / "x.cu8"
    raw.parent.mkdir()
    raw.write_bytes(bytes(4000))
    fill = {"cap": capture, "out": tmp_path / "o.wav", "dir": tmp_path, "raw": raw}
    rc, out, err = run([a.format(**fill) for a in args], capsys)
    one_line(rc, err, match)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in"]


def test_exact_path_if_rate_is_bounded_as_a_multiple_of_the_capture_rate(tmp_path, capsys):
    """A real capture at 48 kHz with a 10.7 MHz IF: the automatic IF rate would be 470 times the capture
    rate (memory per block grows with it); refused, pointing at the fast path."""
    import soundfile as sf

    p = tmp_path / "audio.wav"
    sf.write(p, np.zeros(4800), 48000, subtype="PCM_16")
    spec = tmp_path / "hi.toml"
    spec.write_text('if_frequency = "10.7M"\n')
    rc, out, err = run(["receive", p, "--tune", "20k", "--chain", spec, "--path", "exact", "-o", tmp_path / "o.wav"],
                       capsys)
    line = one_line(rc, err, "times the capture rate 48 kHz; at most 64 times (memory per block)")
    assert "--path exact: the automatic IF sample rate" in line and "--path fast" in line


def test_capture_rate_too_low_for_the_chain(tmp_path, capsys):
    """8 kHz: the channel is flat to 2.9 kHz only (it was scipy's 'critical frequencies' traceback)."""
    from sdrx.synth import parse_scenario, synthesize

    sc = parse_scenario({"capture": {"kind": "iq", "rate": "8k", "center": "1M", "seconds": 0.2},
                         "station": [{"name": "A", "frequency": "1M", "level_dbfs": -20, "depth": 0.3}]})
    synthesize(sc, tmp_path / "lo.sigmf-meta")
    rc, out, err = run(["receive", tmp_path / "lo.sigmf-meta", "--tune", "1M", "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, "rate 8 kHz is too low for this chain: its channel is flat only to 2.88 kHz, below "
                      "audio.lowpass 4.5 kHz; a capture rate of at least 12.5 kHz is needed")


@pytest.mark.parametrize("rate, match", [
    (1e300, "core:sample_rate 1e+300 Hz is outside 1 kHz to 1 GHz"),
    (2 ** 63, "core:sample_rate 9.22337e+18 Hz is outside"),
    (10 ** 400, "core:sample_rate = 1000000000000000... is beyond the range of numbers"),
    (1, "core:sample_rate 1 Hz is outside 1 kHz"),
    (8000, "rate 8 kHz is too low for this chain"),
])
def test_sigmf_rates_that_cannot_be_meant(tmp_path, capsys, rate, match):
    meta = {"global": {"core:datatype": "ci16_le", "core:version": "1.0.0", "core:sample_rate": rate},
            "captures": [{"core:sample_start": 0, "core:frequency": 1e9}], "annotations": []}
    (tmp_path / "r.sigmf-meta").write_text(json.dumps(meta))
    (tmp_path / "r.sigmf-data").write_bytes(bytes(4 * 4000))
    rc, out, err = run(["receive", tmp_path / "r.sigmf-meta", "--tune", "1G", "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, match)
    assert not (tmp_path / "o.wav").exists()


def test_info_json_of_an_all_zero_capture(tmp_path, capsys):
    raw = tmp_path / "z.ci16"
    raw.write_bytes(bytes(400_000))
    rc, out, err = run(["info", raw, "--format", "ci16_le", "--rate", "200k", "--center", "1M", "--json"], capsys)
    assert rc == 0, err
    data = json.loads(out)           # was -inf: not JSON
    assert data["noise_floor_dbfs"] is None and data["carriers"] == []
    rc, out, err = run(["info", raw, "--format", "ci16_le", "--rate", "200k", "--center", "1M"], capsys)
    assert "noise     none: every sample of the excerpt is zero" in out


def test_empty_capture_says_so(tmp_path, capsys):
    (tmp_path / "e.cu8").write_bytes(b"")
    rc, out, err = run(["info", tmp_path / "e.cu8", "--format", "cu8", "--rate", "200k", "--center", "1M"], capsys)
    line = one_line(rc, err, "e.cu8: the capture holds no samples")
    assert "--duration" not in line


def test_info_surveys_the_first_minute_of_a_long_capture_by_default(tmp_path, capsys):
    # a sparse 75 s raw capture at 1 MS/s: the survey reads 60 s unless --duration asks for more
    raw = tmp_path / "long.cu8"
    with open(raw, "wb") as fh:
        fh.truncate(2 * 75_000_000)
    rc, out, err = run(["info", raw, "--format", "cu8", "--rate", "1M", "--center", "10M", "--json"], capsys)
    assert rc == 0, err
    data = json.loads(out)
    assert (data["seconds"], data["duration_s"]) == (75.0, 60.0)
    rc, out, err = run(["info", raw, "--format", "cu8", "--rate", "1M", "--center", "10M"], capsys)
    assert "surveyed  0 s to 60 s" in out and "--duration S surveys more" in out


def test_float_samples_beyond_any_meaning_are_refused_without_a_warning(tmp_path, capsys):
    x = np.full(20000, 3e38, dtype="<f4")
    x.tofile(tmp_path / "big.cf32")
    rc, out, err = run(["receive", tmp_path / "big.cf32", "--format", "cf32_le", "--rate", "240k", "--center", "1M",
                        "--tune", "1M", "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, "sample 0 (t = 0.000000 s) is 4.24e+38, beyond 1e+06 (full scale is 1.0)")


def test_free_space_is_checked_before_writing(capture, tmp_path, capsys, monkeypatch):
    import shutil
    from collections import namedtuple

    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr(shutil, "disk_usage", lambda p: usage(10 ** 9, 10 ** 9 - 10 ** 6, 10 ** 6))
    rc, out, err = run(["receive", capture, "--tune", "1M", "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, "o.wav: needs about 19.2 kB, but only 1 MB is free on")
    (tmp_path / "sc.toml").write_text('[capture]\nkind = "real"\nrate = "1M"\nseconds = 100\n'
                                      '[[station]]\nname = "A"\nfrequency = "100k"\nlevel_dbfs = -20\n')
    rc, out, err = run(["synth", tmp_path / "sc.toml", "-o", tmp_path / "big.sigmf-meta"], capsys)
    one_line(rc, err, "big.sigmf-meta: needs about 200 MB, but only 1 MB is free")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sc.toml"]


def test_if_too_low_for_the_channel(capture, tmp_path, capsys):
    """A 50 kHz IF with 192 kHz audio: the channel rate is 192 kHz and the IF's mirror, 100 kHz away, falls
    inside the channel (a 1 kHz IF read +330 dBFS)."""
    spec = tmp_path / "low.toml"
    spec.write_text('if_frequency = "50k"\n[[if_stage]]\nbandwidth = "9k"\n[audio]\nrate = 192000\n')
    rc, out, err = run(["receive", capture, "--tune", "1M", "--chain", spec, "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, "if_frequency 50 kHz: too low for the channel rate 192 kHz (audio.rate 192 kHz)")
    spec.write_text('if_frequency = "50k"\n[[if_stage]]\nbandwidth = "9k"\n')
    rc, out, err = run(["receive", capture, "--tune", "1M", "--chain", spec, "-o", tmp_path / "o.wav",
                        "--quiet"], capsys)
    assert rc == 0, err


def test_capture_rate_with_an_awkward_ratio_to_the_audio_rate(tmp_path, capsys):
    """95.744 kHz: channel rate = capture rate, 375/748 of the audio rate; the resampler's FIR would have
    half a million taps (0.9 s per quarter second of capture): refused, naming a rate that always works."""
    from sdrx.synth import parse_scenario, synthesize

    sc = parse_scenario({"capture": {"kind": "iq", "rate": "95744", "center": "1M", "seconds": 0.1},
                         "station": [{"name": "A", "frequency": "1M", "level_dbfs": -20, "depth": 0.3}]})
    synthesize(sc, tmp_path / "odd.sigmf-meta")
    rc, out, err = run(["receive", tmp_path / "odd.sigmf-meta", "--tune", "1M", "-o", tmp_path / "o.wav"], capsys)
    one_line(rc, err, "ratio to audio.rate 48 kHz is 375/748; the resampler takes ratios up to 20000 in numerator "
                      "× denominator (a capture rate of at least 96 kHz always works)")


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_capture_rate_whose_common_grid_with_the_receiver_is_hours_away(tmp_path, capsys, path):
    """A fuzz finding: at 800326.6412494909 Hz the shortest pre-roll on one sample grid with the receiver's
    96 kHz, 48 kHz (and IF) rates is 10^9 s: it tried to allocate 43 TiB. Refused, naming the limit."""
    meta = {"global": {"core:datatype": "ci16_le", "core:version": "1.0.0", "core:sample_rate": 800326.6412494909},
            "captures": [{"core:sample_start": 0, "core:frequency": 1e6}], "annotations": []}
    (tmp_path / "r.sigmf-meta").write_text(json.dumps(meta))
    (tmp_path / "r.sigmf-data").write_bytes(bytes(4 * 200000))
    rc, out, err = run(["receive", tmp_path / "r.sigmf-meta", "--tune", "1M", "--path", path,
                        "-o", tmp_path / "o.wav"], capsys)
    line = one_line(rc, err, " s is outside 0 s to 2 s (the shortest start on one sample grid with the receiver's "
                             "rates 96 kHz, 48 kHz")
    assert line.startswith("sdrx: error: capture rate 800.327 kHz: pre-roll: "), line
    assert not (tmp_path / "o.wav").exists()
