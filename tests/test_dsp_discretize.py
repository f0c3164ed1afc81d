"""Discretised IF stages against scipy.signal.freqs_zpk of their analog prototypes.

Exact path: each stage discretised by sdrx.dsp.discretize.matched_z at the IF
sample rate, as ExactFrontEnd does (zpk2sos, magnitude matched at the IF),
must follow the analog response within 0.1 dB wherever that response is
above −60 dB. The matched-z error is deterministic and grows with the
distance from the IF (the zeros at infinity have no exact image), so each
stage is held to about twice its measured error, at most 0.1 dB: a change of
the discretisation shows. Fast path: the complex low-pass equivalent times its
smooth correction must equal H(f_IF + x).

source: scipy.signal.freqs_zpk / sosfreqz (general-purpose reference library) computing the analog and
digital responses by another route than sdrx's own evaluators.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

from sdrx.chain import design_chain
from sdrx.dsp.discretize import lowpass_equivalent, matched_z
from sdrx.receiver import Receiver

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import iq_info  # noqa: E402

IF_HZ = 455e3

#: largest matched-z error measured over the grid at 5.76 MS/s, dB (stage -> measured)
MEASURED_DB = {"butterworth4_9k": 0.0432, "butterworth2_9k": 0.0897, "chebyshev5_6k": 0.0179,
               "elliptic4_5k": 4.5e-7, "bessel4_10k": 0.0751, "single_tuned_q60": 0.0448,
               "double_tuned_q40": 0.0897}


def _limit_db(key, floor_db=1e-5):
    return min(0.1, max(2 * MEASURED_DB[key], floor_db))


STAGES = {
    "butterworth4_9k": {"response": "butterworth", "order": 4, "bandwidth": "9k"},
    "butterworth2_9k": {"response": "butterworth", "order": 2, "bandwidth": "9k"},
    "chebyshev5_6k": {"response": "chebyshev", "order": 5, "bandwidth": "6k", "ripple_db": 0.5},
    "elliptic4_5k": {"response": "elliptic", "order": 4, "bandwidth": "5k", "ripple_db": 0.5, "stopband_db": 60},
    "bessel4_10k": {"response": "bessel", "order": 4, "bandwidth": "10k"},
    "single_tuned_q60": {"response": "single_tuned", "q": 60},
    "double_tuned_q40": {"response": "double_tuned", "q": 40},
}


def _stage(key):
    d = design_chain({"if_frequency": "455k", "preselector": {"kind": "none"}, "agc": {"enabled": False},
                      "if_stage": [STAGES[key]]})
    return d, d.stages[0]


def _grid(st):
    """Frequencies where the analog response is above −60 dB, limited to f_IF ± 100 kHz.

    Tuned circuits and low-order prototypes never reach −60 dB near the IF (a single-tuned stage of
    Q 60 is only about −30 dB 100 kHz away, a 2nd-order Butterworth 9 kHz wide about −56 dB), so for
    them the check covers f_IF ± 100 kHz.
    """
    f = np.linspace(IF_HZ - 100e3, IF_HZ + 100e3, 8001)
    _, h = signal.freqs_zpk(st.z, st.p, st.k, worN=2 * np.pi * f)
    mag_db = 20 * np.log10(np.abs(h))
    keep = mag_db > -60.0
    return f[keep], mag_db[keep]


@pytest.mark.parametrize("key", list(STAGES))
def test_matched_z_stage_follows_the_analog_prototype(key):
    d, st = _stage(key)
    fs_if = 5.76e6   # what the exact path chooses for a 240 kS/s capture at 1 MHz (checked below)
    zd, pd, kd = matched_z(st.z, st.p, st.k, fs_if, st.f0_hz)
    sos = signal.zpk2sos(zd, pd, float(abs(kd)) * (1.0 if np.real(kd) >= 0 else -1.0))
    f, ref_db = _grid(st)
    _, hd = signal.sosfreqz(sos, worN=f, fs=fs_if)
    err = 20 * np.log10(np.abs(hd)) - ref_db
    assert np.max(np.abs(err)) <= _limit_db(key), (key, float(np.max(np.abs(err))))   # source: scipy.signal.freqs_zpk


@pytest.mark.parametrize("key", ["butterworth4_9k", "elliptic4_5k", "double_tuned_q40"])
def test_exact_front_end_sos_is_each_stage_discretised_the_same_way(key):
    d, st = _stage(key)
    info = iq_info(240e3, 1.0e6)
    rx = Receiver(d, info, 1.0e6, path="exact")
    fs_if = rx.front.fs_if
    assert fs_if == pytest.approx(5.76e6)
    zd, pd, kd = matched_z(st.z, st.p, st.k, fs_if, st.f0_hz)
    sos = signal.zpk2sos(zd, pd, float(abs(kd)) * (1.0 if np.real(kd) >= 0 else -1.0))
    # the exact path runs its IF stages in single precision: same sections to float32 rounding
    np.testing.assert_allclose(rx.front.sos, sos, rtol=2e-7, atol=1e-12)
    f, ref_db = _grid(st)
    _, hd = signal.sosfreqz(rx.front.sos, worN=f, fs=fs_if)
    # the float32 sections add up to 0.0015 dB (measured, elliptic: its steep skirts)
    assert np.max(np.abs(20 * np.log10(np.abs(hd)) - ref_db)) <= _limit_db(key, 3e-3)   # source: scipy.signal.freqs_zpk


def test_exact_front_end_two_stages_stack_their_sections():
    d = design_chain({"preselector": {"kind": "none"}, "agc": {"enabled": False}})   # medium IF stages
    rx = Receiver(d, iq_info(240e3, 1.0e6), 1.0e6, path="exact")
    fs_if = rx.front.fs_if
    f = np.linspace(IF_HZ - 100e3, IF_HZ + 100e3, 4001)
    h_ref = np.ones(len(f), complex)
    for st in d.stages:
        h_ref *= signal.freqs_zpk(st.z, st.p, st.k, worN=2 * np.pi * f)[1]
    ref_db = 20 * np.log10(np.abs(h_ref))
    keep = ref_db > -60
    _, hd = signal.sosfreqz(rx.front.sos, worN=f[keep], fs=fs_if)
    # measured 0.056 dB
    assert np.max(np.abs(20 * np.log10(np.abs(hd)) - ref_db[keep])) <= 0.1   # source: scipy.signal.freqs_zpk


@pytest.mark.parametrize("fs_ch", [96e3, 88.2e3])
@pytest.mark.parametrize("key", list(STAGES))
def test_lowpass_equivalent_times_correction_is_h_of_if_plus_x(key, fs_ch):
    d, st = _stage(key)
    sos, corr = lowpass_equivalent(st.z, st.p, st.k, st.f0_hz, fs_ch)
    x = np.linspace(-0.45 * fs_ch, 0.45 * fs_ch, 2001)
    _, dig = signal.sosfreqz(sos, worN=x, fs=fs_ch, whole=True)
    _, h = signal.freqs_zpk(st.z, st.p, st.k, worN=2 * np.pi * (IF_HZ + x))   # source: scipy.signal.freqs_zpk
    # measured deviation 1.2e-11 (relative, elliptic); tolerance 1e-10
    np.testing.assert_allclose(dig * corr(x), h, rtol=1e-10, atol=1e-12 * np.max(np.abs(h)))


@pytest.mark.parametrize("key", list(STAGES))
def test_lowpass_equivalent_digital_part_carries_the_selectivity(key):
    # The correction must be smooth (close to flat across the passband): the IIR does the filtering.
    d, st = _stage(key)
    fs_ch = 96e3
    sos, corr = lowpass_equivalent(st.z, st.p, st.k, st.f0_hz, fs_ch)
    half = st.bandwidth_hz / 2
    x = np.linspace(-half, half, 201)
    c = np.abs(corr(x))
    assert np.ptp(20 * np.log10(c)) < 0.5


def test_matched_z_gain_is_matched_at_the_if():
    d, st = _stage("chebyshev5_6k")
    fs_if = 7.8e6
    zd, pd, kd = matched_z(st.z, st.p, st.k, fs_if, st.f0_hz)
    _, ha = signal.freqs_zpk(st.z, st.p, st.k, worN=[2 * np.pi * IF_HZ])
    _, hd = signal.freqz_zpk(zd, pd, 1.0, worN=[IF_HZ], fs=fs_if)   # source: scipy.signal.freqz_zpk
    np.testing.assert_allclose(hd * kd, ha, rtol=1e-13)   # measured 3.4e-16
