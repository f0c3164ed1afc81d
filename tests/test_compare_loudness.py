"""Loudness matching (sdrx.compare.loudness) against pyloudnorm, the BS.1770 reference library."""

import numpy as np
import pyloudnorm
import pytest
import soundfile as sf

from sdrx.compare.loudness import apply_gain, integrated_loudness, match_loudness
from sdrx.errors import ParameterError

FS = 48000.0


@pytest.fixture
def rng():
    return np.random.default_rng(20240605)


def _programme(rng, seconds, cutoff_hz, level):
    from scipy import signal

    noise = rng.standard_normal(int(seconds * FS))
    sos = signal.butter(6, cutoff_hz, fs=FS, output="sos")
    x = signal.sosfilt(sos, noise)
    return level * x / np.max(np.abs(x))


def test_matched_wavs_measure_equal_loudness_independently(tmp_path, rng):
    sigs = [_programme(rng, 3.0, 7000, 0.9), _programme(rng, 3.0, 2500, 0.05), _programme(rng, 3.0, 4000, 0.3)]
    m = match_loudness(sigs, FS)
    meter = pyloudnorm.Meter(FS)
    measured = []
    for i, (x, g) in enumerate(zip(sigs, m.gain_db)):
        y = apply_gain(x, g)
        q = np.clip(np.round(y * 32768), -32768, 32767).astype(np.int16)
        p = tmp_path / f"{i}.wav"
        sf.write(p, q, int(FS), subtype="PCM_16")
        back, fs = sf.read(p, dtype="float64")
        measured.append(meter.integrated_loudness(back))
        # no clipping: every peak at or below the -1 dBFS limit
        assert np.max(np.abs(back)) <= 10 ** (-1 / 20) + 1 / 32768
    # source: ITU-R BS.1770 via pyloudnorm
    np.testing.assert_allclose(measured, m.target_lufs, atol=0.1)
    assert max(measured) - min(measured) <= 0.1


def test_target_is_set_by_the_output_with_least_headroom(rng):
    x = _programme(rng, 2.0, 3000, 0.5)
    spiky = x.copy()
    spiky[1000] = 1.0  # same loudness, much higher peak
    m = match_loudness([x, spiky], FS)
    assert m.limiting == 1
    # the limiting output's peak lands exactly on -1 dBFS; the other's below it
    peak_after = m.peak_dbfs[1] + m.gain_db[1]
    np.testing.assert_allclose(peak_after, -1.0, atol=1e-9)
    assert m.peak_dbfs[0] + m.gain_db[0] < -1.0
    # recompute the rule from its formula: T = min_i(L_i - 1 - P_i)
    expect = min(lu - 1.0 - pk for lu, pk in zip(m.before_lufs, m.peak_dbfs))
    np.testing.assert_allclose(m.target_lufs, expect, rtol=0, atol=1e-12)


def test_loudness_scales_with_gain(rng):
    x = _programme(rng, 2.0, 4000, 0.2)
    a = integrated_loudness(x, FS)
    b = integrated_loudness(apply_gain(x, 6.0), FS)
    # source: ITU-R BS.1770 via pyloudnorm (a mean-square measure: +6 dB gain, +6 LU)
    np.testing.assert_allclose(b - a, 6.0, atol=1e-6)


def test_silent_output_is_an_error():
    with pytest.raises(ParameterError, match="wide: output is silent"):
        match_loudness([np.zeros(48000), np.ones(48000) * 0.1], FS, names=["wide", "medium"])


def test_too_short_is_an_error():
    with pytest.raises(ParameterError, match="too short to measure loudness"):
        integrated_loudness(np.ones(1000), FS)
