"""The run summary's checks: what the detector hears, measured while the receiver runs.

Truth comes from the test signals themselves: carriers of known level and
frequency, white noise of known density (C/N0 = carrier power / noise power
per hertz), and the physical identity that a real mixer without a
preselector passes the image as strongly as the wanted station.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sdrx.chain import design_chain
from sdrx.receiver.monitor import noise_bandwidth_hz

from helpers_rx import am_station, carrier, complex_noise, iq_info, run_receiver

FS = 240e3
TUNE = 1.0e6
INFO = iq_info(FS, TUNE)
PATHS = ("fast", "exact")


def _speech(n):
    """sdrx's own speech-like programme at the capture rate."""
    from scipy import signal

    from sdrx.synth import make_program

    p = make_program({"kind": "speech"}, 16000.0, 3).read(n // 15 + 16)
    return signal.resample_poly(p, 15, 1)[:n]


@pytest.mark.parametrize("path", PATHS)
def test_carrier_snr_is_the_carrier_over_the_noise_in_the_noise_bandwidth(path):
    rng = np.random.default_rng(11)
    n = int(1.5 * FS)
    level, n0_dbfs_hz = -30.0, -125.0
    x = 10 ** (level / 20) * (1 + 0.8 * _speech(n)) * np.exp(0.3j)
    x += complex_noise(rng, 10 ** (n0_dbfs_hz / 10) * FS, n)         # density N0: total N0·fs
    d = design_chain("medium")
    _, rx = run_receiver(d, INFO, TUNE, x, path=path)
    # C/N = C/N0 − 10·log10(B_n), B_n the chain's equivalent noise bandwidth (noise-bandwidth definition:
    # ∫|H|²df/|H(f0)|², e.g. Carlson, Communication Systems, 4th ed., §9.3; from memory)
    expected = level - n0_dbfs_hz - 10 * math.log10(noise_bandwidth_hz(d, TUNE))
    # minimum statistics on 1.5 s of speech: within 0.5 dB (measured 0.1-0.2 dB, also for tone and music)
    assert rx.checks["carrier_snr_db"] == pytest.approx(expected, abs=0.5)
    assert not any("carrier" in w for w in rx.warnings)


def test_noise_bandwidth_of_a_single_tuned_circuit():
    # one single-tuned circuit of loaded Q: B_n = (π/2)·f0/Q (Terman, Radio Engineers' Handbook,
    # resonant circuits; from memory), with the other stages made wide and the preselector off
    d = design_chain({"preselector": {"kind": "none"},
                      "if_stage": [{"response": "single_tuned", "q": 50, "gain_db": 0}]})
    assert noise_bandwidth_hz(d, TUNE, span_hz=400e3) == pytest.approx(math.pi / 2 * 455e3 / 50, rel=0.02)


@pytest.mark.parametrize("path", PATHS)
def test_an_empty_channel_is_reported(path):
    rng = np.random.default_rng(2)
    n = int(0.6 * FS)
    x = carrier(TUNE + 10e3, -30.0, FS, TUNE, n) + complex_noise(rng, 10 ** (-120 / 10) * FS, n)
    _, rx = run_receiver(design_chain("medium"), INFO, TUNE, x, path=path)
    assert rx.checks["carrier_snr_db"] < 10.0
    assert rx.checks["tuning_error_hz"] is None
    assert [w for w in rx.warnings if w.startswith("no carrier at 1 MHz")]


@pytest.mark.parametrize("path", PATHS)
def test_tuning_error_and_adjacent_carriers(path):
    rng = np.random.default_rng(3)
    n = int(0.6 * FS)
    x = am_station(TUNE + 120.0, -30.0, 0.3, 1000.0, FS, TUNE, n)
    x += am_station(TUNE + 10e3, -20.0, 0.3, 700.0, FS, TUNE, n, phase=1.0)     # +10 dB, one channel up
    x += am_station(TUNE - 20e3, -40.0, 0.3, 400.0, FS, TUNE, n, phase=2.0)     # -10 dB, two down
    x += complex_noise(rng, 10 ** (-130 / 10) * FS, n)
    d = design_chain("wide")
    _, rx = run_receiver(d, INFO, TUNE, x, path=path)
    ch = rx.checks
    # frequency of a line by parabolic interpolation of a Blackman-Harris spectrum, 23 Hz bins: ±1 Hz
    assert ch["tuning_error_hz"] == pytest.approx(120.0, abs=1.0)
    h = lambda f: 20 * math.log10(abs(d.rf_response(f, TUNE)[0]))  # noqa: E731
    ref = -30.0 + h(TUNE + 120.0)
    # line power from the window's main lobe: within 0.1 dB of the carrier's level
    assert ch["adjacent_leak_db"]["10000"] == pytest.approx(-20.0 + h(TUNE + 10e3) - ref, abs=0.1)
    assert ch["adjacent_leak_db"]["-20000"] == pytest.approx(-40.0 + h(TUNE - 20e3) - ref, abs=0.1)
    assert ch["adjacent_leak_db"]["-10000"] is None and ch["adjacent_leak_db"]["20000"] is None   # no carriers
    assert any("120 Hz above the tune" in w for w in rx.warnings)
    assert any("adjacent channel 1.01 MHz (+10 kHz)" in w for w in rx.warnings)


@pytest.mark.parametrize("path", PATHS)
def test_the_image_reaching_the_detector_is_reported(path):
    # a real mixer and no preselector: the image channel gets the wanted channel's response
    # (physical identity of the product), so a +6 dB station there reaches the detector 6 dB up
    fs, tune = 1.2e6, 1.0e6
    center = tune + 455e3
    info = iq_info(fs, center)
    n = int(0.4 * fs)
    x = am_station(tune, -26.0, 0.3, 1000.0, fs, center, n)
    x += am_station(tune + 910e3 + 300.0, -20.0, 0.3, 700.0, fs, center, n, phase=1.0)
    d = design_chain({"preselector": {"kind": "none"}})
    _, rx = run_receiver(d, info, tune, x, path=path)
    h = lambda f: 20 * math.log10(abs(d.rf_response(f, tune)[0]))  # noqa: E731
    assert rx.checks["image_leak_db"] == pytest.approx(6.0 + h(tune + 910e3 + 300.0) - h(tune), abs=0.1)
    assert any(w.startswith("the image channel 1.91 MHz reaches the detector") and "mostly the image" in w
               for w in rx.warnings)
