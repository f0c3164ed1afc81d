"""SigMF datatypes: names, scaling to full scale 1.0, quantisation on writing."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sdrx.capture import KNOWN_DATATYPES, parse_datatype
from sdrx.errors import ParameterError


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def test_required_datatypes_known():
    # source: SigMF specification, core:datatype (e.g. ci16_le, cf32_le, cu8, ci8, ri16_le, rf32_le)
    for name in ("ci16_le", "cf32_le", "cu8", "ci8", "ri16_le", "rf32_le", "ci32_le", "cf64_le",
                 "ri8", "ru8", "rf64_le", "ci16_be", "cf32_be"):
        assert name in KNOWN_DATATYPES
    # 8-bit types carry no byte-order suffix in SigMF
    assert "ci8_le" not in KNOWN_DATATYPES


@pytest.mark.parametrize("name, nbytes, kind", [
    ("ci16_le", 4, "iq"), ("cf32_le", 8, "iq"), ("cu8", 2, "iq"), ("ci8", 2, "iq"),
    ("ri16_le", 2, "real"), ("rf32_le", 4, "real"), ("cf64_be", 16, "iq"),
])
def test_sample_size_and_kind(name, nbytes, kind):
    dt = parse_datatype(name)
    assert dt.sample_bytes == nbytes
    assert dt.kind == kind


def test_scaling_convention():
    # int16 / 32768, int8 / 128, cu8 (v - 127.5) / 127.5 (sdrx's documented choice)
    assert parse_datatype("ri16_le").decode(np.array([-32768, 16384], "<i2")).tolist() == [-1.0, 0.5]
    assert parse_datatype("ri8").decode(np.array([-128, 64], "i1")).tolist() == [-1.0, 0.5]
    np.testing.assert_allclose(parse_datatype("ru8").decode(np.array([0, 255, 191], "u1")),
                               [-1.0, 1.0, (191 - 127.5) / 127.5], rtol=0, atol=1e-7)
    np.testing.assert_allclose(parse_datatype("ri32_le").decode(np.array([2**30], "<i4")), [0.5], rtol=0, atol=0)


def test_big_endian_decodes_same_values():
    v = np.array([1000, -2000, 32767, -32768])
    le = parse_datatype("ci16_le").decode(v.astype("<i2"))
    be = parse_datatype("ci16_be").decode(v.astype(">i2"))
    np.testing.assert_array_equal(le, be)
    assert le.dtype == np.complex64


def test_unknown_datatype_lists_known():
    with pytest.raises(ParameterError, match=r"--format: unknown datatype 'ci12_le'; known: .*ci16_le.*cu8"):
        parse_datatype("ci12_le", "--format")


def test_encode_clips_and_counts():
    codes, clipped = parse_datatype("ci8").encode(np.array([2.0 - 3.0j, 0.5 + 0.0j]))
    assert codes.tolist() == [127, -128, 64, 0]
    assert clipped == 2
    codes, clipped = parse_datatype("cu8").encode(np.array([0.0 + 1.0j]))
    # 0 -> 127.5 rounds half to even -> 128; +1.0 -> 255
    assert codes.tolist() == [128, 255] and clipped == 0


def test_encode_rejects_nonfinite():
    with pytest.raises(ParameterError, match="sample 1 to write is not finite"):
        parse_datatype("rf32_le").encode([0.0, np.nan])


@pytest.mark.parametrize("name", KNOWN_DATATYPES)
def test_every_datatype_round_trips_within_half_step(name, rng):
    dt = parse_datatype(name)
    n = 500
    x = rng.uniform(-0.99, 0.99, n)
    if dt.is_complex:
        x = x + 1j * rng.uniform(-0.99, 0.99, n)
    codes, clipped = dt.encode(x)
    assert clipped == 0
    y = dt.decode(codes)
    assert y.dtype == dt.output_dtype and y.shape == (n,)
    if dt.is_float:
        step = 2.0 ** -23  # float32 keeps 24 significant bits
    else:
        step = dt.scale  # one code
    err = np.abs(np.concatenate([np.atleast_1d(y.real - x.real), np.atleast_1d(np.imag(y) - np.imag(x))]))
    assert err.max() <= step / 2 + 1e-7


@settings(max_examples=60, deadline=None)
@given(name=st.sampled_from(KNOWN_DATATYPES), data=st.data())
def test_decode_inverts_encode_on_the_code_grid(name, data):
    dt = parse_datatype(name)
    if dt.is_float:
        vals = data.draw(st.lists(st.floats(-4, 4, width=32), min_size=dt.components, max_size=40))
    else:
        lo, hi = dt.code_range
        vals = data.draw(st.lists(st.integers(lo, hi), min_size=dt.components, max_size=40))
    vals = vals[: len(vals) - len(vals) % dt.components]
    codes = np.array(vals, dtype=dt.component_dtype)
    x = dt.decode(codes.copy())
    again, clipped = dt.encode(x)
    if dt.bits == 32 and dt.base != "f":
        # float32 holds 24 bits: codes come back within float32 rounding (the top code may round
        # up to 2**31 and clip back to 2**31 - 1)
        assert np.all(np.abs(again.astype(np.int64) - codes.astype(np.int64)) <= 2 ** 8)
    else:
        assert clipped == 0
        np.testing.assert_array_equal(again, codes)
