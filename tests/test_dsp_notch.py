"""The heterodyne notch stage on its own: the notch's width, a start without transient, the tracker."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, signal

from sdrx.chain.spec import NotchSpec
from sdrx.dsp.notch import HeterodyneNotch, notch_sos

from helpers_rx import feed_blocks

FS = 16000.0
BAND = (80.0, 6000.0)


@pytest.fixture
def rng():
    return np.random.default_rng(20260111)


def _programme(rng, n, rms=0.3):
    """Band-limited noise (300 Hz to 3.4 kHz) with a syllable-like envelope: no steady tone in it."""
    sos = signal.butter(4, [300.0, 3400.0], btype="bandpass", fs=FS, output="sos")
    env = 0.5 + 0.5 * np.abs(np.sin(2 * np.pi * 2.0 * np.arange(n) / FS))
    x = env * signal.sosfilt(sos, rng.standard_normal(n))
    return rms * x / np.sqrt(np.mean(x ** 2))


def _run(spec, x, block=None):
    nt = HeterodyneNotch(spec, FS, BAND)
    return feed_blocks(nt, x, block), nt


def _tone_db(x, f, phase=None):
    """Amplitude of the tone at f (or of phase φ(t), rad) in x, by a least-squares sine fit, dB."""
    ph = 2 * np.pi * f * np.arange(len(x)) / FS if phase is None else phase
    A = np.column_stack([np.cos(ph), np.sin(ph), np.ones(len(x))])
    c, *_ = np.linalg.lstsq(A, x, rcond=None)
    return 20 * math.log10(math.hypot(c[0], c[1]))


def test_notch_width_is_the_full_width_at_minus_3_db():
    # the second-order notch's −3 dB points lie width apart (Orfanidis, Introduction to Signal
    # Processing, notch and peak filters: Δω is the −3 dB width (from memory)), found here by root
    # finding on the response
    f0, width, fs = 1500.0, 40.0, 96000.0
    sos = notch_sos(f0, width, fs)

    def gain_db(f):
        return 20 * np.log10(abs(signal.sosfreqz(sos, worN=[f], fs=fs)[1][0])) + 10 * np.log10(2)

    lo = optimize.brentq(gain_db, f0 - 3 * width, f0 - 1.0)
    hi = optimize.brentq(gain_db, f0 + 1.0, f0 + 3 * width)
    assert hi - lo == pytest.approx(width, abs=0.05)


def test_fixed_notches_start_in_the_steady_state_and_split_any_way(rng):
    n = int(2 * FS)
    t = np.arange(n) / FS
    x = 0.8 + 0.4 * np.cos(2 * np.pi * 1000 * t + 0.3) + 0.1 * np.cos(2 * np.pi * 2500 * t)
    spec = NotchSpec(frequencies_hz=(1000.0, 2500.0))
    y, _ = _run(spec, x)
    # a level and the two tones: after the notches nothing is left but the level, from the first sample
    # (the notches start as if they had run on the level and the tones for 12 time constants: e^-12)
    assert np.max(np.abs(y - 0.8)) < 1e-5
    for block in (7919, 10 * n):
        assert np.array_equal(_run(spec, x, block)[0], y)
    k = int(0.3 * FS)   # blocks of one sample (a shorter piece: one call per sample)
    assert np.array_equal(_run(spec, x[:k], 1)[0], _run(spec, x[:k])[0])


def test_auto_finds_a_steady_tone_in_programme_and_removes_it_from_its_first_sample(rng):
    n = int(6 * FS)
    t = np.arange(n) / FS
    # the whistle 10 dB above the programme (a strong heterodyne; the programme is kept quiet enough
    # that its own share of the frequency does not hide the residue the checks look for)
    prog = _programme(rng, n, rms=0.02)
    whistle = 0.1 * np.cos(2 * np.pi * 1234.5 * t + 1.0)
    y, nt = _run(NotchSpec(auto=True), prog + whistle)
    assert len(y) == n
    tones = nt.report()
    assert len(tones) == 1
    assert tones[0]["freq_hz"] == pytest.approx(1234.5, abs=0.1)
    assert tones[0]["start_s"] == 0.0 and tones[0]["end_s"] == pytest.approx(6.0, abs=0.01)
    # the whistle 35 dB down in the first quarter second as in the whole run
    before = _tone_db(whistle, 1234.5)
    assert _tone_db(y, 1234.5) < before - 35.0
    assert _tone_db(y[:int(0.25 * FS)], 1234.5) < before - 35.0


def test_auto_follows_a_drifting_tone(rng):
    n = int(8 * FS)
    t = np.arange(n) / FS
    f = 1000.0 + 2.0 * t                                       # drifts 16 Hz, 0.16 Hz per tracker hop
    phase = 2 * np.pi * np.cumsum(f) / FS
    whistle = 0.1 * np.cos(phase)
    y, nt = _run(NotchSpec(auto=True), _programme(rng, n, rms=0.02) + whistle)
    assert len(nt.report()) == 1
    # the residual whistle, in half-second pieces, stays 30 dB under the whistle
    k = int(0.5 * FS)
    worst = max(_tone_db(y[i:i + k], 0, phase[i:i + k]) for i in range(0, n - k + 1, k))
    assert worst < 20 * math.log10(0.1) - 30.0, worst


def test_auto_leaves_programme_without_steady_tones_untouched(rng):
    x = _programme(rng, int(5 * FS))
    y, nt = _run(NotchSpec(auto=True), x)
    assert nt.report() == [] and np.array_equal(y, x)


def test_struck_notes_at_one_pitch_are_not_a_steady_tone(rng):
    # a note struck every 0.5 s, decaying with a 0.3 s time constant: the same pitch for seconds,
    # but its level jumps at each stroke and decays, which a carrier's beat never does
    n = int(5 * FS)
    t = np.arange(n) / FS
    env = np.exp(-(t % 0.5) / 0.3)
    x = _programme(rng, n) + 0.2 * env * np.sin(2 * np.pi * 880.0 * t)
    y, nt = _run(NotchSpec(auto=True), x)
    assert nt.report() == [] and np.array_equal(y, x)


@pytest.mark.parametrize("block", [1, 7919, 10 ** 6])
def test_auto_output_does_not_depend_on_blocks(rng, block):
    n = int(4 * FS)
    t = np.arange(n) / FS
    x = _programme(rng, n) + 0.1 * np.cos(2 * np.pi * 1500.0 * t)
    whole, nt1 = _run(NotchSpec(auto=True), x)
    split, nt2 = _run(NotchSpec(auto=True), x, block)
    assert np.array_equal(whole, split)
    assert nt1.report() == nt2.report()
