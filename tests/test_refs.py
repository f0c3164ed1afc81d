"""Record / verify cycle of stored references (sdrx.refs), run through the real receiver."""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import soundfile as sf

import sdrx
from sdrx.errors import CaptureError, OutputError, ParameterError
from sdrx.refs.metrics import tone_sinad_db
from sdrx.refs.record import record_cases
from sdrx.refs.runcase import truth_tone_hz
from sdrx.refs.store import MANIFEST_NAME, Store
from sdrx.refs.verify import verify_cases
from sdrx.testing import assert_matches_reference

pytest_plugins = ["pytester"]


def load_support():
    """The shared capture maker (tests/test_refs_support.py), loaded by path (pytest importlib mode)."""
    import importlib.util
    from pathlib import Path

    spec = importlib.util.spec_from_file_location("sdrx_refs_test_support", Path(__file__).with_name("test_refs_support.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod

def ref_wav(store, name):
    """The reference WAV of a case, as the manifest names it."""
    return Store.open(store).audio_path(name)


_support = load_support()
CHAIN, TUNE, make_capture = _support.CHAIN, _support.TUNE, _support.make_capture


@pytest.fixture
def bench(tmp_path):
    """A cases file with two cases (numeric and exact tolerance) over a capture made here."""
    (tmp_path / "captures").mkdir()
    make_capture(tmp_path / "captures" / "bench.sigmf-meta")
    (tmp_path / "chains").mkdir()
    (tmp_path / "chains" / "two.toml").write_text(CHAIN.format(bw="9k"))
    cases = tmp_path / "cases.toml"
    cases.write_text(f"""
[[case]]
name = "bench-1010"
capture = "captures/bench.sigmf-meta"
tune = "{TUNE / 1e3:g}k"
chain = "chains/two.toml"
start = 0.05

[[case]]
name = "bench-exact"
capture = "captures/bench.sigmf-meta"
tune = "{TUNE / 1e3:g}k"
chain = "chains/two.toml"
duration = 0.2
tolerance = "exact"
""")
    return tmp_path, cases


def test_record_then_verify_passes(bench):
    folder, cases = bench
    store = folder / "store"
    rec = record_cases(cases, store)
    assert [r.name for r in rec] == ["bench-1010", "bench-exact"]
    m = json.loads((store / MANIFEST_NAME).read_text())
    e = m["cases"]["bench-1010"]
    assert e["case"]["capture"] == "captures/bench.sigmf-meta"     # as written: store is portable
    assert e["case"]["tune_hz"] == TUNE and e["case"]["start_s"] == 0.05
    assert e["chain"]["spec"]["if_stage"][0]["bandwidth"] == 9000.0
    assert e["chain"]["spec"]["agc"]["enabled"] in (True, False)      # defaults filled in
    assert e["versions"]["sdrx"] == sdrx.__version__
    assert len(e["capture"]["sha256"]) == 64 and len(e["capture"]["meta_sha256"]) == 64
    info = sf.info(str(ref_wav(store, "bench-1010")))
    assert info.subtype == "FLOAT" and info.frames == e["audio"]["samples"] > 0
    assert math.isfinite(e["metrics"]["level_dbfs"]) and e["metrics"]["occupied_bandwidth_hz"] > 0
    # the chain's audio bandwidth, by the one definition compare uses too (test tones through the chain)
    from sdrx.analysis.audio_response import AUDIO_BANDWIDTH_DEFINITION, audio_bandwidth_hz
    from sdrx.chain import design_chain

    assert e["metrics"]["audio_bandwidth_definition"] == AUDIO_BANDWIDTH_DEFINITION
    assert e["metrics"]["audio_bandwidth_hz"] == audio_bandwidth_hz(design_chain(e["chain"]["spec"]), TUNE)
    assert 2000 < e["metrics"]["audio_bandwidth_hz"] < 4500
    rep = verify_cases(cases, store, failures_dir=folder / "fail")
    assert rep.ok and rep.exit_code == 0
    assert [r.status for r in rep.results] == ["pass", "pass"]
    assert rep.results[1].summary == "exact: identical samples"      # deterministic: same inputs, same samples
    assert not (folder / "fail").exists()                           # nothing written when all pass


def test_bandwidth_change_fails_snr_and_names_case(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))     # one IF stage 5 % wider
    rep = verify_cases(cases, store, names="bench-1010", failures_dir=folder / "fail")
    (r,) = rep.results
    assert not rep.ok and rep.exit_code == 1 and r.status == "fail"
    assert r.line().startswith("FAIL bench-1010: SNR ")
    assert any(p.startswith("SNR ") and "< 60.0 dB" in p for p in r.problems)
    assert r.figures["snr_db"] < 60.0
    assert any("if_stage[1].bandwidth: 9000.0 -> 9450.0" in n for n in r.notes)
    diff = folder / "fail" / "bench-1010.diff.wav"
    png = folder / "fail" / "bench-1010.spectra.png"
    assert diff.is_file() and png.is_file() and png.stat().st_size < 200_000
    # the difference file is new - reference, and its energy gives the reported SNR back (definition)
    ref = sf.read(str(ref_wav(store, "bench-1010")), dtype="float64")[0]
    d = sf.read(str(diff), dtype="float64")[0]
    # measured deviation 1e-10 dB; tolerance 1e-8 dB
    assert 10 * np.log10(np.sum(ref ** 2) / np.sum(d ** 2)) == pytest.approx(r.figures["snr_db"], abs=1e-8)


def test_changed_capture_is_reported_as_changed(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store)
    make_capture(folder / "captures" / "bench.sigmf-meta", seed=8)           # same signal, other noise
    rep = verify_cases(cases, store, failures_dir=folder / "fail")
    assert [r.status for r in rep.results] == ["changed", "changed"]
    line = rep.results[0].line()
    assert line.startswith("FAIL bench-1010: capture changed (data sha256 ") and "not a DSP regression" in line
    assert rep.exit_code == 1 and not (folder / "fail").exists()


def test_other_sdrx_version_still_verified_and_reported(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store)
    mp = store / MANIFEST_NAME
    m = json.loads(mp.read_text())
    for e in m["cases"].values():
        e["versions"]["sdrx"] = "0.0.1"
    mp.write_text(json.dumps(m))
    rep = verify_cases(cases, store, failures_dir=folder / "fail")
    assert rep.ok
    for r in rep.results:
        assert r.notes == (f"recorded with sdrx 0.0.1, now {sdrx.__version__}",)
        assert f"recorded with sdrx 0.0.1, now {sdrx.__version__}" in r.line()


def test_junit_report(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store)
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))
    junit = folder / "out.xml"
    rep = verify_cases(cases, store, junit=junit)
    assert rep.junit == junit
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite.get("tests") == "2" and suite.get("failures") == "2" and float(suite.get("time")) > 0
    tcs = suite.findall("testcase")
    assert [t.get("name") for t in tcs] == ["bench-1010", "bench-exact"]
    f = tcs[0].find("failure")
    assert f.get("type") == "regression" and f.get("message").startswith("FAIL bench-1010: SNR")
    assert (folder / "out-failures" / "bench-1010.spectra.png").is_file()   # beside the report
    with pytest.raises(OutputError, match="exists already; pass --force"):
        verify_cases(cases, store, junit=junit)
    verify_cases(cases, store, junit=junit, force=True)


def test_record_refuses_overwrite_without_update(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-exact")
    before = (store / MANIFEST_NAME).read_bytes()
    with pytest.raises(OutputError, match="case 'bench-exact' exists already; pass --update"):
        record_cases(cases, store)
    assert (store / MANIFEST_NAME).read_bytes() == before and not list(store.glob("bench-1010*"))
    res = record_cases(cases, store, update=True)
    assert [r.replaced for r in res] == [False, True]
    # re-recording the same inputs gives a byte-identical store
    assert json.loads((store / MANIFEST_NAME).read_text())["cases"]["bench-exact"] == json.loads(before)["cases"]["bench-exact"]


def test_sinad_recorded_from_truth_sidecar(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")           # the synthesized capture has its sidecar
    met = json.loads((store / MANIFEST_NAME).read_text())["cases"]["bench-1010"]["metrics"]
    assert met["sinad_tone_hz"] == 1000.0
    assert met["sinad_db"] == pytest.approx(tone_sinad_db(ref_wav(store, "bench-1010"), 1000.0), abs=1e-9)
    assert met["sinad_db"] > 20


def test_truth_tone_selection(tmp_path):
    cap = tmp_path / "x.sigmf-meta"
    # the sidecar's layout as sdrx.synth writes it (stations[].frequency_hz, program.kind, tones_hz)
    truth = {"sdrx_truth": 1, "stations": [
        {"name": "Other", "frequency_hz": TUNE + 10e3, "carrier_hz": TUNE + 10e3,
         "program": {"kind": "tone", "frequency": 400.0}, "tones_hz": [400.0]},
        {"name": "Bench", "frequency_hz": TUNE, "carrier_hz": TUNE + 12.0,
         "program": {"kind": "tone", "frequency": 1000.0}, "tones_hz": [1000.0]},
        {"name": "Talk", "frequency_hz": TUNE - 10e3, "carrier_hz": TUNE - 10e3,
         "program": {"kind": "speech"}}]}
    (tmp_path / "x.truth.json").write_text(json.dumps(truth))
    assert truth_tone_hz(cap, TUNE) == 1000.0
    assert truth_tone_hz(cap, TUNE + 10e3) == 400.0
    assert truth_tone_hz(cap, TUNE - 10e3) is None            # not a tone program
    assert truth_tone_hz(cap, TUNE + 5e3) is None             # no station there
    assert truth_tone_hz(tmp_path / "none.wav", TUNE) is None  # no sidecar


def test_damaged_store_is_bad_input(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-exact")
    wav = ref_wav(store, "bench-exact")
    wav.write_bytes(wav.read_bytes()[:-100])
    with pytest.raises(CaptureError, match="truncated"):
        verify_cases(cases, store, names="bench-exact")
    with pytest.raises(ParameterError, match="no reference for case 'bench-1010'"):
        verify_cases(cases, store)


def test_assert_matches_reference(bench, tmp_path):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    assert assert_matches_reference(cases, store, "bench-1010", failures_dir=tmp_path / "f1").ok
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))
    with pytest.raises(pytest.fail.Exception, match=r"FAIL bench-1010: SNR"):
        assert_matches_reference(cases, store, "bench-1010", failures_dir=tmp_path / "f2")


def test_fixture_plugin(pytester, bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    pytester.makepyfile(f"""
        def test_ok(sdrx_refs):
            sdrx_refs.verify({str(cases)!r}, {str(store)!r}, case="bench-1010")
    """)
    from importlib.metadata import entry_points

    registered = any(ep.value == "sdrx.testing" for ep in entry_points(group="pytest11"))
    args = ([] if registered else ["-p", "sdrx.testing"]) + ["-q", "-p", "no:cacheprovider"]
    pytester.runpytest_inprocess(*args).assert_outcomes(passed=1)
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))
    res = pytester.runpytest_inprocess(*args)
    res.assert_outcomes(failed=1)
    res.stdout.fnmatch_lines(["*FAIL bench-1010: SNR*"])


def test_same_inputs_give_byte_identical_store(bench):
    folder, cases = bench
    record_cases(cases, folder / "s1")
    record_cases(cases, folder / "s2")
    t1 = {p.name: p.read_bytes() for p in (folder / "s1").iterdir()}
    t2 = {p.name: p.read_bytes() for p in (folder / "s2").iterdir()}
    assert t1 == t2 and len(t1) == 3 and MANIFEST_NAME in t1


def test_record_one_case_keeps_the_others(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    record_cases(cases, store, names="bench-exact")
    m = json.loads((store / MANIFEST_NAME).read_text())
    assert sorted(m["cases"]) == ["bench-1010", "bench-exact"]


def test_interrupted_manifest_write_leaves_old_manifest(bench, monkeypatch):
    import sdrx.refs.store as store_mod

    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    before = (store / MANIFEST_NAME).read_bytes()

    def interrupted(manifest):
        raise KeyboardInterrupt          # as if the user pressed Ctrl-C while the manifest is written

    monkeypatch.setattr(store_mod, "_dump", interrupted)
    with pytest.raises(KeyboardInterrupt):
        record_cases(cases, store, names="bench-1010", update=True)
    assert (store / MANIFEST_NAME).read_bytes() == before
    assert not [p for p in store.iterdir() if p.name.endswith(".partial")]
    assert Store.open(store).check_audio("bench-1010").is_file()   # manifest and its WAV still agree


def test_rerecording_removes_the_replaced_wav(bench):
    folder, cases = bench
    store = folder / "store"
    record_cases(cases, store, names="bench-1010")
    old = ref_wav(store, "bench-1010")
    (folder / "chains" / "two.toml").write_text(CHAIN.format(bw="9.45k"))
    record_cases(cases, store, names="bench-1010", update=True)
    new = ref_wav(store, "bench-1010")
    assert new != old and new.is_file() and not old.exists()
    assert sorted(p.name for p in store.iterdir()) == sorted([new.name, MANIFEST_NAME])
