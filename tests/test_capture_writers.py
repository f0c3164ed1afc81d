"""Capture writers (SigMF, WAV/RF64) and the audio writer: content, format, atomicity, determinism."""

import hashlib
import json
import struct

import numpy as np
import pytest
import soundfile

import sdrx.capture.wavio as wavio
from sdrx.capture import KNOWN_DATATYPES, AudioWriter, open_capture, open_writer, parse_datatype
from sdrx.errors import OutputError, ParameterError


@pytest.fixture
def rng():
    return np.random.default_rng(1981)


def signal(dt, n, rng, amp=0.9):
    x = rng.uniform(-amp, amp, n)
    if dt.is_complex:
        x = x + 1j * rng.uniform(-amp, amp, n)
    return x


def write(path, x, block=1000, **kw):
    with open_writer(path, **kw) as w:
        clipped = sum(w.write(x[i:i + block]) for i in range(0, len(x), block))
    return clipped


# --- SigMF -----------------------------------------------------------------------------------------

@pytest.mark.parametrize("name", KNOWN_DATATYPES)
def test_sigmf_round_trip_every_datatype(name, tmp_path, rng):
    dt = parse_datatype(name)
    x = signal(dt, 2500, rng)
    center = 1.3e6 if dt.is_complex else None
    clipped = write(tmp_path / "r.sigmf-data", x, fs=2.4e6, kind=dt.kind, datatype=name, center_hz=center)
    assert clipped == 0
    r = open_capture(tmp_path / "r.sigmf-meta")
    assert (r.info.datatype, r.info.kind, r.info.fs, r.info.center_hz, r.info.samples) == (name, dt.kind, 2.4e6, center, 2500)
    y = r.read()
    step = 2.0 ** -23 if dt.is_float else dt.scale
    assert np.max(np.abs(y.real - x.real)) <= step / 2 + 1e-7
    assert np.max(np.abs(np.imag(y) - np.imag(x))) <= step / 2 + 1e-7


def test_sigmf_meta_has_fields_the_spec_requires(tmp_path, rng):
    x = signal(parse_datatype("ci16_le"), 100, rng)
    ann = [{"core:sample_start": 50, "core:label": "station B"}, {"core:sample_start": 0, "core:label": "station A"}]
    write(tmp_path / "m.sigmf-meta", x, fs=2.4e6, kind="iq", datatype="ci16_le", center_hz=1.1e6,
          meta={"description": "test capture", "annotations": ann})
    doc = json.loads((tmp_path / "m.sigmf-meta").read_text())
    # source: SigMF specification v1.0.0, core namespace: top-level global, captures, annotations;
    # global requires core:datatype and core:version ("X.Y.Z"); each capture and annotation
    # segment requires core:sample_start; annotations sorted by core:sample_start
    assert set(doc) == {"global", "captures", "annotations"}
    g = doc["global"]
    assert g["core:datatype"] == "ci16_le"
    assert g["core:version"] == "1.0.0"
    assert g["core:sample_rate"] == 2.4e6
    assert g["core:description"] == "test capture"
    assert g["core:recorder"].startswith("sdrx")
    assert doc["captures"] == [{"core:sample_start": 0, "core:frequency": 1.1e6}]
    assert [a["core:sample_start"] for a in doc["annotations"]] == [0, 50]
    # core:sha512 is the SHA-512 of the dataset file
    assert g["core:sha512"] == hashlib.sha512((tmp_path / "m.sigmf-data").read_bytes()).hexdigest()
    assert "core:datetime" not in json.dumps(doc)  # no time of writing unless given


def test_sigmf_deterministic_bytes_any_block_size(tmp_path, rng):
    x = signal(parse_datatype("cf32_le"), 5000, rng)
    kw = dict(fs=1e6, kind="iq", datatype="cu8", center_hz=1e6)
    write(tmp_path / "a.sigmf-meta", x, block=7, **kw)
    write(tmp_path / "b.sigmf-meta", x, block=5000, **kw)
    for suffix in (".sigmf-data",):
        assert (tmp_path / f"a{suffix}").read_bytes() == (tmp_path / f"b{suffix}").read_bytes()
    ma = (tmp_path / "a.sigmf-meta").read_text()
    mb = (tmp_path / "b.sigmf-meta").read_text()
    assert ma == mb


def test_sigmf_iq_needs_center(tmp_path):
    with pytest.raises(ParameterError, match="needs center_hz"):
        open_writer(tmp_path / "x.sigmf-meta", fs=1e6, kind="iq", datatype="ci16_le")
    assert list(tmp_path.iterdir()) == []


def test_kind_datatype_mismatch(tmp_path):
    with pytest.raises(ParameterError, match="datatype ri16_le: is real, but kind is 'iq'"):
        open_writer(tmp_path / "x.sigmf-meta", fs=1e6, kind="iq", datatype="ri16_le", center_hz=1e6)


def test_clipping_counted(tmp_path):
    x = np.array([0.5, 1.5, -2.0, 0.1], dtype=np.float64)
    with open_writer(tmp_path / "c.sigmf-meta", fs=1e3, kind="real", datatype="ri16_le") as w:
        assert w.write(x) == 2
        assert w.write(x) == 2
    assert w.clipped == 4 and w.samples == 8
    y = open_capture(tmp_path / "c.sigmf-meta").read()
    np.testing.assert_array_equal(y[:4], np.array([0.5, 32767 / 32768, -1.0, 3277 / 32768], np.float32))


def test_error_inside_with_leaves_nothing(tmp_path, rng):
    with pytest.raises(RuntimeError):
        with open_writer(tmp_path / "z.sigmf-meta", fs=1e6, kind="iq", datatype="ci16_le", center_hz=1e6) as w:
            w.write(signal(parse_datatype("ci16_le"), 10, rng))
            raise RuntimeError("interrupted")
    assert list(tmp_path.iterdir()) == []


def test_existing_output_needs_force_and_is_kept(tmp_path, rng):
    x = signal(parse_datatype("ci16_le"), 10, rng)
    kw = dict(fs=1e6, kind="iq", datatype="ci16_le", center_hz=1e6)
    write(tmp_path / "o.sigmf-meta", x, **kw)
    before = (tmp_path / "o.sigmf-data").read_bytes()
    with pytest.raises(OutputError, match=r"-o .*o.sigmf-meta: exists already; pass --force"):
        open_writer(tmp_path / "o.sigmf-meta", **kw)
    assert (tmp_path / "o.sigmf-data").read_bytes() == before
    write(tmp_path / "o.sigmf-data", 0.5 * x, force=True, **kw)
    assert (tmp_path / "o.sigmf-data").read_bytes() != before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["o.sigmf-data", "o.sigmf-meta"]


def test_output_that_is_an_input_refused(tmp_path, rng):
    src = tmp_path / "in.wav"
    soundfile.write(src, np.zeros(10), 8000)
    before = src.read_bytes()
    with pytest.raises(OutputError, match="is one of the inputs"):
        open_writer(src, fs=8000, kind="real", datatype="ri16_le", inputs=[src], force=True)
    with pytest.raises(OutputError, match="is one of the inputs"):
        AudioWriter(src, 8000, inputs=[src], force=True)
    assert src.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["in.wav"]


# --- WAV captures ----------------------------------------------------------------------------------

@pytest.mark.parametrize("name, subtype, channels", [
    ("ri16_le", "PCM_16", 1), ("ci16_le", "PCM_16", 2), ("rf32_le", "FLOAT", 1), ("cf32_le", "FLOAT", 2),
])
def test_wav_capture_read_by_soundfile(name, subtype, channels, tmp_path, rng):
    dt = parse_datatype(name)
    x = signal(dt, 3001, rng)
    p = tmp_path / "w.wav"
    write(p, x, block=777, fs=96000, kind=dt.kind, datatype=name)
    info = soundfile.info(p)  # source: soundfile (libsndfile) as reference library
    assert (info.format, info.subtype, info.channels, info.samplerate, info.frames) == ("WAV", subtype, channels, 96000, 3001)
    ref, _ = soundfile.read(p, dtype="float64", always_2d=True)
    ref_x = ref[:, 0] + 1j * ref[:, 1] if channels == 2 else ref[:, 0]
    step = 2.0 ** -23 if dt.is_float else 1 / 32768
    np.testing.assert_allclose(ref_x.real, x.real, rtol=0, atol=step / 2 + 1e-9)
    np.testing.assert_allclose(np.imag(ref_x), np.imag(x), rtol=0, atol=step / 2 + 1e-9)
    # sdrx's reader sees the same samples as soundfile
    got = open_capture(p, center_hz=1e6 if channels == 2 else None).read()
    np.testing.assert_array_equal(got, ref_x.astype(got.dtype))


def test_wav_capture_deterministic_and_tags(tmp_path, rng):
    x = signal(parse_datatype("cf32_le"), 500, rng)
    kw = dict(fs=48000, kind="iq", datatype="cf32_le", meta={"description": "two stations"})
    write(tmp_path / "a.wav", x, block=3, **kw)
    write(tmp_path / "b.wav", x, block=500, **kw)
    assert (tmp_path / "a.wav").read_bytes() == (tmp_path / "b.wav").read_bytes()
    with soundfile.SoundFile(tmp_path / "a.wav") as f:  # source: RIFF INFO tags read by libsndfile
        assert f.comment == "two stations"
        assert f.software.startswith("sdrx")


def test_wav_capture_refuses_sigmf_only_meta_and_other_datatypes(tmp_path):
    with pytest.raises(ParameterError, match="meta.annotations: a WAV capture cannot hold it"):
        open_writer(tmp_path / "a.wav", fs=8000, kind="real", datatype="ri16_le",
                    meta={"annotations": [{"core:sample_start": 0}]})
    with pytest.raises(ParameterError, match="datatype cu8: a WAV capture holds one of"):
        open_writer(tmp_path / "a.wav", fs=8000, kind="iq", datatype="cu8")
    with pytest.raises(ParameterError, match="whole positive number of samples per second"):
        open_writer(tmp_path / "a.wav", fs=8000.5, kind="real", datatype="ri16_le")
    assert list(tmp_path.iterdir()) == []


def test_wav_header_layout_plain(tmp_path):
    p = tmp_path / "h.wav"
    write(p, np.array([0.5, -0.5]), fs=8000, kind="real", datatype="ri16_le", expected_samples=2)
    b = p.read_bytes()
    # source: RIFF/WAVE format (Microsoft multimedia specification): RIFF size = file size - 8
    assert b[:4] == b"RIFF" and struct.unpack("<I", b[4:8])[0] == len(b) - 8 and b[8:12] == b"WAVE"
    assert b"JUNK" not in b and b[-4:] == struct.pack("<hh", 16384, -16384)


@pytest.mark.parametrize("expected", [None, 4000])
def test_rf64_when_over_the_riff_limit(expected, tmp_path, rng, monkeypatch):
    # a small limit stands in for 4 GiB so that the RF64 path runs in a test
    monkeypatch.setattr(wavio, "RIFF_LIMIT", 2000)
    x = signal(parse_datatype("ci16_le"), 4000, rng)
    p = tmp_path / "big.wav"
    write(p, x, fs=48000, kind="iq", datatype="ci16_le", expected_samples=expected)
    b = p.read_bytes()
    # source: EBU Tech 3306 (RF64): 'RF64', size 0xFFFFFFFF, ds64 chunk with 64-bit sizes
    assert b[:4] == b"RF64" and b[4:8] == b"\xff\xff\xff\xff" and b[12:16] == b"ds64"
    riff, data, frames = struct.unpack("<QQQ", b[20:44])
    assert riff == len(b) - 8 and data == 4000 * 4 and frames == 4000
    info = soundfile.info(p)  # source: soundfile (libsndfile) reads RF64
    assert info.format == "RF64" and info.frames == 4000
    ref, _ = soundfile.read(p, dtype="float32")
    np.testing.assert_array_equal(open_capture(p, center_hz=1e6).read(), ref[:, 0] + 1j * ref[:, 1])


def test_small_file_with_reserved_header_stays_wav(tmp_path, rng):
    p = tmp_path / "s.wav"
    write(p, signal(parse_datatype("ri16_le"), 100, rng), fs=8000, kind="real", datatype="ri16_le")
    b = p.read_bytes()
    assert b[:4] == b"RIFF" and b[12:16] == b"JUNK" and soundfile.info(p).format == "WAV"


def test_announced_wav_cannot_grow_past_limit(tmp_path, monkeypatch):
    monkeypatch.setattr(wavio, "RIFF_LIMIT", 200)
    with pytest.raises(OutputError, match="more samples than announced"):
        with open_writer(tmp_path / "a.wav", fs=8000, kind="real", datatype="ri16_le", expected_samples=10) as w:
            w.write(np.zeros(500))
    assert list(tmp_path.iterdir()) == []


# --- AudioWriter -----------------------------------------------------------------------------------

def test_audio_pcm16_mono_agrees_with_soundfile(tmp_path, rng):
    x = rng.uniform(-1.2, 1.2, 4000)
    p = tmp_path / "a.wav"
    with AudioWriter(p, 11025, expected_samples=4000) as a:
        for i in range(0, 4000, 999):
            a.write(x[i:i + 999])
    want_clipped = int(np.count_nonzero((np.rint(x * 32768) > 32767) | (np.rint(x * 32768) < -32768)))
    assert a.clipped == want_clipped > 0
    info = soundfile.info(p)  # source: soundfile as reference library
    assert (info.subtype, info.channels, info.samplerate, info.frames) == ("PCM_16", 1, 11025, 4000)
    ref, _ = soundfile.read(p, dtype="int16")
    np.testing.assert_array_equal(ref, np.clip(np.rint(x * 32768), -32768, 32767).astype(np.int16))


def test_audio_float_stereo(tmp_path, rng):
    x = rng.uniform(-1.1, 1.1, (1000, 2))
    p = tmp_path / "f.wav"
    with AudioWriter(p, 48000, float_output=True, channels=2) as a:
        assert a.write(x[:500]) == int(np.count_nonzero(np.abs(x[:500]) > 1))
        a.write(x[500:])
    ref, fs = soundfile.read(p, dtype="float32")
    assert fs == 48000 and soundfile.info(p).subtype == "FLOAT"
    np.testing.assert_array_equal(ref, x.astype(np.float32))  # float output is not clipped


def test_audio_deterministic(tmp_path, rng):
    x = rng.uniform(-1, 1, 3000)
    for name, bs in (("a.wav", 1), ("b.wav", 3000)):
        with AudioWriter(tmp_path / name, 8000, float_output=True) as a:
            for i in range(0, 3000, bs):
                a.write(x[i:i + bs])
    assert (tmp_path / "a.wav").read_bytes() == (tmp_path / "b.wav").read_bytes()


def test_audio_refuses_existing_and_bad_shapes(tmp_path):
    p = tmp_path / "e.wav"
    p.write_bytes(b"keep")
    with pytest.raises(OutputError, match="exists already; pass --force"):
        AudioWriter(p, 8000)
    assert p.read_bytes() == b"keep"
    q = tmp_path / "s.wav"
    with pytest.raises(ParameterError, match=r"expected blocks of shape \(n, 2\)"):
        with AudioWriter(q, 8000, channels=2) as a:
            a.write(np.zeros(10))
    assert not q.exists() and sorted(x.name for x in tmp_path.iterdir()) == ["e.wav"]


def test_audio_rate_from_a_quotient_is_accepted(tmp_path):
    fs = 2.4e6 / 150 * (1 + 1e-15)  # float rounding of a computed rate
    with AudioWriter(tmp_path / "q.wav", fs) as a:
        a.write(np.zeros(10))
    assert soundfile.info(tmp_path / "q.wav").samplerate == 16000


# --- property test over WAV headers and block sizes ------------------------------------------------

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(["ri16_le", "ci16_le", "rf32_le", "cf32_le"]), n=st.integers(0, 300),
       block=st.integers(1, 400), fs=st.integers(1000, 10_000_000), expected=st.booleans(),
       desc=st.one_of(st.none(), st.text(max_size=20)), seed=st.integers(0, 2**32 - 1))
def test_property_wav_capture_headers(tmp_path, name, n, block, fs, expected, desc, seed):
    dt = parse_datatype(name)
    x = signal(dt, n, np.random.default_rng(seed))
    p = tmp_path / f"h{seed}.wav"
    meta = {"description": desc} if desc else None
    write(p, x, block=block, fs=fs, kind=dt.kind, datatype=name, meta=meta,
          expected_samples=n if expected else None, force=True)
    info = soundfile.info(p)  # source: soundfile (libsndfile) parses the header
    assert (info.samplerate, info.frames, info.channels) == (fs, n, dt.components)
    assert info.subtype == ("FLOAT" if dt.is_float else "PCM_16")
    b = p.read_bytes()
    assert struct.unpack("<I", b[4:8])[0] == len(b) - 8  # RIFF size field
    if n:
        r = open_capture(p, center_hz=max(1e6, fs / 2) if dt.is_complex else None)
        ref, _ = soundfile.read(p, dtype="float32", always_2d=True)
        want = ref[:, 0] + 1j * ref[:, 1] if dt.is_complex else ref[:, 0]
        got = np.concatenate(list(r.blocks(block)))
        np.testing.assert_array_equal(got, want.astype(got.dtype))
