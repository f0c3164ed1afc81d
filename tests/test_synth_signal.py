"""Synthesized AM stations measured as a signal analyzer would: depth, carrier level, sidebands, noise."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import signal

from sdrx.synth import iter_capture, make_program, parse_scenario


def _capture(d, block_size=65536):
    return np.concatenate(list(iter_capture(parse_scenario(d), block_size=block_size)))


def _iq(stations, seconds=0.05, rate="400k", center="1M", **cap):
    return {"capture": dict(kind="iq", rate=rate, center=center, seconds=seconds, **cap), "station": stations}


def _tone_station(freq="1.05M", level=-20.0, depth=0.5, fm="1k", **kw):
    return dict(name="T", frequency=freq, level_dbfs=level, depth=depth, phase_deg=0.0,
                program={"kind": "tone", "frequency": fm}, **kw)


def _baseband(x, fs, offset_hz):
    n = np.arange(x.size)
    return x * np.exp(-2j * np.pi * offset_hz * n / fs)


def _real_envelope(x, fs, f_hz):
    """Complex envelope of a real capture: mix down, low-pass 20 kHz (FIR, delay removed)."""
    h = signal.firwin(801, 20e3, fs=fs)
    z = 2 * signal.convolve(_baseband(x, fs, f_hz), h, mode="same")
    return z[1000:-1000]


def _depth(env):
    # source: m = (Emax - Emin) / (Emax + Emin), Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2
    # (from memory)
    e = np.abs(env)
    return (e.max() - e.min()) / (e.max() + e.min())


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(level=st.floats(-50, -6), depth=st.floats(0.02, 1.0), fm=st.sampled_from([400, 1000, 2500, 4000]),
       channel=st.integers(-15, 15))
def test_depth_and_carrier_level_match_the_scenario_iq(level, depth, fm, channel):
    freq = 1e6 + channel * 10e3
    x = _capture(_iq([_tone_station(freq, level, depth, fm)], seconds=0.02))
    env = _baseband(x, 400e3, freq - 1e6)
    assert _depth(env) == pytest.approx(depth, abs=1e-6)   # measured deviation 1e-16 over the examples
    # carrier = mean of the envelope over whole tone periods (0.02 s holds 8..80 periods)
    assert 20 * np.log10(abs(env.mean())) == pytest.approx(level, abs=0.01)


@pytest.mark.parametrize("depth", [0.3, 0.8])
def test_depth_and_level_of_a_real_capture(depth):
    d = {"capture": {"kind": "real", "rate": "400k", "seconds": 0.05},
         "station": [_tone_station("100k", -12.0, depth, "400")]}
    x = _capture(d)
    env = _real_envelope(x, 400e3, 100e3)
    assert _depth(env) == pytest.approx(depth, abs=2e-3)
    # level convention (README, file formats): 20 log10 of the cosine's peak amplitude
    assert 20 * np.log10(abs(env[: 400 * 40].mean())) == pytest.approx(-12.0, abs=1e-6)   # measured 4e-15 dB


@pytest.mark.parametrize("kind", ["iq", "real"])
@pytest.mark.parametrize("depth", [0.3, 1.0])
def test_single_tone_sidebands_and_total_power(kind, depth):
    fs, fm, seconds = 400e3, 1000.0, 0.1
    if kind == "iq":
        d = _iq([_tone_station("1.05M", -20.0, depth, fm)], seconds=seconds)
        x = _capture(d)
        f_c = 50e3
    else:
        d = {"capture": {"kind": "real", "rate": "400k", "seconds": seconds},
             "station": [_tone_station("120k", -20.0, depth, fm)]}
        x = _capture(d)
        f_c = 120e3
    spec = np.fft.fft(x) / x.size  # 0.1 s: 10 Hz bins, every line on a bin
    f = np.fft.fftfreq(x.size, 1 / fs)
    line = lambda ff: abs(spec[np.argmin(np.abs(f - ff))])  # noqa: E731
    c = line(f_c)
    # source: AM spectrum, each sideband m/2 of the carrier: 20 log10(m/2) dBc (Haykin, Communication Systems,
    # 4th ed. (Wiley, 2001), ch. 2 (from memory))
    want = 20 * np.log10(depth / 2)
    assert 20 * np.log10(line(f_c + fm) / c) == pytest.approx(want, abs=0.01)
    assert 20 * np.log10(line(f_c - fm) / c) == pytest.approx(want, abs=0.01)
    # source: AM power Pt = Pc (1 + m^2 / 2) (Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2 (from
    # memory))
    pc = 10 ** (-20 / 10) * (1.0 if kind == "iq" else 0.5)
    pt = np.mean(np.abs(x) ** 2)
    assert pt == pytest.approx(pc * (1 + depth ** 2 / 2), rel=3e-4)   # measured deviation 3.3e-5 (relative)
    # nothing else: no interpolation images or harmonics above -80 dBc
    others = np.abs(spec).copy()
    for ff in (f_c, f_c + fm, f_c - fm, -f_c, -f_c - fm, -f_c + fm):
        others[np.argmin(np.abs(f - ff))] = 0
    assert 20 * np.log10(others.max() / c) < -80


def test_carrier_frequency_error_moves_the_carrier():
    d = _iq([_tone_station("1.05M", -20.0, 0.0, frequency_error="+37.5")], seconds=0.2)
    env = _baseband(_capture(d), 400e3, 50e3)
    phase = np.unwrap(np.angle(env))
    slope = np.polyfit(np.arange(env.size) / 400e3, phase, 1)[0] / (2 * np.pi)
    assert slope == pytest.approx(37.5, abs=1e-9)   # measured deviation 2.7e-12


def test_iq_station_is_the_baseband_of_the_rf_signal():
    # an RF signal is Re{x(t) exp(j 2 pi fc t)} (the complex-envelope representation: Haykin, Communication
    # Systems, 4th ed., ch. 2; from memory): an I/Q capture and a real capture
    # of the same station must agree sample by sample after moving the I/Q one up to RF
    fs_real = 0.8e6
    st_ = _tone_station("300k", -10.0, 0.6, "1k")
    real = _capture({"capture": {"kind": "real", "rate": fs_real, "seconds": 0.005}, "station": [st_]})
    iq = _capture({"capture": {"kind": "iq", "rate": fs_real, "center": "400k", "seconds": 0.005}, "station": [st_]})
    n = np.arange(iq.size)
    up = np.real(iq * np.exp(2j * np.pi * 400e3 * n / fs_real))
    np.testing.assert_allclose(up, real, atol=1e-9)


def test_program_in_the_capture_is_the_truth_program():
    d = _iq([dict(name="S", frequency="1.02M", level_dbfs=-10, depth=0.7, phase_deg=0.0,
                  program={"kind": "speech"})], seconds=0.5, rate="1.6M")
    x = _capture(d)
    sc = parse_scenario(d)
    from sdrx.synth.synthesize import station_seeds

    seed = station_seeds(0, sc.stations[0])["program"]
    p = make_program(sc.stations[0].program, 16000.0, seed).read(8000)
    env = np.abs(_baseband(x, 1.6e6, 20e3))[::100]  # program rate 16 kHz = 1.6 MHz / 100
    recovered = (env / 10 ** (-10 / 20) - 1) / 0.7
    np.testing.assert_allclose(recovered, p, atol=2e-4)


@pytest.mark.parametrize("kind", ["iq", "real"])
def test_noise_floor_density_and_carrier_to_noise(kind):
    n0 = -110.0
    if kind == "iq":
        d = _iq([_tone_station("1.05M", -20.0, 0.0)], seconds=0.5, noise_dbfs_per_hz=n0, seed=3)
        fs, fc = 400e3, 50e3
    else:
        d = {"capture": {"kind": "real", "rate": "400k", "seconds": 0.5, "noise_dbfs_per_hz": n0, "seed": 3},
             "station": [_tone_station("120k", -20.0, 0.0)]}
        fs, fc = 400e3, 120e3
    x = _capture(d)
    f, pxx = signal.welch(x, fs=fs, nperseg=4096, return_onesided=(kind == "real"), detrend=False)
    noise_density = np.median(pxx)  # per Hz, the carrier's line is one bin of thousands
    # carrier amplitude: |mean| of the mixed-down I/Q capture, 2|mean| of the mixed-down real one
    amp = np.abs(np.mean(_baseband(x, fs, fc))) * (1.0 if kind == "iq" else 2.0)
    carrier_power = amp ** 2 * (1.0 if kind == "iq" else 0.5)
    # C/N0 = carrier power / noise density per Hz = level_dbfs - noise_dbfs_per_hz (definition of C/N0)
    cn0 = 10 * np.log10(carrier_power / noise_density)
    assert cn0 == pytest.approx(-20.0 - n0, abs=0.3)


def test_impulse_noise_rate_and_level():
    d = _iq([_tone_station("1.05M", -60.0, 0.0)], seconds=1.0, rate="200k")
    d["impulse_noise"] = {"rate_per_s": 400, "level_dbfs": -6}
    x = _capture(d)
    hits = np.abs(x) > 0.25
    count = int(np.count_nonzero(hits))
    # source: Poisson process, mean = variance = rate x time (Papoulis & Pillai, Probability, Random Variables
    # and Stochastic Processes, 4th ed.; from memory); 5 sigma
    assert abs(count - 400) < 5 * np.sqrt(400)
    assert np.median(np.abs(x[hits])) == pytest.approx(10 ** (-6 / 20), abs=0.002)


def test_two_path_carrier_and_sidebands_follow_the_two_ray_response():
    fs, f_rf, fm, tau, rho_db = 400e3, 1.05e6, 2000.0, 0.25e-3, -2.0
    st_ = _tone_station("1.05M", -20.0, 0.5, "2k")
    st_["fading"] = {"model": "two_path", "second": "steady", "delay_s": tau, "level_db": rho_db}
    x = _capture(_iq([st_], seconds=0.11))[4000:]  # from 10 ms on: the echo of the program has arrived
    spec = np.fft.fft(x) / x.size
    f = np.fft.fftfreq(x.size, 1 / fs)
    line = lambda ff: abs(spec[np.argmin(np.abs(f - ff))])  # noqa: E731
    rho = 10 ** (rho_db / 20)
    # source: two-ray multipath, H(f) = 1 + rho exp(-j 2 pi f tau) (Rappaport, Wireless Communications, 2nd ed.,
    # ch. 5; from memory)
    h = lambda ff: abs(1 + rho * np.exp(-2j * np.pi * ff * tau))  # noqa: E731
    a = 10 ** (-20 / 20)
    assert line(50e3) == pytest.approx(a * h(f_rf), rel=1e-4)
    # measured deviation 2.5e-5 (relative) on the sidebands; tolerance 2.5e-4
    assert line(50e3 + fm) == pytest.approx(a * 0.25 * h(f_rf + fm), rel=2.5e-4)
    assert line(50e3 - fm) == pytest.approx(a * 0.25 * h(f_rf - fm), rel=2.5e-4)


def test_rayleigh_station_mean_power_and_fades():
    st_ = _tone_station("1.02M", -20.0, 0.0)
    st_["fading"] = {"model": "rayleigh", "rate": 40}
    x = _capture(_iq([st_], seconds=5.0, rate="100k"))
    p = np.abs(x) ** 2 / 10 ** (-20 / 10)
    # source: Rayleigh fading, power exponential with the mean of the unfaded carrier (Rappaport, Wireless
    # Communications, 2nd ed., ch. 5; from memory)
    assert p.mean() == pytest.approx(1.0, rel=0.15)
    assert np.mean(p <= 0.5) == pytest.approx(1 - np.exp(-0.5), abs=0.07)


FULL = {
    "capture": {"kind": "iq", "rate": "200k", "center": "1M", "seconds": 0.04, "noise_dbfs_per_hz": -120, "seed": 9},
    "impulse_noise": {"rate_per_s": 200, "level_dbfs": -30},
    "station": [
        {"name": "A", "frequency": "960k", "level_dbfs": -20, "depth": 0.8, "program": {"kind": "music"},
         "fading": {"model": "two_path", "rate": 3, "delay_s": "0.3ms", "second": "rician", "k_db": 3}},
        {"name": "B", "frequency": "1.03M", "level_dbfs": -30, "depth": 0.5, "program": {"kind": "noise"},
         "fading": {"model": "rayleigh", "rate": 2}},
        {"name": "C", "frequency": "1.07M", "level_dbfs": -25, "depth": 0.4,
         "program": {"kind": "sweep", "start": 100, "stop": 4000, "period_s": 0.01}},
    ],
}


@pytest.mark.parametrize("kind", ["iq", "real"])
def test_capture_does_not_depend_on_block_size(kind):
    d = {k: (dict(v) if isinstance(v, dict) else v) for k, v in FULL.items()}
    if kind == "real":
        d["capture"] = {"kind": "real", "rate": "200k", "seconds": 0.04, "noise_dbfs_per_hz": -120, "seed": 9}
        d["station"] = [dict(s, frequency=f) for s, f in zip(FULL["station"], ("20k", "50k", "80k"))]
    whole = _capture(d, block_size=65536)
    assert whole.size == 8000
    for bs in (1, 7919, 10**6):
        if bs == 1:
            part = _capture(dict(d, capture=dict(d["capture"], seconds=0.005)), block_size=1)
            assert np.array_equal(part, whole[:1000])
        else:
            assert np.array_equal(_capture(d, block_size=bs), whole)


def test_station_seed_follows_its_name_not_its_position():
    a = FULL["station"]
    one = _capture(dict(FULL, station=a))
    swapped = _capture(dict(FULL, station=[a[2], a[0], a[1]]))
    np.testing.assert_allclose(one, swapped, atol=1e-12)
