"""Command-line tests of ``sdrx info``: output, JSON keys, and every bad input (one line, exit 2)."""

import json
import math

import numpy as np
import pytest
import soundfile

from sdrx.capture import open_writer

import sys as _sys
from pathlib import Path as _Path

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_cli.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402


@pytest.fixture
def rng():
    return np.random.default_rng(540)


@pytest.fixture
def band(tmp_path, rng):
    """A SigMF I/Q capture with three AM carriers on the 10 kHz grid (ITU Region 2 spacing)."""
    fs, center, n = 1.2e6, 1.0e6, 480_000
    t = np.arange(n) / fs
    x = 10 ** (-80 / 20) / math.sqrt(2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    for f, lv in ((700e3, -30.0), (1130e3, -12.0), (1140e3, -41.0)):
        env = 10 ** (lv / 20) * (1 + 0.3 * np.cos(2 * np.pi * 1000 * t))  # 1 kHz 30 %: common practice
        x += env * np.exp(2j * np.pi * (f - center) * t)
    p = tmp_path / "coast.sigmf-meta"
    with open_writer(p, fs=fs, kind="iq", datatype="ci16_le", center_hz=center) as w:
        w.write(x)
    return p


def test_json_keys_and_carriers(band, capsys):
    rc, out, err = run(["info", str(band.with_suffix(".sigmf-data")), "--json", "--quiet"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    for key in ("rate_hz", "center_hz", "kind", "datatype", "samples", "seconds", "carriers"):
        assert key in d
    assert (d["rate_hz"], d["center_hz"], d["kind"], d["datatype"], d["samples"]) == (1.2e6, 1e6, "iq", "ci16_le", 480_000)
    assert d["seconds"] == pytest.approx(0.4, rel=1e-12)
    assert d["spacing_hz"] == 10e3
    got = [(c["freq_hz"], c["level_dbfs"]) for c in d["carriers"]]
    assert [g[0] for g in got] == [1130e3, 700e3, 1140e3]  # strongest first
    for (_, lv), want in zip(got, (-12.0, -30.0, -41.0)):
        assert lv == pytest.approx(want, abs=0.02)   # printed to 0.01 dB; measured deviation 0.002 dB
    assert err == ""  # no progress bar when not on a terminal


def test_table(band, capsys):
    rc, out, err = run(["info", str(band), "--spacing", "10k"], capsys)
    assert rc == 0, err
    assert "iq, ci16_le, rate 1.2 MHz, centre 1 MHz" in out
    assert "3 on the 10 kHz grid" in out
    lines = [ln.split() for ln in out.splitlines() if ln.strip().startswith(("1130", "700", "1140"))]
    assert [ln[0] for ln in lines] == ["1130", "700", "1140"]


def test_offsets_to_their_resolution_and_the_off_grid_hint(band, capsys):
    # the carriers sit exactly on their channels: each printed offset is 0 to the digits its resolution
    # supports, and that resolution is stated beside it (Grandke interpolation, sdrx.analysis.survey)
    rc, out, err = run(["info", str(band), "--quiet"], capsys)
    assert rc == 0, err
    assert "offset Hz from the channel (interpolated; +- its resolution)" in out
    rows = {ln.split()[0]: ln.split() for ln in out.splitlines() if ln.strip().startswith(("1130", "700", "1140"))}
    for f, row in rows.items():
        offset, res = float(row[2]), float(row[3].lstrip("+-"))
        assert abs(offset) <= res < 1.0
    assert "hint:" not in out.split("front end")[0]
    # the same 10 kHz band on the 9 kHz grid: 1130 (3 kHz from 1134) and 1140 (4 kHz from 1143) are not listed
    # and 700 kHz (2 kHz from 702) is listed with its offset; the hint says all 3 lie off and 10 kHz fits them
    rc, out, err = run(["info", str(band), "--quiet", "--spacing", "9k"], capsys)
    assert rc == 0, err
    assert ("  hint: 3 of 3 strong lines lie off the 9 kHz grid (more than 300 Hz from a channel); a 10 kHz grid "
            "fits 3 of 3: --spacing 10k") in out
    rc, out, err = run(["info", str(band), "--quiet", "--spacing", "9k", "--json"], capsys)
    d = json.loads(out)
    assert [c["freq_hz"] for c in d["carriers"]] == [702e3]
    c = d["carriers"][0]
    assert c["line_hz"] == pytest.approx(700e3, abs=c["offset_resolution_hz"])
    assert d["grid_fit"] == {"lines": 3, "off_grid": 3, "tolerance_hz": 300.0, "fits": {"9000": 0, "10000": 3},
                             "suggested_spacing_hz": 10000.0}


def test_excerpt_options(band, capsys):
    rc, out, err = run(["info", str(band), "--json", "--start", "0.1", "--duration", "0.2"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    assert d["start_s"] == pytest.approx(0.1) and d["duration_s"] == pytest.approx(0.2)
    assert len(d["carriers"]) == 3


def test_raw_and_wav_inputs(tmp_path, capsys, rng):
    raw = tmp_path / "band.cu8"
    n = 200_000
    t = np.arange(n) / 250e3
    # noise well above the 8-bit step dithers the quantisation (otherwise its periodic error of a
    # tone at 3/25 of the rate is itself a set of lines on the 10 kHz grid)
    x = 0.5 * np.exp(2j * np.pi * 30e3 * t) + 0.02 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    codes = np.clip(np.rint(np.stack([x.real, x.imag], 1).ravel() * 127.5 + 127.5), 0, 255).astype(np.uint8)
    codes.tofile(raw)
    rc, out, err = run(["info", str(raw), "--format", "cu8", "--rate", "250k", "--center", "1M", "--json"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    assert d["datatype"] == "cu8" and [c["freq_hz"] for c in d["carriers"]] == [1030e3]
    assert d["carriers"][0]["level_dbfs"] == pytest.approx(20 * math.log10(0.5), abs=0.02)   # measured 0.0006
    wav = tmp_path / "rf.wav"
    rf = 0.25 * np.cos(2 * np.pi * 90e3 * np.arange(n) / 400e3) + 1e-3 * rng.standard_normal(n)
    soundfile.write(wav, rf, 400000, subtype="PCM_16")
    rc, out, err = run(["info", str(wav), "--json"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    assert (d["kind"], d["center_hz"], d["datatype"]) == ("real", None, "ri16_le")
    assert [c["freq_hz"] for c in d["carriers"]] == [90e3]
    assert d["carriers"][0]["level_dbfs"] == pytest.approx(20 * math.log10(0.25), abs=0.02)   # measured 0.0012


# --- bad inputs --------------------------------------------------------------------------------------

def _sigmf(tmp_path, meta_text, data=b"\0" * 64, name="bad"):
    m = tmp_path / f"{name}.sigmf-meta"
    m.write_text(meta_text)
    (tmp_path / f"{name}.sigmf-data").write_bytes(data)
    return m


def _meta(**glob):
    g = {"core:datatype": "ci16_le", "core:version": "1.0.0", "core:sample_rate": 1e6}
    g.update(glob)
    g = {k: v for k, v in g.items() if v is not None}
    return json.dumps({"global": g, "captures": [{"core:sample_start": 0, "core:frequency": 1e6}], "annotations": []})


def make_bad(kind, tmp_path):
    """Returns (argv tail, expected fragment of the one-line message)."""
    if kind == "missing":
        return [str(tmp_path / "absent.sigmf-meta")], "absent.sigmf-meta: no such file"
    if kind == "missing_wav":
        return [str(tmp_path / "absent.wav")], "absent.wav: no such file"
    if kind == "partial_sample":
        m = _sigmf(tmp_path, _meta(), data=b"\0" * 6)
        return [str(m)], "bad.sigmf-data: size 6 bytes is not a whole number of ci16_le samples"
    if kind == "partial_raw":
        p = tmp_path / "odd.raw"
        p.write_bytes(bytes(7))
        return [str(p), "--format", "cf32_le", "--rate", "1M", "--center", "1M"], "odd.raw: size 7 bytes"
    if kind == "unknown_format":
        p = tmp_path / "x.raw"
        p.write_bytes(bytes(8))
        return [str(p), "--format", "ci12_le", "--rate", "1M"], "--format: unknown datatype 'ci12_le'; known: cf32_le, "
    if kind == "unknown_sigmf_datatype":
        m = _sigmf(tmp_path, _meta(**{"core:datatype": "ci12_le"}))
        return [str(m)], "bad.sigmf-meta: core:datatype: unknown datatype 'ci12_le'; known:"
    if kind == "not_json":
        m = _sigmf(tmp_path, "{ this is not json")
        return [str(m)], "bad.sigmf-meta: SigMF metadata is not valid JSON"
    if kind == "no_rate":
        m = _sigmf(tmp_path, _meta(**{"core:sample_rate": None}))
        return [str(m)], "bad.sigmf-meta: global lacks core:sample_rate"
    if kind == "zero_rate_sigmf":
        m = _sigmf(tmp_path, _meta(**{"core:sample_rate": 0}))
        return [str(m)], "bad.sigmf-meta: core:sample_rate must be positive, got 0"
    if kind == "negative_rate_raw":
        p = tmp_path / "x.raw"
        p.write_bytes(bytes(8))
        return [str(p), "--format", "ri16_le", "--rate", "-48k"], "--rate: sample rate must be positive, got '-48k'"
    if kind == "three_channels":
        p = tmp_path / "three.wav"
        soundfile.write(p, np.zeros((100, 3)), 48000)
        return [str(p)], "three.wav: has 3 channels"
    if kind == "iq_wav_no_center":
        p = tmp_path / "iq.wav"
        soundfile.write(p, np.zeros((100, 2)), 48000)
        return [str(p)], "iq.wav: stereo file is I/Q; give its centre frequency with --center"
    if kind == "iq_raw_no_center":
        p = tmp_path / "iq.raw"
        p.write_bytes(bytes(16))
        return [str(p), "--format", "ci16_le", "--rate", "1M"], "iq.raw: I/Q datatype ci16_le needs a centre frequency"
    if kind == "start_past_end":
        m = _sigmf(tmp_path, _meta(), data=bytes(4000))  # 1000 samples at 1 MHz = 1 ms
        return [str(m), "--start", "2"], "bad.sigmf-meta: --start 2 s is past the end of the capture (0.001 s)"
    if kind == "nan_sample":
        x = np.zeros(2 * 5000, "<f4")
        x[2 * 4321] = np.nan
        m = _sigmf(tmp_path, _meta(**{"core:datatype": "cf32_le"}), data=x.tobytes())
        return [str(m)], "bad.sigmf-data: sample 4321 (t = 0.004321 s) is NaN"
    if kind == "inf_sample":
        x = np.zeros(5000, "<f4")
        x[17] = -np.inf
        p = tmp_path / "rf.wav"
        soundfile.write(p, x, 1000000, subtype="FLOAT")
        return [str(p)], "rf.wav: sample 17 (t = 0.000017 s) is infinite"
    raise AssertionError(kind)


BAD = ["missing", "missing_wav", "partial_sample", "partial_raw", "unknown_format", "unknown_sigmf_datatype",
       "not_json", "no_rate", "zero_rate_sigmf", "negative_rate_raw", "three_channels", "iq_wav_no_center",
       "iq_raw_no_center", "start_past_end", "nan_sample", "inf_sample"]


@pytest.mark.parametrize("kind", BAD)
def test_bad_input_one_line_exit_2_nothing_written(kind, tmp_path, capsys):
    args, fragment = make_bad(kind, tmp_path)
    before = sorted((p.name, p.stat().st_size) for p in tmp_path.iterdir())
    rc, out, err = run(["info", *args], capsys)
    assert rc == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("sdrx: error: "), err
    assert fragment in lines[0]
    assert "Traceback" not in err
    assert sorted((p.name, p.stat().st_size) for p in tmp_path.iterdir()) == before
