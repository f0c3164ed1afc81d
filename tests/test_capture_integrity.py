"""A capture that is not what its metadata says: wrong SHA-512, cut short, a dataset outside its folder."""

import json

import numpy as np
import pytest
import soundfile as sf

from helpers_cli import run
from sdrx.capture import open_capture, open_writer
from sdrx.errors import CaptureError
from test_cli_errors import one_line


def _pair(tmp_path, name="r", n=20000):
    meta = tmp_path / f"{name}.sigmf-meta"
    rng = np.random.default_rng(1)
    with open_writer(meta, fs=240e3, kind="iq", datatype="ci16_le", center_hz=1e6) as w:
        w.write((0.1 * np.exp(2j * np.pi * 1e3 * np.arange(n) / 240e3)
                 + 1e-3 * rng.standard_normal(n)).astype(np.complex64))
    return meta, meta.with_name(f"{name}.sigmf-data")


def test_sha512_checked_on_a_whole_read(tmp_path, capsys):
    """sdrx writes core:sha512; a read of the whole data file checks it (hashlib, the standard's algorithm)."""
    import hashlib

    meta, data = _pair(tmp_path)
    doc = json.loads(meta.read_text())
    assert doc["global"]["core:sha512"] == hashlib.sha512(data.read_bytes()).hexdigest()
    assert open_capture(meta).read().size == 20000
    b = bytearray(data.read_bytes())
    b[1001] ^= 0x40
    data.write_bytes(bytes(b))
    with pytest.raises(CaptureError, match=r"r.sigmf-data: its SHA-512 .* does not match core:sha512 .* in .*r.sigmf-meta"):
        open_capture(meta).read()
    # the receiver's output is not written (the check runs before its set of files is committed)
    rc, out, err = run(["receive", meta, "--tune", "1M", "-o", tmp_path / "o.wav", "--summary",
                        tmp_path / "o.json"], capsys)
    one_line(rc, err, "does not match core:sha512")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.sigmf-data", "r.sigmf-meta"]
    rc, out, err = run(["info", meta], capsys)
    one_line(rc, err, "does not match core:sha512")
    # an excerpt reads part of the file only and is not checked
    assert open_capture(meta).read(0.01, 0.01).size == 2400


def test_sha512_with_header_bytes_and_a_malformed_digest(tmp_path):
    import hashlib

    meta, data = _pair(tmp_path)
    body = data.read_bytes()
    data.write_bytes(b"HDR!" * 4 + body)
    doc = json.loads(meta.read_text())
    doc["captures"][0]["core:header_bytes"] = 16
    doc["global"]["core:sha512"] = hashlib.sha512(data.read_bytes()).hexdigest()   # of the whole dataset file
    meta.write_text(json.dumps(doc))
    assert open_capture(meta).read().size == 20000
    doc["global"]["core:sha512"] = "abc"
    meta.write_text(json.dumps(doc))
    with pytest.raises(CaptureError, match=r"core:sha512 'abc' is not a SHA-512 digest \(128 hex digits\)"):
        open_capture(meta)


@pytest.mark.parametrize("dataset", ["../x.sigmf-data", "sub/x.sigmf-data", "/etc/passwd", "..", "", 3])
def test_dataset_must_be_a_plain_name(tmp_path, dataset):
    meta, _ = _pair(tmp_path)
    doc = json.loads(meta.read_text())
    doc["global"]["core:dataset"] = dataset
    meta.write_text(json.dumps(doc))
    with pytest.raises(CaptureError, match="core:dataset .* must be a plain file name beside the metadata"):
        open_capture(meta)


def test_sigmf_data_cut_short_against_its_annotations(tmp_path):
    meta, data = _pair(tmp_path)
    doc = json.loads(meta.read_text())
    del doc["global"]["core:sha512"]
    doc["annotations"] = [{"core:sample_start": 15000, "core:sample_count": 5000}]
    meta.write_text(json.dumps(doc))
    assert open_capture(meta).info.samples == 20000
    data.write_bytes(data.read_bytes()[: 4 * 12000])
    with pytest.raises(CaptureError, match=r"annotations\[0\] reaches sample 20000, but r.sigmf-data holds 12000 "
                                           r"samples \(cut short\?\)"):
        open_capture(meta)


@pytest.mark.parametrize("fmt, ext", [("WAV", "wav"), ("RF64", "rf64"), ("W64", "w64")])
def test_wav_cut_mid_data_is_refused(tmp_path, fmt, ext):
    """libsndfile reads the rest as a shorter file (checked here); the header's data size tells."""
    p = tmp_path / f"c.{ext}"
    sf.write(p, np.zeros((1000, 2)), 48000, format=fmt, subtype="PCM_16")
    assert open_capture(p, center_hz=1e6).info.samples == 1000
    p.write_bytes(p.read_bytes()[:-400])
    assert sf.info(str(p)).frames == 900        # source: soundfile (libsndfile) reads it as shorter
    with pytest.raises(CaptureError, match=r"its data chunk declares 4000 bytes but the file holds 3600 \(cut short\?\)"):
        open_capture(p, center_hz=1e6)


def test_sdrx_own_rf64_is_not_taken_for_cut(tmp_path):
    from sdrx.capture.wavio import WavStream

    s = WavStream(tmp_path / "big.wav", 48000, 1, "pcm16", expected_frames=None)
    s.write_codes(np.zeros(1000, np.int16))
    s.close()
    assert open_capture(tmp_path / "big.wav").info.samples == 1000


def test_float64_values_beyond_float32_warn_nothing(tmp_path, capsys):
    """cf64 samples of 1e300 (fuzz: a ci16 file declared cf64_le): one line, no numpy overflow warning."""
    import warnings

    p = tmp_path / "x.cf64"
    np.full(2000, 1e300, dtype="<f8").tofile(p)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rc, out, err = run(["info", p, "--format", "cf64_le", "--rate", "240k", "--center", "1M"], capsys)
    one_line(rc, err, "sample 0 (t = 0.000000 s) is infinite or beyond ±3.4e38")


def test_w64_chunk_size_beyond_any_file(tmp_path, capsys):
    """A W64 chunk size of 2^63 (fuzz: seek past any offset): a one-line error, not a ValueError."""
    import io
    import struct

    buf = io.BytesIO()
    sf.write(buf, np.zeros(100), 48000, format="W64", subtype="PCM_16")
    b = bytearray(buf.getvalue())
    for at in range(40, min(len(b) - 8, 120), 8):
        b2 = bytearray(b)
        b2[at:at + 8] = struct.pack("<Q", 2 ** 63 + 5)
        (tmp_path / "x.w64").write_bytes(bytes(b2))
        rc, out, err = run(["info", tmp_path / "x.w64", "--json", "--quiet"], capsys)
        assert rc in (0, 2) and "Traceback" not in err and len(err.strip().splitlines()) <= 1, (at, err)
