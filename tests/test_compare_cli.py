"""``sdrx compare`` on the command line: bad input (one line, exit 2, nothing written) and whole runs."""

import json

import numpy as np
import pytest


import sys as _sys
from pathlib import Path as _Path

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_cli.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402


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


def _xcorr_peak_lag(x, ref):
    from scipy import signal

    r = signal.correlate(x - x.mean(), ref - ref.mean(), mode="full", method="fft")
    return int(signal.correlation_lags(x.size, ref.size, mode="full")[np.argmax(r)])


def test_whole_run_on_two_presets(capture, tmp_path, capsys):
    import pyloudnorm
    import soundfile as sf
    from scipy.stats import binom

    out = tmp_path / "cmp"
    args = ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out), "--blind", "5",
            "--seed", "11", "--quiet"]
    rc, stdout, err = run(args, capsys)
    assert rc == 0, err
    assert stdout == ""
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted([".sdrx-compare", "blind-key.json", "compare.json", "index.html", "narrow.wav", "wide.wav"])
    res = json.loads((out / "compare.json").read_text())
    assert [s["label"] for s in res["specs"]] == ["wide", "narrow"]
    assert res["key_file"] == "blind-key.json"
    xs = []
    meter = None
    for s in res["specs"]:
        x, fs = sf.read(out / s["wav"], dtype="float64")
        meter = meter or pyloudnorm.Meter(fs, filter_class="DeMan")
        # consistency check: the BS.1770 meter sdrx uses (pyloudnorm, the filters of BS.1770-4's tables) run
        # again on the written 16-bit file (measured deviation 2e-7 LU; tolerance 1e-5 LU)
        assert meter.integrated_loudness(x) == pytest.approx(res["loudness"]["target_lufs"], abs=1e-5)
        assert np.max(np.abs(x)) <= 10 ** (-1 / 20)
        xs.append(x)
    # alignment: cross-correlation peak at zero lag within one sample
    assert abs(_xcorr_peak_lag(xs[1], xs[0])) <= 1
    # measured lag agrees with the designed group-delay difference to a few samples (48 kHz)
    narrow = res["specs"][1]
    assert narrow["delay_ms"] == pytest.approx(narrow["designed_delay_ms"], abs=3 / 48)
    # the 1 kHz tone station (truth sidecar): the narrow chain keeps the neighbour's noise out
    assert narrow["sinad_db"] > res["specs"][0]["sinad_db"] + 10
    assert narrow["adjacent_rejection_db"]["worst"] > res["specs"][0]["adjacent_rejection_db"]["worst"]
    # what each receiver heard: the neighbour (-10 dB, +10 kHz) reaches the wide chain's detector far
    # more than the narrow one's, by the designs' difference in rejection there (±1 dB: line powers)
    leaks = [s["receive"]["checks"]["adjacent_leak_db"]["10000"] for s in res["specs"]]
    rej = [s["adjacent_rejection_db"]["upper"] for s in res["specs"]]
    assert leaks[0] - leaks[1] == pytest.approx(rej[1] - rej[0], abs=1.0)
    page = (out / "index.html").read_text()
    assert "adjacent at the detector (±10 kHz), lower / upper" in page
    assert f"{leaks[0]:+.1f} dB" in page and f"{leaks[1]:+.1f} dB" in page
    assert "reaches the detector" in page          # the wide chain's warning, in words
    key = json.loads((out / "blind-key.json").read_text())
    assert [t["trial"] for t in key["trials"]] == [1, 2, 3, 4, 5]
    for t in key["trials"]:
        assert f"X was {t['x_is']} ({t['x']})" not in page  # the reveal's wording is not in the page source
    data = json.loads(page.split('id="sdrx-data">')[1].split("</script>")[0])
    assert data["blind"]["chance"][4] == pytest.approx(binom.sf(3, 5, 0.5))  # source: binomial tail via scipy.stats

    # a rerun into the same folder needs --force, then gives the same bytes
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    rc, _, err = run(args, capsys)
    assert rc == 2 and "holds an earlier comparison; pass --force" in err
    rc, _, err = run(args + ["--force"], capsys)
    assert rc == 0, err
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before


def test_spec_file_with_hostile_name_is_escaped(capture, tmp_path, capsys):
    spec = tmp_path / "odd.toml"
    spec.write_text('name = "<script>alert(1)</script>"\n')
    out = tmp_path / "cmp"
    rc, _, err = run(["compare", str(capture), "--tune", "1M", "medium", f"{spec}@<b>bold</b>", "-o", str(out),
                      "--quiet", "--duration", "1"], capsys)
    assert rc == 0, err
    page = (out / "index.html").read_text()
    assert "<script>alert(1)</script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "<b>bold</b>" not in page
    assert (out / "b-bold-b.wav").is_file()


def test_seed_without_blind_is_not_ignored(capture, tmp_path, capsys):
    out = tmp_path / "cmp"
    _bad(capsys, ["compare", str(capture), "--tune", "1M", "wide", "narrow", "-o", str(out), "--seed", "4"],
         "--seed 4: only draws the blind trials; add --blind N", out)


def test_help_has_an_unwrapped_example(capsys):
    rc, out, err = run(["compare", "--help"], capsys)
    assert rc == 0
    assert ("    sdrx compare demo_signals/coast.sigmf-meta --tune 1130k wide narrow -o demo_out/compare "
            "--blind 10\n") in out


def test_full_scale_dbm_reaches_every_chain(capture, tmp_path, capsys):
    """--full-scale-dbm: each chain's receiver runs with it (a spec with a noise figure and no full scale of its
    own is receivable) and compare.json gives each carrier in dBm = dBFS + the full scale."""
    nf = tmp_path / "noisy.toml"
    nf.write_text("[frontend]\nnoise_figure_db = 10\n")
    out = tmp_path / "cmp"
    args = ["compare", str(capture), "--tune", "1M", str(nf), "narrow", "-o", str(out), "--duration", "1",
            "--quiet"]
    _bad(capsys, args, "frontend.noise_figure_db: 10 dB needs the antenna power of full scale", out)
    rc, _, err = run(args + ["--full-scale-dbm", "-10 dBm"], capsys)
    assert rc == 0, err
    res = json.loads((out / "compare.json").read_text())
    for s in res["specs"]:
        r = s["receive"]
        assert r["full_scale_dbm"] == -10.0
        for k in ("mean", "min", "max"):
            assert r["carrier_dbm"][k] == pytest.approx(r["carrier_dbfs"][k] - 10.0, abs=1e-9)
        # the station was made at -20 dBFS (the synthesizer's level): -30 dBm at this full scale
        assert r["carrier_dbm"]["mean"] == pytest.approx(-30.0, abs=0.3)
