"""sdrx band in this process: every station equal to `sdrx receive`, segment joins, the level log, the folder.

Equality with `sdrx receive` is a consistency check against sdrx's own
single-station receiver (which the rest of the suite checks against outside
references). Levels are checked against the synthesizer's truth sidecar (the
carrier levels the capture was made with); programme audio is scored against
the truth's programme with the project's least-squares scorer.
"""

import csv
import io
import json
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from helpers_band import TUNES, make_band_capture
from helpers_cli import run as cli
from helpers_score import programme_from_truth, programme_snr_db
from sdrx.band import band
from sdrx.band.outputs import MARKER
from sdrx.band.plan import cut_period, grid_period, plan_segments, settle_time_s
from sdrx.band.segment import SegmentJob, StationJob, run_segment
from sdrx.capture import open_capture
from sdrx.chain import design_chain
from sdrx.receiver import Receiver
from sdrx.run import receive

FLOAT_TUNES = (850e3, 1010e3)   # fading speech and a steady tone


@pytest.fixture(scope="module")
def received(band_capture, tmp_path_factory):
    """`sdrx receive` of every station, PCM and float: the reference outputs."""
    d = tmp_path_factory.mktemp("receive")
    out = {}
    for f in TUNES:
        for kind in ("pcm", "float") if f in FLOAT_TUNES else ("pcm",):
            p = d / f"{f / 1e3:g}k-{kind}.wav"
            s = receive(band_capture, f, "medium", p, float_output=kind == "float", force=True)
            out[f, kind] = (p, s)
    return out


@pytest.fixture(scope="module")
def band_run(band_capture, tmp_path_factory):
    """The four stations in 3 s segments (three joins), 16-bit PCM."""
    out = tmp_path_factory.mktemp("band") / "run"
    summary = band([band_capture], out, stations="850k,930k,1010k,1150k", segment_s=3)
    return out, summary


def test_one_segment_is_receive_to_float_rounding(band_capture, received, tmp_path):
    # the stations share one pre-roll (sdrx/receiver/multi.py): their audio equals receive's to float
    # rounding, far below one 16-bit step (measured: float32 audio -140 dB re the signal)
    band([band_capture], tmp_path / "one", stations="all", segment_s=0)
    band([band_capture], tmp_path / "onef", stations="850k,1010k", segment_s=0, float_output=True)
    for f in TUNES:
        name = f"{f / 1e3:g}k.wav"
        a, _ = sf.read(tmp_path / "one" / name, dtype="int16")
        b, _ = sf.read(received[f, "pcm"][0], dtype="int16")
        assert len(a) == len(b) and np.max(np.abs(a.astype(int) - b.astype(int))) <= 1
        assert np.count_nonzero(a != b) <= 2
        if f in FLOAT_TUNES:
            a, _ = sf.read(tmp_path / "onef" / name, dtype="float64")
            b, _ = sf.read(received[f, "float"][0], dtype="float64")
            assert 10 * np.log10(np.sum((a - b) ** 2) / np.sum(b ** 2)) < -110.0


def test_segmented_pcm_matches_receive(band_run, received):
    out, _ = band_run
    for f in TUNES:
        a, _ = sf.read(out / f"{f / 1e3:g}k.wav", dtype="int16")
        b, _ = sf.read(received[f, "pcm"][0], dtype="int16")
        assert len(a) == len(b) == 480000
        # the joins differ from one continuous run by ~1e-11 of the signal (next test): far below
        # one 16-bit step, so the codes agree
        assert np.max(np.abs(a.astype(int) - b.astype(int))) <= 1
        assert np.count_nonzero(a != b) <= 2


class _Memory:
    def __init__(self, n):
        self.parts = [[] for _ in range(n)]

    def write(self, i, codes):
        self.parts[i].append(codes)


def _segmented_float64(capture, monkeypatch, seg_s, overlap_s):
    import sdrx.band.segment as segment

    monkeypatch.setattr(segment, "encode_audio", lambda a, _f: (np.asarray(a, np.float64).copy(), 0))
    info = open_capture(capture).info
    d = design_chain("medium")
    rx = Receiver(d, info, TUNES[0])
    segs = plan_segments(0, info.samples, info.fs, seg_s, overlap_s, grid_period([rx]), cut_period([rx]))
    mem = _Memory(len(TUNES))
    for s in segs:
        run_segment(SegmentJob(0, str(capture), {}, tuple(StationJob(f, d) for f in TUNES), s, 0, info.samples,
                               True), sink=mem)
    return [np.concatenate(p) for p in mem.parts]


def _worst_db(a, ref):
    return 20 * np.log10(np.max(np.abs(a - ref)) / np.sqrt(np.mean(ref ** 2)) + 1e-300)


def test_segment_joins_are_bounded_far_below_the_signal(band_capture, monkeypatch):
    """After the designed overlap a segment's audio equals the continuous run to float64 rounding.

    Measured here: -157 dB re the programme's RMS at the worst sample (each segment starts from its
    own pre-roll, which holds the carriers but not the programme, and the overlap lets that
    difference decay by SETTLE_DB); the issue's bound is 100 dB below the signal. With an overlap
    of 50 ms the joins are audible: the overlap is what makes them equal.
    """
    whole = _segmented_float64(band_capture, monkeypatch, None, 0.0)
    d = design_chain("medium")
    joined = _segmented_float64(band_capture, monkeypatch, 3.0, settle_time_s(d))
    short = _segmented_float64(band_capture, monkeypatch, 3.0, 0.05)
    for a, b, c in zip(joined, whole, short):
        assert len(a) == len(b) == 480000
        np.testing.assert_array_equal(a[:144000], b[:144000])   # the first segment is the run itself
        assert _worst_db(a, b) < -140.0
    assert max(_worst_db(c, b) for c, b in zip(short, whole)) > -100.0


def test_levels_against_the_truth(band_run, band_capture):
    out, summary = band_run
    truth = json.loads(band_capture.with_name("shore.truth.json").read_text())
    steady = {s["name"]: s for s in truth["stations"]}
    rows = list(csv.DictReader(io.StringIO((out / "log.csv").read_text())))
    assert [r["t_s"] for r in rows] == [str(k) for k in range(10)]
    for name, f in (("Tide Tone", 1010e3), ("Gull Radio", 930e3), ("Far Shoal", 1150e3)):
        want = steady[name]["level_dbfs"]     # unfaded carriers: the level the capture was made with
        col = f"{f / 1e3:g}k"
        means = np.array([float(r[f"{col} mean_dbfs"]) for r in rows])
        # the tone station's carrier is steady; speech and music carry ~0.2 dB of level-meter ripple
        tol = 0.02 if name == "Tide Tone" else 0.2
        np.testing.assert_allclose(means, want, atol=tol)
        assert all(float(r[f"{col} min_dbfs"]) <= float(r[f"{col} mean_dbfs"]) <= float(r[f"{col} max_dbfs"])
                   for r in rows)


def test_summary_matches_receive(band_run, received):
    out, summary = band_run
    data = json.loads((out / "band.json").read_text())
    assert data == json.loads(json.dumps(summary))
    (cap,) = data["captures"]
    assert [s["tune_hz"] for s in cap["stations"]] == list(TUNES)
    assert cap["segments"] == 4 and data["overlap_s"] == pytest.approx(settle_time_s(design_chain("medium")))
    for st in cap["stations"]:
        rs = received[st["tune_hz"], "pcm"][1]
        for k in ("lo_hz", "if_hz", "image_hz", "chain", "clipped_samples", "warnings"):
            assert st[k] == rs[k], k
        assert st["output"]["samples"] == rs["output"]["samples"]
        for k in ("mean", "min", "max"):
            assert st["carrier_dbfs"][k] == pytest.approx(rs["carrier_dbfs"][k], abs=2e-4)
        assert st["agc_gain_db"]["max"] == pytest.approx(rs["agc_gain_db"]["max"], abs=1e-3)
        assert st["agc_gain_db"]["min"] >= rs["agc_gain_db"]["min"] - 1e-3


def test_programme_scores_as_received(band_run, band_capture):
    """The music station scored on its programme (least-squares equalizer against the truth sidecar).

    -40 dBFS carrier over -120 dBFS/Hz noise (C/N0 80 dB-Hz), depth 0.6: measured 24.6 dB here,
    the same as `sdrx receive` gives (the audio is the same); a join that clicked would pull it down.
    """
    out, _ = band_run
    y, fs = sf.read(out / "930k.wav")
    p = programme_from_truth(band_capture.with_name("shore.truth.json"), "Gull Radio", fs, 0.0, len(y) / fs)
    assert programme_snr_db(y, p, fs) > 22.0


def test_survey_and_min_level(band_capture, tmp_path):
    s = band([band_capture], tmp_path / "all", min_level_dbfs=-45)
    (cap,) = s["captures"]
    assert [st["tune_hz"] for st in cap["stations"]] == [850e3, 930e3, 1010e3]
    assert [k["freq_hz"] for k in cap["skipped"]] == [1150e3]
    assert "below --min-level -45 dBFS" in cap["skipped"][0]["reason"]
    assert cap["stations"][2]["survey_level_dbfs"] == pytest.approx(-20.0, abs=0.1)


def test_two_captures_and_chains(band_capture, tmp_path):
    second = make_band_capture(tmp_path, "harbour", seconds=3.0)
    out = tmp_path / "two"
    s = band([band_capture, second], out, stations="930k,1010k", chains=["narrow", "1010k=wide"])
    names = sorted(str(p.relative_to(out)) for p in out.rglob("*.wav"))
    assert names == ["harbour/1010k.wav", "harbour/930k.wav", "shore/1010k.wav", "shore/930k.wav"]
    chains = {(c["folder"], st["tune_hz"]): st["chain"] for c in s["captures"] for st in c["stations"]}
    assert chains[("harbour", 1010e3)] == design_chain("wide").name
    assert chains[("shore", 930e3)] == design_chain("narrow").name
    a, _ = sf.read(out / "harbour" / "1010k.wav", dtype="int16")
    r = receive(second, 1010e3, "wide", tmp_path / "h.wav")
    b, _ = sf.read(tmp_path / "h.wav", dtype="int16")
    np.testing.assert_array_equal(a, b)
    rows = list(csv.DictReader(io.StringIO((out / "log.csv").read_text())))
    assert [r["capture"] for r in rows] == ["shore"] * 10 + ["harbour"] * 3
    assert r["output"]["samples"] == len(a)


def test_rerun_is_byte_identical_and_force_replaces(band_capture, tmp_path):
    out = tmp_path / "r"
    band([band_capture], out, stations="930k,1010k", segment_s=4)
    first = {p.name: p.read_bytes() for p in out.iterdir()}
    with pytest.raises(Exception, match="pass --force"):
        band([band_capture], out, stations="930k,1010k", segment_s=4)
    band([band_capture], out, stations="930k,1010k", segment_s=4, force=True)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == first
    band([band_capture], out, stations="1010k", segment_s=4, force=True)
    assert sorted(p.name for p in out.iterdir()) == sorted([MARKER, "1010k.wav", "band.json", "index.html",
                                                            "log.csv"])


def test_nothing_left_after_an_error(tmp_path):
    """A capture that holds a NaN part-way through fails the run; the folder is not made."""
    from sdrx.capture import open_writer

    p = tmp_path / "bad.sigmf-meta"
    fs = 480e3
    x = (0.1 * np.exp(2j * np.pi * 10e3 * np.arange(int(2 * fs)) / fs)).astype(np.complex64)
    with open_writer(p, fs=fs, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
        w.write(x)
    data = p.with_suffix(".sigmf-data")
    raw = np.fromfile(data, np.complex64)
    raw[int(1.5 * fs)] = np.nan            # the writer refuses NaN: damage the file as a recorder might
    raw.tofile(data)
    out = tmp_path / "out"
    with pytest.raises(Exception, match="NaN"):
        band([p], out, stations="1010k")
    assert not out.exists()
    assert sorted(q.name for q in tmp_path.iterdir()) == ["bad.sigmf-data", "bad.sigmf-meta"]


@pytest.mark.parametrize("args, message", [
    (["--stations", "300k"], "--stations 300k: outside the band of"),
    (["--stations", "abc"], "--stations"),
    (["--stations", "930k,930k"], "930 kHz is given twice"),
    (["--stations", "930k", "--min-level", "-40"], "--min-level: applies to --stations all"),
    (["--stations", "930k", "--chain", "1010k=wide"], "--chain 1010k=wide: no capture has a station at 1.01 MHz"),
    (["--chain", "medium", "--chain", "wide"], "--chain wide: one chain for every station is given already"),
    (["--chain", "nosuch"], "--chain nosuch"),
    (["--workers", "0"], "--workers: must be a whole number of worker processes >= 1"),
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "--workers and --scheduler: give one of them"),
    (["--segment", "-3"], "--segment"),
    (["--stations", "930k", "--work-dir", "/nonexistent/x"], "--work-dir /nonexistent/x: not a folder"),
])
def test_bad_input_is_one_line(band_capture, tmp_path, capsys, args, message):
    rc, out, err = cli(["band", band_capture, "-o", tmp_path / "o", "--quiet"] + args, capsys)
    assert rc == 2
    assert err.startswith("sdrx: error: ") and message in err and err.count("\n") == 1
    assert not (tmp_path / "o").exists()


def test_capture_twice_and_foreign_folder(band_capture, tmp_path, capsys):
    rc, _, err = cli(["band", band_capture, band_capture.with_suffix(".sigmf-data"), "-o", tmp_path / "o"], capsys)
    assert rc == 2 and "given twice" in err
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep")
    rc, _, err = cli(["band", band_capture, "-o", tmp_path / "mine", "--stations", "930k"], capsys)
    assert rc == 2 and "holds files not made by sdrx (notes.txt)" in err


def test_cli_runs_and_reports(band_capture, tmp_path, capsys):
    rc, out, err = cli(["band", band_capture, "-o", tmp_path / "c", "--stations", "1010k", "--quiet",
                        "--duration", "2"], capsys)
    assert rc == 0
    assert "1 stations from 1 capture(s), 1 segment(s) on this process" in out
    assert sf.info(str(tmp_path / "c" / "1010k.wav")).frames == 96000


def test_no_carrier_found_is_one_line(tmp_path, capsys):
    from sdrx.capture import open_writer

    p = tmp_path / "quiet.sigmf-meta"
    rng = np.random.default_rng(2)
    n = int(480e3)
    with open_writer(p, fs=480e3, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
        w.write((1e-4 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64))
    rc, _, err = cli(["band", p, "-o", tmp_path / "o", "--quiet"], capsys)
    assert rc == 2 and err.count("\n") == 1
    assert "the survey found no carrier to receive in" in err and "--stations F,F,..." in err
    assert not (tmp_path / "o").exists()


def test_corrections_apply_ahead_of_every_station(tmp_path):
    """band --correct: one estimate per capture, applied ahead of every station, as receive --correct does."""
    from sdrx.synth import parse_scenario, synthesize

    sc = parse_scenario({
        "capture": {"kind": "iq", "rate": "240k", "center": "1M", "datatype": "cf32_le", "seconds": 2.0,
                    "noise_dbfs_per_hz": -130, "seed": 5},
        "front_end": {"dc_offset_dbfs": -40, "iq_gain_error_db": 1.0, "iq_phase_error_deg": 3.0,
                      "clock_error_ppm": 60},
        "station": [{"name": "Quay", "frequency": "1.05M", "level_dbfs": -30, "depth": 0.5,
                     "program": {"kind": "tone", "frequency": 1000}},
                    {"name": "Cape", "frequency": "930k", "level_dbfs": -25, "depth": 0.5,
                     "program": {"kind": "tone", "frequency": 700}}]})
    cap = tmp_path / "faulty.sigmf-meta"
    synthesize(sc, cap)
    summary = band([cap], tmp_path / "b", stations="1050k,930k", segment_s=0, correct="all", float_output=True)
    applied = summary["captures"][0]["corrections"]["applied"]
    assert applied["clock"]["ppm"] == pytest.approx(60.0, abs=2.0)     # the bound: ±2 ppm
    receive(cap, 1050e3, "medium", tmp_path / "r.wav", correct="all", float_output=True)
    a, _ = sf.read(tmp_path / "b" / "1050k.wav", dtype="float64")
    b, _ = sf.read(tmp_path / "r.wav", dtype="float64")
    assert len(a) == len(b)
    assert 10 * np.log10(np.sum((a - b) ** 2) / np.sum(b ** 2)) < -100.0


def test_full_scale_dbm_travels_in_the_job_and_gives_dbm(band_capture, tmp_path, monkeypatch):
    """--full-scale-dbm: every station runs with it (its thermal noise placed by it, as receive places it), the
    segment jobs carry it to the workers, and band.json and log.csv give dBm = dBFS + the full scale."""
    import sdrx.band.run as band_run_mod

    nf = tmp_path / "noisy.toml"
    nf.write_text("[frontend]\nnoise_figure_db = 10\n")
    with pytest.raises(Exception, match="noise_figure_db: 10 dB needs the antenna power of full scale"):
        band([band_capture], tmp_path / "refused", stations="1010k", chains=[str(nf)], duration_s=2)
    jobs = []
    real_run = band_run_mod._run

    def recording_run(fn, js, *a, **kw):
        jobs.extend(js)
        return real_run(fn, js, *a, **kw)

    monkeypatch.setattr(band_run_mod, "_run", recording_run)
    out = tmp_path / "fs"
    s = band([band_capture], out, stations="1010k", chains=[str(nf)], duration_s=2, full_scale_dbm="-10 dBm")
    seg_jobs = [j for j in jobs if isinstance(j, SegmentJob)]
    assert seg_jobs and all(j.full_scale_dbm == -10.0 for j in seg_jobs)
    (st,) = s["captures"][0]["stations"]
    assert st["full_scale_dbm"] == -10.0
    for k in ("mean", "min", "max"):
        assert st["carrier_dbm"][k] == pytest.approx(st["carrier_dbfs"][k] - 10.0, abs=1e-9)
    assert st["carrier_dbm"]["mean"] == pytest.approx(-30.0, abs=0.3)   # made at -20 dBFS (the truth)
    assert json.loads((out / "band.json").read_text())["captures"][0]["stations"][0]["carrier_dbm"] == st["carrier_dbm"]
    rows = list(csv.DictReader(io.StringIO((out / "log.csv").read_text())))
    assert len(rows) == 2
    for r in rows:
        for k in ("mean", "min", "max"):
            assert float(r[f"1010k {k}_dbm"]) == pytest.approx(float(r[f"1010k {k}_dbfs"]) - 10.0, abs=0.0101)
    # the station's audio, thermal noise and all, is that of receive with the same option
    a, _ = sf.read(out / "1010k.wav", dtype="int16")
    receive(band_capture, 1010e3, nf, tmp_path / "r.wav", duration_s=2, full_scale_dbm=-10)
    b, _ = sf.read(tmp_path / "r.wav", dtype="int16")
    np.testing.assert_array_equal(a, b)


def test_log_has_no_dbm_columns_without_a_full_scale(band_run):
    out, _ = band_run
    head = (out / "log.csv").read_text().splitlines()[0]
    assert "dbfs" in head and "dbm" not in head
