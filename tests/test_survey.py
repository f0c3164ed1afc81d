"""Carrier survey: every carrier of multi-station captures on 9 and 10 kHz grids, no phantoms."""

import math

import numpy as np
import pytest

from sdrx.analysis.survey import survey, survey_carriers
from sdrx.capture import open_capture, open_writer
from sdrx.errors import CaptureError, ParameterError


@pytest.fixture
def rng():
    return np.random.default_rng(1975)


def am_stations(t, stations, center_hz, rng, complex_envelope=True):
    """Sum of AM carriers, 30 % tone modulation (bench test signal, common practice).

    Level convention (README, file formats): carrier of amplitude A reads 20·log10(A) dBFS; in I/Q the
    carrier is A·exp(j2π(f - fc)t), in real RF A·cos(2πft).
    """
    x = np.zeros(t.size, dtype=complex if complex_envelope else float)
    for f, level_dbfs, err_hz in stations:
        a = 10 ** (level_dbfs / 20)
        tone = rng.uniform(400, 2500)
        env = a * (1 + 0.3 * np.cos(2 * np.pi * tone * t + rng.uniform(0, 2 * np.pi)))
        ph = rng.uniform(0, 2 * np.pi)
        if complex_envelope:
            x += env * np.exp(1j * (2 * np.pi * (f + err_hz - center_hz) * t + ph))
        else:
            x += env * np.cos(2 * np.pi * (f + err_hz) * t + ph)
    return x


def complex_noise(n, level_dbfs, rng):
    s = 10 ** (level_dbfs / 20) / math.sqrt(2)
    return s * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def write_iq(path, x, fs, center_hz, datatype="ci16_le"):
    with open_writer(path, fs=fs, kind="iq", datatype=datatype, center_hz=center_hz) as w:
        for i in range(0, x.size, 100_000):
            w.write(x[i:i + 100_000])
    return open_capture(path)


@pytest.mark.parametrize("spacing, channels", [
    # source: Geneva 1975 LF/MF broadcasting plan (GE75): 9 kHz MF channel spacing in Regions 1 and 3
    (9e3, [531e3 + 9e3 * k for k in (8, 9, 30, 52, 53, 70)]),
    # source: Rio de Janeiro 1981 Region 2 MF broadcasting plan: 10 kHz channel spacing
    (10e3, [540e3 + 10e3 * k for k in (7, 8, 33, 47, 48, 99)]),
])
def test_finds_every_carrier_at_right_frequency_and_level(spacing, channels, tmp_path, rng):
    fs, center, seconds = 1.2e6, 1.0e6, 0.5
    n = int(fs * seconds)
    t = np.arange(n) / fs
    levels = [-12.0, -37.0, -20.0, -55.0, -26.0, -44.0]  # includes adjacent-channel pairs
    errs = rng.uniform(-30, 30, len(channels))
    x = am_stations(t, list(zip(channels, levels, errs)), center, rng) + complex_noise(n, -75, rng)
    r = write_iq(tmp_path / "band.sigmf-meta", x, fs, center)
    found = survey_carriers(r, spacing_hz=spacing)
    assert sorted(c.freq_hz for c in found) == sorted(channels)
    by_f = {c.freq_hz: c for c in found}
    for f, lv, e in zip(channels, levels, errs):
        # measured deviation 0.002 dB and 0.12 Hz (the bins are 73 Hz wide); tolerances 0.02 dB and 1.5 Hz
        assert by_f[f].level_dbfs == pytest.approx(lv, abs=0.02)
        assert by_f[f].offset_hz == pytest.approx(e, abs=1.5)
    assert [c.level_dbfs for c in found] == sorted((c.level_dbfs for c in found), reverse=True)


def test_real_capture_levels(tmp_path, rng):
    fs, seconds = 3.6e6, 0.25
    n = int(fs * seconds)
    t = np.arange(n) / fs
    stations = [(610e3, -6.0, 0.0), (1130e3, -30.0, 12.0), (1650e3, -48.0, -20.0)]
    x = am_stations(t, stations, 0.0, rng, complex_envelope=False)
    x += 10 ** (-70 / 20) * rng.standard_normal(n)
    p = tmp_path / "rf.wav"
    with open_writer(p, fs=fs, kind="real", datatype="rf32_le") as w:
        w.write(x)
    res = survey(open_capture(p), spacing_hz="10k")
    got = [(c.freq_hz, c.level_dbfs) for c in res.carriers]
    assert [g[0] for g in got] == [610e3, 1130e3, 1650e3]
    for (f, lv, _), (_, g) in zip(stations, got):
        assert g == pytest.approx(lv, abs=0.02)   # measured deviation 0.0016 dB


@pytest.mark.parametrize("frac", [0.0, 0.25, 0.5])
def test_level_free_of_scalloping(frac, tmp_path):
    # a pure line between FFT bins reads the same level (Parseval over the main lobe)
    fs, n, center = 1.2e6, 600_000, 1e6
    rbw = fs / 16384
    t = np.arange(n) / fs
    x = 0.1 * np.exp(2j * np.pi * (30e3 + frac * rbw) * t)
    r = write_iq(tmp_path / "l.sigmf-meta", x, fs, center, datatype="cf32_le")
    (c,) = survey_carriers(r)
    assert c.freq_hz == 1030e3
    assert c.level_dbfs == pytest.approx(20 * math.log10(0.1), abs=5e-3)   # measured deviation 4.8e-4 dB


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("spacing", ["9k", "10k"])
def test_no_phantom_carriers_in_noise(seed, spacing, tmp_path):
    rng = np.random.default_rng(seed)
    fs, n = 1.2e6, 400_000
    r = write_iq(tmp_path / "n.sigmf-meta", complex_noise(n, -30, rng), fs, 1e6, datatype="cf32_le")
    res = survey(r, spacing_hz=spacing)
    assert res.carriers == ()
    # the floor: noise power sigma^2 spread over nfft bins (in the line-level units of the survey)
    # the median of a noise spectrum averaged over the excerpt's segments: measured within 0.017 dB
    assert res.noise_floor_dbfs == pytest.approx(-30 - 10 * math.log10(res.nfft), abs=0.2)


@pytest.mark.parametrize("seed", range(4))
def test_no_phantoms_in_a_short_excerpt(seed, tmp_path):
    # few segments: noise fluctuates more, the threshold rises with it
    rng = np.random.default_rng(100 + seed)
    fs = 1.2e6
    r = write_iq(tmp_path / "s.sigmf-meta", complex_noise(200_000, -30, rng), fs, 1e6, datatype="cf32_le")
    res = survey(r, spacing_hz="10k", duration_s=3000 / fs)
    assert res.segments <= 3
    assert res.threshold_db > 10.0
    assert res.carriers == ()


def test_sidebands_of_off_grid_carriers_are_not_carriers(tmp_path, rng):
    # A Region 2 band (10 kHz grid) surveyed on the 9 kHz grid of Regions 1 and 3.
    # source: Geneva 1975 (9 kHz, Regions 1 and 3) and Rio de Janeiro 1981 (10 kHz, Region 2) MF plans
    # 880 and 1510 kHz lie 2 kHz from the 9 kHz channels 882 and 1512 (within a quarter spacing: found,
    # with their offset); 600, 1130 and 1140 kHz lie 3-4 kHz off, and each has a sideband line inside
    # the window of the 9 kHz channel next to it (601, 1132, 1141 kHz) that must not be listed.
    fs, center, seconds = 1.2e6, 1.0e6, 0.5
    n = int(fs * seconds)
    t = np.arange(n) / fs
    stations = [(600e3, -20.0, 1e3), (880e3, -26.0, 1e3), (1130e3, -12.0, 2e3), (1140e3, -30.0, 1e3),
                (1510e3, -16.0, 1e3)]
    x = complex_noise(n, -80, rng)
    for f, level_dbfs, tone_hz in stations:
        # 50 % tone modulation: each sideband 20 log10(m/2) = -12 dBc (AM spectrum: Haykin, Communication
        # Systems, 4th ed. (Wiley, 2001), ch. 2 (from memory))
        env = 10 ** (level_dbfs / 20) * (1 + 0.5 * np.cos(2 * np.pi * tone_hz * t))
        x = x + env * np.exp(2j * np.pi * (f - center) * t)
    r = write_iq(tmp_path / "r2.sigmf-meta", x, fs, center)
    res = survey(r, spacing_hz="9k")
    assert [c.freq_hz for c in res.carriers] == [1512e3, 882e3]
    for c, true_hz, level in zip(res.carriers, (1510e3, 880e3), (-16.0, -26.0)):
        # measured deviation 0.05 Hz (bins of 73 Hz) and 0.0016 dB
        assert c.freq_hz + c.offset_hz == pytest.approx(true_hz, abs=1.0)
        assert c.level_dbfs == pytest.approx(level, abs=0.02)


def test_threshold_separates_weak_from_clear(tmp_path, rng):
    fs, n, center = 1.2e6, 600_000, 1e6
    t = np.arange(n) / fs
    x = complex_noise(n, -40, rng)
    floor_db = -40 - 10 * math.log10(16384)  # per-bin noise, same units as a line level
    x = x + 10 ** ((floor_db + 25) / 20) * np.exp(2j * np.pi * 50e3 * t)   # 25 dB above: found
    x = x + 10 ** ((floor_db + 4) / 20) * np.exp(2j * np.pi * -120e3 * t)  # 4 dB above: not a carrier
    r = write_iq(tmp_path / "t.sigmf-meta", x, fs, center, datatype="cf32_le")
    res = survey(r)
    assert [c.freq_hz for c in res.carriers] == [1050e3]
    # a line 25 dB above the noise in its bin reads within ±0.5 dB of its level (measured 0.042 dB)
    assert res.carriers[0].level_dbfs == pytest.approx(floor_db + 25, abs=0.5)


def test_excerpt_and_progress(tmp_path, rng):
    fs, n, center = 1.2e6, 1_200_000, 1e6
    t = np.arange(n) / fs
    x = complex_noise(n, -60, rng) + 0.1 * np.exp(2j * np.pi * 20e3 * t)
    x[n // 2:] += 0.05 * np.exp(2j * np.pi * -200e3 * t[n // 2:])  # a station that starts at 0.5 s
    r = write_iq(tmp_path / "e.sigmf-meta", x, fs, center)
    calls = []
    first_half = survey_carriers(r, duration_s=0.5, progress=lambda d, tot: calls.append((d, tot)))
    assert [c.freq_hz for c in first_half] == [1020e3]
    assert calls[-1] == (600_000, 600_000) and all(b == 600_000 for _, b in calls)
    second_half = survey_carriers(r, start_s=0.5)
    assert [c.freq_hz for c in second_half] == [1020e3, 800e3]


def test_bad_spacing_and_short_capture(tmp_path, rng):
    r = write_iq(tmp_path / "b.sigmf-meta", complex_noise(1000, -30, rng), 1.2e6, 1e6)
    with pytest.raises(ParameterError, match="--spacing: must be positive"):
        survey(r, spacing_hz=0)
    with pytest.raises(ParameterError, match="--spacing 1 MHz: must be well below"):
        survey(r, spacing_hz="1M")
    with pytest.raises(CaptureError, match="too short to survey"):
        survey(r, spacing_hz="10k")


@pytest.mark.parametrize("snr_db", [16.0, 25.0, 40.0])
def test_offset_interpolated_within_its_stated_resolution(snr_db, tmp_path):
    # carriers at known offsets between the bins, in noise: each offset is within the resolution the survey
    # states for it (three standard errors), and that resolution shrinks as the line rises above the noise
    rng = np.random.default_rng(int(snr_db))
    fs, n, center = 1.2e6, 600_000, 1e6
    nfft = 8192                                # the survey's choice for 10 kHz channels at 1.2 MHz
    rbw = fs / nfft
    t = np.arange(n) / fs
    x = complex_noise(n, -40, rng)
    floor_db = -40 - 10 * math.log10(nfft)     # noise per bin, in the units of a line level
    offsets = rng.uniform(-0.5, 0.5, 8) * rbw + rng.uniform(-40, 40, 8)
    channels = 1e6 + 10e3 * np.array([-40, -27, -13, -2, 5, 18, 31, 44])
    for f, off in zip(channels, offsets):
        x += 10 ** ((floor_db + snr_db) / 20) * np.exp(2j * np.pi * (f + off - center) * t + 1j * rng.uniform(0, 6.3))
    r = write_iq(tmp_path / "o.sigmf-meta", x, fs, center, datatype="cf32_le")
    res = survey(r)
    assert res.nfft == nfft
    by_f = {c.freq_hz: c for c in res.carriers}
    assert sorted(by_f) == sorted(channels)
    errors = []
    for f, off in zip(channels, offsets):
        c = by_f[f]
        assert abs(c.offset_hz - off) <= c.offset_resolution_hz
        assert c.line_hz == pytest.approx(f + off, abs=c.offset_resolution_hz)
        errors.append(abs(c.offset_hz - off) / (c.offset_resolution_hz / 3))
    # the stated resolution is not loose either: the errors spread about one standard error each (measured
    # rms 0.84, 0.69, 0.46 standard errors at 16, 25, 40 dB)
    assert 0.3 < math.sqrt(np.mean(np.square(errors))) < 1.5
    # the resolution falls as 1/sqrt(SNR) well above the noise: measured at most 0.069, 0.025, 0.0044 bins,
    # i.e. 0.069 x 10^(-(SNR - 16)/20) within 10 %
    worst = max(c.offset_resolution_hz for c in res.carriers) / rbw
    assert worst == pytest.approx(0.069 * 10 ** (-(snr_db - 16) / 20), rel=0.15)


def test_grid_fit_tells_a_10k_band_surveyed_on_9k(tmp_path, rng):
    # source: Geneva 1975 (9 kHz, Regions 1 and 3) and Rio de Janeiro 1981 (10 kHz, Region 2) MF plans
    from sdrx.analysis.survey import band_statistics, grid_fit, survey_statistics

    fs, center, seconds = 1.2e6, 1.0e6, 0.3
    n = int(fs * seconds)
    t = np.arange(n) / fs
    channels = [600e3, 880e3, 1130e3, 1260e3, 1510e3]    # 10 kHz channels; 880, 1510 lie 2 kHz from 9 kHz ones
    x = am_stations(t, [(f, -20.0 - 3 * i, 0.0) for i, f in enumerate(channels)], center, rng)
    x += complex_noise(n, -75, rng)
    r = write_iq(tmp_path / "g.sigmf-meta", x, fs, center)
    band = band_statistics(r, spacing_hz=9e3)
    fit = grid_fit(band, survey_statistics(band, 9e3))
    assert fit.lines_hz == pytest.approx(channels, abs=1.0)
    # 1260 kHz = 140 x 9 kHz: on both grids; the 4 others off the 9 kHz grid
    assert fit.off_grid == 4 and fit.fits == {9e3: 1, 10e3: 5}
    assert fit.suggested_spacing_hz == 10e3
    assert fit.hint() == ("4 of 5 strong lines lie off the 9 kHz grid (more than 300 Hz from a channel); "
                          "a 10 kHz grid fits 5 of 5: --spacing 10k")
    band10 = band_statistics(r, spacing_hz=10e3)
    fit10 = grid_fit(band10, survey_statistics(band10, 10e3))
    assert fit10.off_grid == 0 and fit10.hint() is None and fit10.suggested_spacing_hz is None
