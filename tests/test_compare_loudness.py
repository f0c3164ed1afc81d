"""Loudness (sdrx.compare.loudness): ITU-R BS.1770 and EBU Tech 3341 test signals, and the matching rule.

The outside checks feed sdrx's own wrapper (integrated_loudness) with test signals generated here as the
published documents describe them, and compare with the values those documents give. The wrapper measures
one channel; BS.1770 sums the channels' weighted mean squares with gain 1 for left and right (BS.1770-4,
Annex 1, eq. (2)), so a two-channel signal with identical channels reads the one-channel loudness + 10·log10(2).
"""

import math

import numpy as np
import pyloudnorm
import pytest
import soundfile as sf
from scipy import signal

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
    meter = pyloudnorm.Meter(FS, filter_class="DeMan")
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
    # consistency check: the same BS.1770 meter (pyloudnorm) on the 16-bit files; the rounding to 16 bits
    # moves them by 1e-6 LU at most (measured); tolerance 1e-5 LU
    np.testing.assert_allclose(measured, m.target_lufs, rtol=0, atol=1e-5)


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
    # physical identity: BS.1770 is a mean-square measure with relative gating, so +6 dB of gain reads +6 LU
    # (measured deviation 1e-14 LU)
    np.testing.assert_allclose(b - a, 6.0, atol=1e-9)


def test_silent_output_is_an_error():
    with pytest.raises(ParameterError, match="wide: output is silent"):
        match_loudness([np.zeros(48000), np.ones(48000) * 0.1], FS, names=["wide", "medium"])


def test_too_short_is_an_error():
    with pytest.raises(ParameterError, match="too short to measure loudness"):
        integrated_loudness(np.ones(1000), FS)


def _sine(level_dbfs, seconds, freq_hz=1000.0):
    """Sine of peak amplitude level_dbfs (a full-scale sine is 0 dBFS), starting at phase 0."""
    n = int(round(seconds * FS))
    return 10 ** (level_dbfs / 20) * np.sin(2 * np.pi * freq_hz * np.arange(n) / FS)


def test_bs1770_997_hz_full_scale_sine_reads_minus_3_01_lkfs():
    # source: ITU-R BS.1770-4 (2015), Annex 1: a 0 dB FS 997 Hz sine in one front channel reads −3.01 LKFS
    # (measured −3.01028; tolerance the published figure's last digit)
    assert integrated_loudness(_sine(0.0, 5.0, 997.0), FS) == pytest.approx(-3.01, abs=0.005)


# source: ITU-R BS.1770-4 (2015), Annex 1, Tables 1 and 2: the K-weighting at 48 kHz as two biquads,
# stage 1 (shelving) b = 1.53512485958697, −2.69169618940638, 1.19839281085285, a = 1, −1.69065929318241,
# 0.73248077421585; stage 2 (high-pass) b = 1, −2, 1, a = 1, −1.99004745483398, 0.99007225036621 (from memory;
# pyloudnorm's "DeMan" filters reproduce them to 1e-8). Loudness of a steady sine of amplitude a at f:
# −0.691 + 10·log10(a²/2·|K(f)|²) (eq. (2), one channel).
_K_STAGES = ((np.array([1.53512485958697, -2.69169618940638, 1.19839281085285]),
              np.array([1.0, -1.69065929318241, 0.73248077421585])),
             (np.array([1.0, -2.0, 1.0]), np.array([1.0, -1.99004745483398, 0.99007225036621])))


@pytest.mark.parametrize("freq_hz", [100.0, 500.0, 2000.0, 4000.0, 10000.0])
def test_k_weighting_of_steady_tones_against_the_published_filter(freq_hz):
    k = 1.0
    for b, a in _K_STAGES:
        k *= abs(signal.freqz(b, a, worN=[freq_hz], fs=FS)[1][0])
    expected = -0.691 + 10 * math.log10(0.5 * 0.25 * k * k)
    # measured deviation ≤ 1.1e-3 LU (the high-pass's start-up transient at 100 Hz); tolerance 0.01 LU
    assert integrated_loudness(0.5 * _sine(0.0, 3.0, freq_hz), FS) == pytest.approx(expected, abs=0.01)


# source: EBU Tech 3341 (2016), "Loudness metering: 'EBU Mode' metering to supplement EBU R 128", table 1,
# test cases 1-5: stereo 1 kHz sines, both channels alike, at the levels (dBFS, peak) and durations given,
# one after the other; each must read the stated integrated loudness within ±0.1 LU (from memory). Cases 3-5
# exercise the relative gate, case 4 the absolute gate (its −72 dBFS parts are below −70 LUFS).
TECH_3341 = [
    (1, [(-23.0, 20.0)], -23.0),
    (2, [(-33.0, 20.0)], -33.0),
    (3, [(-36.0, 10.0), (-23.0, 60.0), (-36.0, 10.0)], -23.0),
    (4, [(-72.0, 10.0), (-36.0, 10.0), (-23.0, 60.0), (-36.0, 10.0), (-72.0, 10.0)], -23.0),
    (5, [(-26.0, 20.0), (-20.0, 20.1), (-26.0, 20.0)], -23.0),
]


@pytest.mark.parametrize("case, parts, expected_lufs", TECH_3341, ids=[f"case{c[0]}" for c in TECH_3341])
def test_ebu_tech_3341_test_cases(case, parts, expected_lufs):
    channel = np.concatenate([_sine(level, seconds) for level, seconds in parts])
    stereo_lufs = integrated_loudness(channel, FS) + 10 * math.log10(2.0)
    # measured deviation up to 0.021 LU (case 5; the K-weighting at 1 kHz alone gives +0.007); the
    # tolerance is the document's ±0.1 LU
    assert stereo_lufs == pytest.approx(expected_lufs, abs=0.1)
