"""SigMF against the reference library (the `sigmf` package): sdrx's recordings pass its schema check,
and sdrx reads recordings and archives the library writes (cf32_le, cu8, several captures segments,
annotations), streaming from the archive's data member.

source: SigMF specification 1.x (metadata schema, archive format), as implemented by the `sigmf`
Python package, the specification's reference library.
"""

from __future__ import annotations

import json
import tarfile
import warnings

import numpy as np
import pytest

sigmf = pytest.importorskip("sigmf")   # a test dependency (pyproject's test extra): never skipped under make test
from sigmf import SigMFFile, sigmffile  # noqa: E402

from helpers_cli import run  # noqa: E402
from sdrx.capture import open_capture, open_writer  # noqa: E402
from sdrx.errors import CaptureError  # noqa: E402

FS = 250e3
CENTER = 1.0e6


def _tone(n, f=20e3, a=0.5):
    return (a * np.exp(2j * np.pi * f * np.arange(n) / FS)).astype(np.complex64)


def _library_recording(tmp_path, name, datatype, codes, *, segments=((0, CENTER),), annotations=()):
    """A recording written by the reference library: data file + SigMFFile metadata."""
    data = tmp_path / f"{name}.sigmf-data"
    codes.tofile(data)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        meta = SigMFFile(data_file=str(data), global_info={
            sigmf.DATATYPE_KEY: datatype, sigmf.SAMPLE_RATE_KEY: FS, sigmf.VERSION_KEY: "1.0.0",
            sigmf.DESCRIPTION_KEY: "written by the reference library"})
        for start, freq in segments:
            meta.add_capture(start, metadata={sigmf.FREQUENCY_KEY: freq})
        for start, length, comment in annotations:
            meta.add_annotation(start, length, metadata={sigmf.COMMENT_KEY: comment})
        meta.validate()
        meta.tofile(str(tmp_path / f"{name}.sigmf-meta"))
    return meta


def test_sdrx_recordings_pass_the_reference_schema_check(tmp_path):
    # every datatype family sdrx writes, I/Q and real, with annotations
    cases = [("iq16", "iq", "ci16_le", CENTER), ("iqf", "iq", "cf32_le", CENTER), ("iqu8", "iq", "cu8", CENTER),
             ("real16", "real", "ri16_le", None)]
    for stem, kind, datatype, center in cases:
        x = _tone(4096) if kind == "iq" else np.cos(2 * np.pi * 0.05 * np.arange(4096)).astype(np.float32) * 0.5
        meta = {"description": "sdrx test", "annotations": [
            {"core:sample_start": 100, "core:sample_count": 50, "core:comment": "a burst"}]}
        with open_writer(tmp_path / f"{stem}.sigmf-meta", fs=FS, kind=kind, datatype=datatype, center_hz=center,
                         meta=meta) as w:
            w.write(x)
        rec = sigmffile.fromfile(str(tmp_path / f"{stem}.sigmf-meta"))   # checks the SHA-512 too
        rec.validate()                                                    # raises on a schema violation
        assert rec.get_global_field(sigmf.DATATYPE_KEY) == datatype
        assert rec.sample_count == 4096
        got = rec.read_samples()
        # the library's own scaling of integer types is its own; compare shapes and the float type exactly
        if datatype == "cf32_le":
            np.testing.assert_array_equal(got, x)


@pytest.mark.parametrize("datatype", ["cf32_le", "cu8"])
def test_reads_library_recordings_with_several_segments_and_annotations(tmp_path, datatype):
    x = _tone(10_000)
    if datatype == "cf32_le":
        codes = x
        tol = 0.0
    else:  # cu8: v = round(x·127.5 + 127.5); sdrx reads (v − 127.5)/127.5 (its documented scaling)
        iq = np.empty(2 * x.size, dtype=np.float64)
        iq[0::2], iq[1::2] = x.real, x.imag
        codes = np.clip(np.round(iq * 127.5 + 127.5), 0, 255).astype(np.uint8)
        tol = np.sqrt(2) * 0.5 / 127.5 + 1e-6   # half a code in I and in Q
    _library_recording(tmp_path, "lib", datatype, codes, segments=((0, CENTER), (4000, CENTER)),
                       annotations=((100, 500, "first"), (6000, 100, "second")))
    r = open_capture(tmp_path / "lib.sigmf-meta")
    assert (r.info.datatype, r.info.fs, r.info.center_hz, r.info.samples) == (datatype, FS, CENTER, 10_000)
    np.testing.assert_allclose(r.read(), x, atol=tol, rtol=0)


def test_reads_a_library_archive_in_place_streaming_from_the_data_member(tmp_path, capsys):
    x = _tone(50_000)
    meta = _library_recording(tmp_path, "arch", "cf32_le", x, segments=((0, CENTER), (20_000, CENTER)),
                              annotations=((10, 20, "note"),))
    archive = tmp_path / "arch.sigmf"
    meta.archive(str(archive))
    with tarfile.open(archive) as t:
        assert sorted(m.name for m in t.getmembers() if m.isreg()) == ["arch/arch.sigmf-data", "arch/arch.sigmf-meta"]
    (tmp_path / "arch.sigmf-data").unlink()          # only the archive is left: nothing extracted beside it
    (tmp_path / "arch.sigmf-meta").unlink()
    r = open_capture(archive)
    assert (r.info.path, r.info.data_path, r.info.samples) == (archive, archive, 50_000)
    np.testing.assert_array_equal(np.concatenate(list(r.blocks(7919))), x)   # blocks of a prime
    np.testing.assert_array_equal(np.concatenate(list(r.blocks(1000, start_s=12345 / FS, duration_s=0.01))),
                                  x[12345:12345 + 2500])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["arch.sigmf"]
    rc, out, err = run(["info", archive, "--json", "--quiet"], capsys)
    assert rc == 0, err
    d = json.loads(out)
    assert d["carriers"][0]["freq_hz"] == CENTER + 20e3
    assert d["carriers"][0]["level_dbfs"] == pytest.approx(20 * np.log10(0.5), abs=0.05)


def test_archive_errors_are_one_line(tmp_path, capsys):
    bad = tmp_path / "bad.sigmf"
    bad.write_bytes(b"this is not a tar file" * 100)
    rc, out, err = run(["info", bad], capsys)
    assert rc == 2 and err.startswith("sdrx: error: ") and err.count("\n") == 1
    assert "not a SigMF archive" in err and str(bad) in err
    # a tar with two recordings
    two = tmp_path / "two.sigmf"
    with tarfile.open(two, "w") as t:
        for name in ("a/a.sigmf-meta", "b/b.sigmf-meta"):
            p = tmp_path / "m.json"
            p.write_text(json.dumps({"global": {"core:datatype": "cf32_le", "core:sample_rate": 1e3}}))
            t.add(p, arcname=name)
    with pytest.raises(CaptureError, match="holds 2 recordings"):
        open_capture(two)
    # metadata without its data member
    lone = tmp_path / "lone.sigmf"
    with tarfile.open(lone, "w") as t:
        t.add(p, arcname="a/a.sigmf-meta")
    rc, out, err = run(["info", lone], capsys)
    assert rc == 2 and "not its data member a/a.sigmf-data" in err
