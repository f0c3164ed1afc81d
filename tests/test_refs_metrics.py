"""Comparison figures (sdrx.refs.metrics), checked against numpy/scipy computed another way."""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from scipy import signal

from sdrx.errors import CaptureError
from sdrx.refs.cases import Tolerance
from sdrx.refs.metrics import (BLOCK, SpectrumAccumulator, audio_figures, compare_audio, octave_bands,
                               plot_spectra, tone_sinad_db, write_difference)

FS = 16000


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def wav(path, x, fs=FS):
    sf.write(str(path), np.asarray(x, dtype=np.float32), fs, subtype="FLOAT")
    return path


def back(path):
    return sf.read(str(path), dtype="float64")[0]


def tone(f, n, amp=0.5, fs=FS):
    return amp * np.sin(2 * np.pi * f * np.arange(n) / fs)


def test_snr_matches_definition_across_blocks(tmp_path, rng):
    n = BLOCK + 12345          # crosses a block boundary
    x = tone(440, n) + 0.05 * rng.standard_normal(n)
    y = x + 1e-3 * rng.standard_normal(n)
    r, w = wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", y)
    c = compare_audio(r, w, Tolerance(snr_db=40))
    xr, yr = back(r), back(w)
    # source: the SNR as defined in the README (refs tolerances), 10 log10(sum ref^2 / sum (new-ref)^2),
    # computed in one shot
    expect = 10 * np.log10(np.sum(xr ** 2) / np.sum((yr - xr) ** 2))
    assert c.snr_db == pytest.approx(expect, rel=1e-9)
    assert c.passed and not c.identical


def test_one_sample_delay_fails_snr(tmp_path, rng):
    n = 8000
    x = tone(1000, n)
    y = np.concatenate([[0.0], x[:-1]])           # same length, delayed one sample
    c = compare_audio(wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", y), Tolerance())
    # 1 kHz at 16 kHz: |1 - e^{-jw}|^2 = 4 sin^2(w/2) -> SNR = -10 log10(4 sin^2(pi/16)) (formula)
    expect = -10 * math.log10(4 * math.sin(math.pi * 1000 / FS) ** 2)
    assert c.snr_db == pytest.approx(expect, abs=0.01)   # measured deviation 0.001 dB (the file's ends)
    assert not c.passed and any("SNR" in p for p in c.problems)
    # level and spectrum did not move: delay alone is the failure
    assert abs(c.level_change_db) < 0.01 and c.spectrum_db < 0.05


def test_level_change_and_band_diffs(tmp_path, rng):
    n = 20000
    x = 0.1 * rng.standard_normal(n)
    g = 1.1
    c = compare_audio(wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", g * x), Tolerance())
    expect = 20 * math.log10(g)                   # gain in dB, formula
    # measured deviation 2.5e-9 dB (float32 samples); tolerance 1e-7 dB
    assert c.level_change_db == pytest.approx(expect, abs=1e-7)
    np.testing.assert_allclose(c.band_diff_db, expect, atol=1e-7)
    assert c.spectrum_db == pytest.approx(expect, abs=1e-7)
    assert not c.passed
    assert any("level change" in p for p in c.problems)
    assert any("spectral difference" in p for p in c.problems)
    # SNR of a pure gain error: sum x^2 / sum ((g-1) x)^2 -> -20 log10(g-1)
    assert c.snr_db == pytest.approx(-20 * math.log10(g - 1), abs=1e-6)   # measured 1.9e-8 dB


def test_band_change_only_in_its_band(tmp_path, rng):
    n = 32000
    x = 0.05 * rng.standard_normal(n)
    y = x + tone(1000, n, amp=0.05)              # add a tone inside the 1 kHz octave (707..1414 Hz)
    c = compare_audio(wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", y), Tolerance())
    d = dict(zip(c.band_centres_hz, c.band_diff_db))
    assert d[1000.0] > 3.0
    for fc in (125.0, 250.0, 500.0, 2000.0, 4000.0):
        assert abs(d[fc]) < 0.05
    assert c.spectrum_db == pytest.approx(d[1000.0])


def test_octave_bands_edges():
    bands = octave_bands(48000.0)
    # source: IEC 61260 base-2 octave bands, edges fc/sqrt(2) .. fc*sqrt(2)
    for fc, lo, hi in bands:
        assert lo == pytest.approx(fc / math.sqrt(2)) and hi == pytest.approx(fc * math.sqrt(2))
    assert [b[0] for b in bands] == [125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0]
    b8 = octave_bands(8000.0)
    assert b8[-1][2] == 4000.0                     # cut at fs/2
    assert [b[0] for b in octave_bands(5000.0)] == [125.0, 250.0, 500.0, 1000.0, 2000.0]


def test_spectrum_accumulator_matches_scipy_welch(rng):
    x = rng.standard_normal(50000)
    acc = SpectrumAccumulator(FS)
    for i in range(0, x.size, 777):                # odd block size: streaming must not matter
        acc.add(x[i:i + 777, None])
    f, p = acc.result()
    # source: scipy.signal.welch (general-purpose reference library): density * fs / N = power per bin
    fw, pw = signal.welch(x, FS, window="hann", nperseg=acc.n, noverlap=acc.n // 2, detrend=False,
                          scaling="density")
    np.testing.assert_allclose(f, fw)
    np.testing.assert_allclose(p, pw * FS / acc.n, rtol=1e-9)


def test_audio_figures_level_and_occupied_bandwidth(tmp_path):
    fig = audio_figures(wav(tmp_path / "t.wav", tone(1000, FS, amp=0.5)))
    # source: AES17 dBFS (full-scale sine = 0 dBFS): 20 log10(0.5) for a half-scale sine
    assert fig.level_dbfs == pytest.approx(20 * math.log10(0.5), abs=2e-6)   # measured 1.6e-7 dB (float32)
    binw = FS / SpectrumAccumulator(FS).n
    assert abs(fig.occupied_bandwidth_hz - 1000.0) <= 2 * binw
    levels = dict(zip([b[0] for b in octave_bands(FS)], fig.band_levels_dbfs))
    assert levels[1000.0] == pytest.approx(20 * math.log10(0.5), abs=2e-6)   # measured 1.6e-7 dB
    assert levels[125.0] < -80


def test_audio_figures_white_noise_occupied_bandwidth(tmp_path, rng):
    fig = audio_figures(wav(tmp_path / "w.wav", 0.1 * rng.standard_normal(4 * FS)))
    # flat spectrum: 99 % of the power above 20 Hz lies below 20 + 0.99 (fs/2 - 20)  (formula)
    # measured deviation 2.6e-4 (relative; the Welch estimate of 4 s of noise); tolerance 3e-3
    assert fig.occupied_bandwidth_hz == pytest.approx(20 + 0.99 * (FS / 2 - 20), rel=3e-3)


def test_sinad_tone_plus_noise(tmp_path, rng):
    n = 2 * FS
    amp, sigma = 0.5, 0.01
    x = tone(1000, n, amp) + sigma * rng.standard_normal(n)
    s = tone_sinad_db(wav(tmp_path / "s.wav", x), 1000.0, skip_s=0.0)
    # source: SINAD = (S+N+D)/(N+D) (IEEE Std 1241 definition); S = A^2/2, N = sigma^2
    expect = 10 * math.log10((amp ** 2 / 2 + sigma ** 2) / sigma ** 2)
    # the noise power read over 2 s scatters by sqrt(2/N) = 0.45 % (1σ, 0.02 dB); measured 0.024 dB;
    # tolerance 0.1 dB (5σ)
    assert s == pytest.approx(expect, abs=0.1)


def test_exact_tolerance(tmp_path, rng):
    x = rng.standard_normal(1000).astype(np.float32) * 0.1
    r = wav(tmp_path / "r.wav", x)
    same = compare_audio(r, wav(tmp_path / "s.wav", x), Tolerance(exact=True))
    assert same.passed and same.identical and math.isinf(same.snr_db)
    y = x.copy()
    y[617] = np.nextafter(y[617], np.float32(1.0))   # one float32 step on one sample
    c = compare_audio(r, wav(tmp_path / "n.wav", y), Tolerance(exact=True))
    assert not c.passed and c.first_difference == 617
    assert c.problems == ("samples differ from sample 617",)
    # the same change passes the numeric default limits: exact is stricter
    assert compare_audio(r, tmp_path / "n.wav", Tolerance()).passed


def test_length_and_rate_mismatch_fail(tmp_path):
    x = tone(500, 4000)
    r = wav(tmp_path / "r.wav", x)
    c = compare_audio(r, wav(tmp_path / "n.wav", x[:-10]), Tolerance())
    assert not c.passed and "length 3990 samples, reference 4000" in c.problems
    c2 = compare_audio(r, wav(tmp_path / "m.wav", x, fs=8000), Tolerance())
    assert not c2.passed and "audio rate 8000 Hz, reference 16000 Hz" in c2.problems


def test_difference_wav_and_plot(tmp_path, rng):
    x = tone(300, 5000)
    y = x.copy()
    y[100:200] += 0.25
    r, w = wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", y)
    d = back(write_difference(r, w, tmp_path / "d.wav"))
    np.testing.assert_allclose(d, back(w) - back(r), atol=0)
    png = plot_spectra(compare_audio(r, w, Tolerance()), tmp_path / "s.png", "case x")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert png.stat().st_size < 100_000


def test_unreadable_wav(tmp_path):
    p = tmp_path / "bad.wav"
    p.write_bytes(b"RIFF0000WAVEjunk")
    with pytest.raises(CaptureError, match="bad.wav: not a readable WAV"):
        audio_figures(p)


def test_spectra_plot_readable_with_its_bin_width(tmp_path):
    # identical audio: the difference spectrum is empty (drawn on the marked floor); the PNG is 900 x 640
    import matplotlib.image as mpimg

    x = tone(300, 5000)
    r, w = wav(tmp_path / "r.wav", x), wav(tmp_path / "n.wav", x)
    png = plot_spectra(compare_audio(r, w, Tolerance()), tmp_path / "s.png", "case y")
    assert mpimg.imread(png).shape[:2] == (640, 900)
    again = plot_spectra(compare_audio(r, w, Tolerance()), tmp_path / "t.png", "case y")
    assert again.read_bytes() == png.read_bytes()
