"""Capture readers: SigMF, raw, WAV/RF64/W64; metadata, excerpts, block invariance, errors."""

import json

import numpy as np
import pytest
import soundfile
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sdrx.capture import KNOWN_DATATYPES, open_capture, parse_datatype
from sdrx.errors import CaptureError, ParameterError


@pytest.fixture
def rng():
    return np.random.default_rng(7919)


def write_sigmf(base, codes, datatype, fs=2.4e6, freq=1.3e6, extra_global=None, capture=None, header=b""):
    meta = {"global": {"core:datatype": datatype, "core:version": "1.0.0", "core:sample_rate": fs},
            "captures": [{"core:sample_start": 0}], "annotations": []}
    if freq is not None:
        meta["captures"][0]["core:frequency"] = freq
    if header:
        meta["captures"][0]["core:header_bytes"] = len(header)
    meta["global"].update(extra_global or {})
    meta["captures"][0].update(capture or {})
    base.with_suffix(".sigmf-meta").write_text(json.dumps(meta))
    base.with_suffix(".sigmf-data").write_bytes(header + np.asarray(codes).tobytes())
    return base.with_suffix(".sigmf-meta"), base.with_suffix(".sigmf-data")


def random_codes(dt, n, rng):
    if dt.is_float:
        return (rng.standard_normal(n * dt.components) * 0.3).astype(dt.component_dtype)
    lo, hi = dt.code_range
    return rng.integers(lo, hi, n * dt.components, endpoint=True).astype(dt.component_dtype)


# --- SigMF -----------------------------------------------------------------------------------------

def test_sigmf_metadata_from_either_file(tmp_path, rng):
    dt = parse_datatype("ci16_le")
    codes = random_codes(dt, 1000, rng)
    meta, data = write_sigmf(tmp_path / "rec", codes, "ci16_le", fs=2.4e6, freq=1.33e6)
    for named in (meta, data):
        info = open_capture(named).info
        assert info.path == meta and info.data_path == data
        assert (info.fs, info.center_hz, info.kind, info.datatype, info.samples) == (2.4e6, 1.33e6, "iq", "ci16_le", 1000)
        assert info.seconds == pytest.approx(1000 / 2.4e6, rel=1e-12)
        assert info.band_hz == (1.33e6 - 1.2e6, 1.33e6 + 1.2e6)
    j = open_capture(meta).info.to_json()
    assert set(j) == {"path", "rate_hz", "center_hz", "kind", "datatype", "samples", "seconds"}


def test_sigmf_ci16_values_and_dtype(tmp_path):
    codes = np.array([16384, -16384, -32768, 32767], dtype="<i2")
    meta, _ = write_sigmf(tmp_path / "v", codes, "ci16_le")
    x = open_capture(meta).read()
    assert x.dtype == np.complex64
    np.testing.assert_array_equal(x, np.array([0.5 - 0.5j, -1.0 + 32767 / 32768 * 1j], dtype=np.complex64))


def test_sigmf_real_has_no_center(tmp_path, rng):
    meta, _ = write_sigmf(tmp_path / "r", random_codes(parse_datatype("rf32_le"), 64, rng), "rf32_le", freq=5e5)
    info = open_capture(meta).info
    assert info.kind == "real" and info.center_hz is None and info.band_hz == (0.0, 1.2e6)


def test_sigmf_header_bytes_skipped(tmp_path):
    codes = np.array([1, 2, 3, 4], dtype="<i2")
    meta, _ = write_sigmf(tmp_path / "h", codes, "ci16_le", header=b"HEADER")
    r = open_capture(meta)
    assert r.info.samples == 2
    np.testing.assert_array_equal(r.read(), (codes[0::2] + 1j * codes[1::2]) / 32768)


def test_sigmf_center_fills_missing_frequency(tmp_path, rng):
    meta, _ = write_sigmf(tmp_path / "c", random_codes(parse_datatype("cu8"), 10, rng), "cu8", freq=None)
    assert open_capture(meta, center_hz="1.3M").info.center_hz == 1.3e6
    meta2, _ = write_sigmf(tmp_path / "d", random_codes(parse_datatype("cu8"), 10, rng), "cu8", freq=1.4e6)
    with pytest.raises(ParameterError, match="contradicts core:frequency"):
        open_capture(meta2, center_hz="1.3M")


@pytest.mark.parametrize("name", ["ci16_le", "cf32_le", "cu8", "ci8", "ri16_le", "rf32_le", "ci32_be", "rf64_le"])
def test_sigmf_values_match_datatype_decode(name, tmp_path, rng):
    dt = parse_datatype(name)
    codes = random_codes(dt, 333, rng)
    meta, _ = write_sigmf(tmp_path / name, codes, name)
    np.testing.assert_array_equal(open_capture(meta).read(), dt.decode(codes.copy()))


# --- raw -------------------------------------------------------------------------------------------

def test_raw_requires_rate_and_center(tmp_path):
    p = tmp_path / "band.cs8"
    np.zeros(8, np.int8).tofile(p)
    info = open_capture(p, datatype="ci8", fs="250k", center_hz="1M").info
    assert (info.fs, info.center_hz, info.samples, info.kind) == (250e3, 1e6, 4, "iq")
    with pytest.raises(CaptureError, match="needs its sample rate"):
        open_capture(p, datatype="ci8", center_hz="1M")
    with pytest.raises(CaptureError, match=r"band.cs8: I/Q datatype ci8 needs a centre frequency"):
        open_capture(p, datatype="ci8", fs="250k")
    with pytest.raises(ParameterError, match="--rate: sample rate must be positive"):
        open_capture(p, datatype="ci8", fs=0, center_hz="1M")


def test_raw_size_not_whole_samples(tmp_path):
    p = tmp_path / "odd.bin"
    p.write_bytes(bytes(10))
    with pytest.raises(CaptureError, match=r"odd.bin: size 10 bytes is not a whole number of cf32_le samples \(8 bytes"):
        open_capture(p, datatype="cf32_le", fs=1e6, center_hz=1e6)


def test_unknown_suffix_without_format(tmp_path):
    p = tmp_path / "mystery.dat"
    p.write_bytes(bytes(4))
    with pytest.raises(CaptureError, match="unknown capture type"):
        open_capture(p)


def test_format_with_header_file_refused(tmp_path):
    p = tmp_path / "a.wav"
    soundfile.write(p, np.zeros(10), 8000)
    with pytest.raises(ParameterError, match="--format/--rate: apply to headerless raw files"):
        open_capture(p, datatype="ri16_le")


# --- WAV / RF64 / W64 through soundfile ------------------------------------------------------------

@pytest.mark.parametrize("fmt, subtype, datatype", [
    ("WAV", "PCM_16", "16_le"), ("WAV", "FLOAT", "f32_le"), ("WAV", "PCM_24", "24_le"),
    ("RF64", "PCM_16", "16_le"), ("W64", "FLOAT", "f32_le"), ("WAV", "DOUBLE", "f64_le"),
])
@pytest.mark.parametrize("channels", [1, 2])
def test_wav_family_agrees_with_soundfile(fmt, subtype, datatype, channels, tmp_path, rng):
    suffix = {"WAV": ".wav", "RF64": ".rf64", "W64": ".w64"}[fmt]
    p = tmp_path / f"cap{suffix}"
    data = rng.uniform(-0.9, 0.9, (4001, channels))
    soundfile.write(p, data, 96000, format=fmt, subtype=subtype)
    r = open_capture(p, center_hz="1M" if channels == 2 else None)
    kind_prefix = "c" if channels == 2 else "r"
    assert r.info.datatype == (kind_prefix + ("i" + datatype if datatype[0].isdigit() else datatype))
    assert r.info.kind == ("iq" if channels == 2 else "real")
    assert r.info.samples == 4001 and r.info.fs == 96000
    ref, _ = soundfile.read(p, dtype="float32", always_2d=True)  # source: soundfile as reference library
    want = ref[:, 0] + 1j * ref[:, 1] if channels == 2 else ref[:, 0]
    got = r.read()
    assert got.dtype == (np.complex64 if channels == 2 else np.float32)
    np.testing.assert_array_equal(got, want.astype(got.dtype))


def test_wav_stereo_needs_center(tmp_path):
    p = tmp_path / "iq.wav"
    soundfile.write(p, np.zeros((10, 2)), 48000)
    with pytest.raises(CaptureError, match=r"iq.wav: stereo file is I/Q; give its centre frequency with --center"):
        open_capture(p)


def test_wav_more_than_two_channels(tmp_path):
    p = tmp_path / "three.wav"
    soundfile.write(p, np.zeros((10, 3)), 48000)
    with pytest.raises(CaptureError, match=r"three.wav: has 3 channels; a capture has 1 \(real RF\) or 2 \(I/Q\)"):
        open_capture(p)


def test_wav_mono_refuses_center(tmp_path):
    p = tmp_path / "rf.wav"
    soundfile.write(p, np.zeros(10), 48000)
    with pytest.raises(ParameterError, match="--center: applies to I/Q captures"):
        open_capture(p, center_hz="1M")


# --- excerpts, blocks, non-finite samples ----------------------------------------------------------

def test_start_and_duration_seek(tmp_path, rng):
    dt = parse_datatype("ci16_le")
    codes = random_codes(dt, 10000, rng)
    meta, _ = write_sigmf(tmp_path / "e", codes, "ci16_le", fs=1000.0)
    r = open_capture(meta)
    whole = r.read()
    assert r.sample_range(2.5, 1.0) == (2500, 1000)
    np.testing.assert_array_equal(r.read(2.5, 1.0), whole[2500:3500])
    assert r.sample_range("9.5", "0.5") == (9500, 500)
    # an excerpt past the end is refused with both lengths (it was cut silently)
    with pytest.raises(CaptureError, match=r"--duration 5 s from --start 9.5 s runs to 14.5 s, past the end of the "
                                           r"capture \(10 s\); at most 0.5 s from there"):
        r.sample_range("9.5", "5")
    with pytest.raises(CaptureError, match=r"e.sigmf-meta: --start 10 s is past the end of the capture \(10 s\)"):
        r.sample_range(10.0)
    with pytest.raises(CaptureError, match="past the end"):
        r.blocks(start_s=11)


def test_blocks_do_not_read_before_start(tmp_path, rng, monkeypatch):
    # seeking, not reading and discarding: the first read starts at the excerpt
    meta, _ = write_sigmf(tmp_path / "s", random_codes(parse_datatype("ci16_le"), 5000, rng), "ci16_le", fs=1000.0)
    r = open_capture(meta)
    counts = []
    original = np.fromfile

    def spy(f, dtype=float, count=-1, **kw):
        counts.append((f.tell(), count))
        return original(f, dtype=dtype, count=count, **kw)

    monkeypatch.setattr(np, "fromfile", spy)
    blocks = list(r.blocks(1000, start_s=4.0))
    assert counts == [(4000 * 4, 2000)]
    assert sum(b.shape[0] for b in blocks) == 1000


@pytest.mark.parametrize("make", ["sigmf_ci16", "sigmf_cf32", "wav_stereo", "wav_mono", "raw_cu8"])
def test_block_invariance_1_prime_and_more_than_length(make, tmp_path, rng):
    n = 9001
    if make.startswith("sigmf"):
        name = "ci16_le" if make == "sigmf_ci16" else "cf32_le"
        path, _ = write_sigmf(tmp_path / "b", random_codes(parse_datatype(name), n, rng), name)
        kw = {}
    elif make.startswith("wav"):
        ch = 2 if make == "wav_stereo" else 1
        path = tmp_path / "b.wav"
        soundfile.write(path, rng.uniform(-1, 1, (n, ch)), 48000, subtype="PCM_16")
        kw = {"center_hz": 1e6} if ch == 2 else {}
    else:
        path = tmp_path / "b.cu8"
        random_codes(parse_datatype("cu8"), n, rng).tofile(path)
        kw = {"datatype": "cu8", "fs": 1e6, "center_hz": 1e6}
    r = open_capture(path, **kw)
    ref = np.concatenate(list(r.blocks(n + 1000)))
    assert ref.shape == (n,)
    for bs in (1, 7919):
        blocks = list(r.blocks(bs))
        assert all(b.shape[0] == bs for b in blocks[:-1])
        np.testing.assert_array_equal(np.concatenate(blocks), ref)
    # and with an excerpt
    np.testing.assert_array_equal(np.concatenate(list(r.blocks(7, start_s=1000 / r.info.fs))), ref[1000:])


@pytest.mark.parametrize("bad, what", [(np.nan, "NaN"), (np.inf, "infinite"), (-np.inf, "infinite")])
def test_nonfinite_float_sample_reported_with_position(bad, what, tmp_path, rng):
    codes = (rng.standard_normal(2 * 3000) * 0.1).astype("<f4")
    codes[2 * 2345 + 1] = bad  # Q of sample 2345
    meta, data = write_sigmf(tmp_path / "nf", codes, "cf32_le", fs=1000.0)
    r = open_capture(meta)
    with pytest.raises(CaptureError, match=rf"nf.sigmf-data: sample 2345 \(t = 2.345000 s\) is {what}"):
        for _ in r.blocks(1000):
            pass
    # a block size that puts the bad sample at another offset reports the same index
    with pytest.raises(CaptureError, match="sample 2345 "):
        list(r.blocks(7919))


def test_nonfinite_in_float_wav(tmp_path):
    p = tmp_path / "f.wav"
    x = np.zeros(100, np.float32)
    x[42] = np.nan
    soundfile.write(p, x, 8000, subtype="FLOAT")
    with pytest.raises(CaptureError, match=r"f.wav: sample 42 .* is NaN"):
        open_capture(p).read()


def test_large_finite_values_pass(tmp_path):
    # values whose float32 sum overflows are still finite: reported as beyond the float limit, not as NaN
    codes = np.full(64, 3e38, dtype="<f4")
    meta, _ = write_sigmf(tmp_path / "big", codes, "rf32_le")
    with pytest.raises(CaptureError, match=r"big.sigmf-data: sample 0 .* is 3e\+38, beyond 1e\+06"):
        open_capture(meta).read()
    codes = np.full(64, 9e5, dtype="<f4")     # +119 dBFS: odd but not refused
    meta, _ = write_sigmf(tmp_path / "loud", codes, "rf32_le")
    assert np.isfinite(open_capture(meta).read()).all()


# --- property tests over headers, datatypes and block sizes -----------------------------------------

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(KNOWN_DATATYPES), n=st.integers(1, 400), block=st.integers(1, 500),
       start=st.integers(0, 399), fs=st.floats(1e3, 1e8), where=st.floats(0.0, 1.0),
       header=st.integers(0, 64), seed=st.integers(0, 2**32 - 1))
def test_property_sigmf_header_and_blocks(tmp_path, name, n, block, start, fs, where, header, seed):
    dt = parse_datatype(name)
    freq = fs / 2 + where * (3e9 - fs)       # every centre whose I/Q band lies in 0 .. 3 GHz
    start = min(start, n - 1)
    codes = random_codes(dt, n, np.random.default_rng(seed))
    meta, data = write_sigmf(tmp_path / f"p{seed}", codes, name, fs=fs, freq=freq, header=bytes(header))
    r = open_capture(data)
    info = r.info
    assert info.samples == n and info.fs == fs and info.datatype == name
    assert info.center_hz == (freq if dt.is_complex else None)
    first, count = r.sample_range(start / fs)
    assert (first, count) == (start, n - start)
    got = np.concatenate(list(r.blocks(block, start_s=start / fs)))
    want = dt.decode(codes.copy())[start:]
    np.testing.assert_array_equal(got, want)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.sampled_from(KNOWN_DATATYPES), n=st.integers(1, 50), extra=st.integers(1, 15))
def test_property_partial_sample_always_refused(tmp_path, name, n, extra):
    dt = parse_datatype(name)
    extra = extra % dt.sample_bytes
    if extra == 0:
        return
    p = tmp_path / f"x_{name}_{n}_{extra}.raw"
    p.write_bytes(bytes(n * dt.sample_bytes + extra))
    with pytest.raises(CaptureError, match="not a whole number of"):
        open_capture(p, datatype=name, fs=1e6, center_hz=1e6 if dt.is_complex else None)


def test_memory_bounded_by_block_size_not_file_size(tmp_path):
    import tracemalloc

    peaks = []
    for n in (100_000, 1_000_000):
        p = tmp_path / f"m{n}.raw"
        np.zeros(2 * n, "<i2").tofile(p)
        r = open_capture(p, datatype="ci16_le", fs=1e6, center_hz=1e6)
        tracemalloc.start()
        total = 0
        for b in r.blocks(4096):
            total += b.shape[0]
        peaks.append(tracemalloc.get_traced_memory()[1])
        tracemalloc.stop()
        assert total == n
    # a tenfold larger file needs no more memory: a few blocks of 4096 samples (32 kB each)
    assert peaks[1] < 4 * 4096 * 8 + 64 * 1024
    assert peaks[1] <= 1.5 * peaks[0] + 16 * 1024
