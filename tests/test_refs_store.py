"""The reference store (sdrx.refs.store) and the JUnit writer (sdrx.refs.junit)."""

from __future__ import annotations

import hashlib
import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
import soundfile as sf

from sdrx.errors import CaptureError, ParameterError
from sdrx.refs.junit import JUnitCase, write_junit
from sdrx.refs.store import MANIFEST_NAME, REQUIRED_FIELDS, Store, file_sha256


def entry():
    return {
        "case": {"name": "a", "capture": "c.wav", "tune_hz": 1e6, "chain": "medium", "start_s": 0.0,
                 "duration_s": None, "path": "fast", "tolerance": {"exact": True}},
        "chain": {"name": "medium", "spec": {"if_frequency": 455e3}},
        "capture": {"sha256": "0" * 64, "meta_sha256": None, "info": {}},
        "versions": {"sdrx": "0.1.0", "numpy": "2", "scipy": "1"},
        "metrics": {"level_dbfs": -10.0, "occupied_bandwidth_hz": 4000.0, "sinad_db": None},
    }


@pytest.fixture
def stored(tmp_path):
    src = tmp_path / "src.wav"
    sf.write(str(src), np.linspace(-0.5, 0.5, 3000).astype(np.float32), 8000, subtype="FLOAT")
    st = Store.for_record(tmp_path / "store")
    assert not (tmp_path / "store").exists()           # nothing written before the first case
    st.write_case("a", entry(), src)
    return tmp_path / "store"


def test_write_and_read_back(stored):
    st = Store.open(stored)
    e = st.entry("a")
    p = st.check_audio("a")
    assert sorted(x.name for x in stored.iterdir()) == sorted([MANIFEST_NAME, f"a.{e['audio']['sha256'][:12]}.wav"])
    # source: hashlib (standard library) over the file's bytes
    assert e["audio"]["sha256"] == hashlib.sha256(p.read_bytes()).hexdigest() == file_sha256(p)
    assert (e["audio"]["samples"], e["audio"]["fs"], e["audio"]["subtype"]) == (3000, 8000.0, "FLOAT")
    m = json.loads((stored / MANIFEST_NAME).read_text())
    assert m["format"] == "sdrx-refs" and m["format_version"] == 1
    assert not list(stored.glob(".*partial"))            # no temporary files left


def test_manifest_bytes_reproducible(tmp_path, stored):
    src = Store.open(stored).audio_path("a")
    other = Store.for_record(tmp_path / "again")
    other.write_case("a", entry(), src)
    assert (tmp_path / "again" / MANIFEST_NAME).read_bytes() == (stored / MANIFEST_NAME).read_bytes()


def test_not_a_store(tmp_path):
    (tmp_path / "plain").mkdir()
    (tmp_path / "plain" / "notes.txt").write_text("x")
    with pytest.raises(ParameterError, match="not an sdrx reference store"):
        Store.open(tmp_path / "plain")
    with pytest.raises(ParameterError, match="not empty and is not an sdrx reference store"):
        Store.for_record(tmp_path / "plain")
    with pytest.raises(ParameterError, match="no such folder"):
        Store.open(tmp_path / "none")
    (tmp_path / "plain" / MANIFEST_NAME).write_text('{"format": "other"}')
    with pytest.raises(ParameterError, match="is not an sdrx reference manifest"):
        Store.open(tmp_path / "plain")
    (tmp_path / "plain" / MANIFEST_NAME).write_text('{"format": "sdrx-refs", ')
    with pytest.raises(ParameterError, match="is not valid JSON"):
        Store.open(tmp_path / "plain")


@pytest.mark.parametrize("field, sub", [("versions", None), ("audio", "sha256"), ("case", "tune_hz"),
                                        ("capture", "sha256")])
def test_manifest_missing_field(stored, field, sub):
    mp = stored / MANIFEST_NAME
    m = json.loads(mp.read_text())
    if sub is None:
        del m["cases"]["a"][field]
        match = f"missing field '{field}'"
    else:
        del m["cases"]["a"][field][sub]
        match = f"missing field '{field}.{sub}'"
    mp.write_text(json.dumps(m))
    with pytest.raises(ParameterError, match=match):
        Store.open(stored).entry("a")


def test_required_fields_cover_what_verify_reads():
    assert set(REQUIRED_FIELDS) == {"case", "chain", "capture", "versions", "audio", "metrics"}


def test_escaping_audio_path(stored):
    mp = stored / MANIFEST_NAME
    m = json.loads(mp.read_text())
    m["cases"]["a"]["audio"]["file"] = "../a.wav"    # '../' in a manifest path
    mp.write_text(json.dumps(m))
    with pytest.raises(ParameterError, match=r"path '\.\./a\.wav' escapes the store folder"):
        Store.open(stored).check_audio("a")


def test_truncated_and_corrupted_wav(stored):
    wav = Store.open(stored).audio_path("a")
    data = wav.read_bytes()
    wav.write_bytes(data[: len(data) // 2])
    with pytest.raises(CaptureError, match="truncated"):
        Store.open(stored).check_audio("a")
    bad = bytearray(data)
    bad[len(bad) // 2] ^= 0xFF
    wav.write_bytes(bytes(bad))
    with pytest.raises(CaptureError, match="corrupted"):
        Store.open(stored).check_audio("a")
    wav.unlink()
    with pytest.raises(CaptureError, match="no such file"):
        Store.open(stored).check_audio("a")


def test_unknown_entry(stored):
    with pytest.raises(ParameterError, match="no reference for case 'b'"):
        Store.open(stored).entry("b")


def test_junit_schema_fields(tmp_path):
    p = write_junit(tmp_path / "r.xml",
                    [JUnitCase("ok", 0.25, notes=("recorded with sdrx 0.0.1, now 0.1.0",)),
                     JUnitCase("bad", 1.5, "regression", "FAIL bad: SNR 20.0 dB < 60.0 dB", "details")],
                    "sdrx refs cases.toml", "sdrx.refs.cases")
    root = ET.parse(p).getroot()
    # common practice: JUnit XML as read by CI systems (testsuites/testsuite/testcase/failure)
    assert root.tag == "testsuites"
    suite = root.find("testsuite")
    assert {k: suite.get(k) for k in ("name", "tests", "failures", "errors", "time")} == {
        "name": "sdrx refs cases.toml", "tests": "2", "failures": "1", "errors": "0", "time": "1.750"}
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == ["ok", "bad"]
    assert all(c.get("classname") == "sdrx.refs.cases" and float(c.get("time")) >= 0 for c in cases)
    assert cases[0].find("failure") is None
    assert cases[0].find("system-out").text == "recorded with sdrx 0.0.1, now 0.1.0"
    f = cases[1].find("failure")
    assert f.get("type") == "regression" and f.get("message").startswith("FAIL bad") and f.text == "details"
