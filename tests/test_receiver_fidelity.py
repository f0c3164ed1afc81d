"""Fidelity: SINAD with the default chain, envelope-detector THD, diode diagonal clipping.

Audio is measured after the Receiver's own delay compensation, skipping the
first 0.1 s (AGC and filter settling). SINAD and THD come from least-squares
sine fits (helpers_rx; source: IEEE Std 1241 sine-fit method).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pytest

from sdrx.chain import design_chain
from sdrx.dsp.detectors import diagonal_clipping_limit_s

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import am_station, complex_noise, iq_info, run_receiver, sinad_db, thd  # noqa: E402

FS = 240e3
CENTER = 1.0e6
TUNE = 1.0e6
INFO = iq_info(FS, CENTER)
AFS = 48000.0
FM = 1000.0
SKIP_S = 0.1


def _station(depth, seconds, level_dbfs=-20.0, cn_db=None, rng=None):
    n = int(round(seconds * FS))
    x = am_station(TUNE, level_dbfs, depth, FM, FS, CENTER, n)
    if cn_db is not None:
        # carrier-to-noise ratio defined in a 9 kHz noise bandwidth (the DSB AM emission width for
        # 4.5 kHz audio; source: ITU-R BS.639): noise density N0 = C / (10^(CN/10) · 9 kHz),
        # complex white noise over the capture's fs has total power N0 · fs.
        c = 10 ** (level_dbfs / 10)
        n0 = c / (10 ** (cn_db / 10) * 9e3)
        x = x + complex_noise(rng, n0 * FS, n)
    return x


def _audio_tail(audio):
    return audio[int(SKIP_S * AFS):]


def _post_detection_noise_bandwidth_hz(fm_hz, preselector_q=40.0):
    """W of the medium chain: the audio noise bandwidth of the envelope detector's in-phase noise, at fm.

    Above threshold the detector passes the in-phase noise component, whose one-sided spectrum after the IF is
    N0·(|H(f)|² + |H(−f)|²)/2 (H the antenna-to-IF response about the carrier, in baseband offset f), and the
    audio filters A(f) then shape it; normalised to the tone's own gain |A(fm)|·(|H(fm)| + |H(−fm)|)/2:
    W = ∫₀^(fs/2) |A(f)|²·(|H(f)|² + |H(−f)|²)/2 df / (|A(fm)|²·|G(fm)|²), up to the 24 kHz Nyquist
    frequency of the 48 kHz audio. Every factor is computed here from the medium preset's parameters with the
    handbook formulas, not from sdrx's design objects:
    - tracking preselector, Q 40 at the tune (None: no preselector), and the single-tuned IF stage, Q 60 at
      455 kHz: the universal resonance curve (Terman, Radio Engineers' Handbook, 1943, sec. 3; from memory);
    - the order-2, 9 kHz Butterworth IF stage: 1/(1 + Ω⁴), Ω = (f² − f0²)/(f·B) (Williams & Taylor, Electronic
      Filter Design Handbook, 4th ed., ch. 2; from memory); high-side LO: an RF offset +d lands at IF − d;
    - audio high-pass 80 Hz order 2 and low-pass 4.5 kHz order 4: Butterworth by the bilinear transform at
      the 96 kHz channel rate (see tests/test_audio_response.py).
    """
    from scipy import integrate

    if_hz = 455e3

    def h2(df):
        f, fi = TUNE + df, if_hz - df
        pre = 1.0 if preselector_q is None else 1 / (1 + (preselector_q * (f / TUNE - TUNE / f)) ** 2)
        omega = (fi * fi - if_hz * if_hz) / (fi * 9e3)
        return pre / (1 + omega ** 4) / (1 + (60 * (fi / if_hz - if_hz / fi)) ** 2)

    def a2(f):
        t = lambda x: math.tan(math.pi * x / 96e3)  # noqa: E731
        r_hp, r_lp = (t(f) / t(80.0)) ** 4, (t(f) / t(4500.0)) ** 8
        return r_hp / (1 + r_hp) / (1 + r_lp)

    num, _ = integrate.quad(lambda f: a2(f) * (h2(f) + h2(-f)) / 2, 0.0, 24e3, limit=500,
                            points=[80.0, 1e3, 4.5e3, 9e3])
    g = (math.sqrt(h2(fm_hz)) + math.sqrt(h2(-fm_hz))) / 2
    return num / (a2(fm_hz) * g * g)


# Predicted SINAD of a 1 kHz tone at 30 % (the bench test signal, common practice) through the medium chain,
# AGC off, envelope detector, from the detector's noise formula above threshold
# S/N = m²·(C/N0)/(2·W) (Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2, noise in AM receivers
# using envelope detection; from memory) with W the post-detection noise bandwidth computed above (2992 Hz),
# and SINAD = 10·log10(1 + S/N). C/N is set in a 9 kHz bandwidth (the DSB emission width of 4.5 kHz audio,
# ITU-R BS.639): N0 = C/(10^(CN/10)·9 kHz). Measured deviation from the prediction: 0.04 dB with this seed
# (up to 0.12 dB with others), the statistical spread of a noise power read over 0.9 s of 3 kHz-wide noise
# (1σ = 1/sqrt(W·T) = 1.9 %, 0.08 dB); tolerance 0.4 dB (5σ). A 1 % error in any filter's bandwidth moves W by about 1 % (0.04 dB) and
# is not what this catches; a detector that is not linear in the noise, a wrong noise scaling or a lost
# sideband (−3 dB) is.
@pytest.mark.parametrize("path, cn_db", [("fast", 30.0), ("fast", 45.0), ("fast", 60.0), ("exact", 45.0)])
def test_sinad_of_an_am_tone_follows_the_envelope_detector_noise_formula(path, cn_db, rng):
    m, level_dbfs, seconds = 0.3, -60.0, 1.0
    w = _post_detection_noise_bandwidth_hz(FM)
    assert w == pytest.approx(2991.8, abs=0.5)
    c = 10 ** (level_dbfs / 10)
    n0 = c / (10 ** (cn_db / 10) * 9e3)
    predicted = 10 * math.log10(1 + m * m * (c / n0) / (2 * w))
    x = _station(m, seconds, level_dbfs=level_dbfs, cn_db=cn_db, rng=rng)
    audio, _ = run_receiver(design_chain({"agc": {"enabled": False}}), INFO, TUNE, x, path=path)
    assert len(audio) == int(seconds * AFS)
    assert sinad_db(_audio_tail(audio), AFS, FM) == pytest.approx(predicted, abs=0.4)


@pytest.fixture
def rng():
    return np.random.default_rng(20240603)


def _chain(detector, agc=False):
    return design_chain({"preselector": {"kind": "none"}, "agc": {"enabled": agc}, "detector": detector})


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_ideal_envelope_detector_is_distortion_free_at_80_percent_depth(path):
    x = _station(0.8, 0.2)
    audio, _ = run_receiver(_chain({"kind": "envelope"}), INFO, TUNE, x, path=path)
    # |u| of a linear IF passing both sidebands alike is the undistorted envelope A(1 + m·cos): THD 0 but for
    # the IF's slight asymmetry about the carrier; measured 2.1e-7 (fast), 4.6e-7 (exact); tolerance 5e-6
    assert thd(_audio_tail(audio), AFS, FM) <= 5e-6


def test_diode_detector_rc_above_the_diagonal_clipping_limit_clips_and_warns():
    m = 0.8
    # source: diagonal clipping, Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2 (from memory)
    limit = math.sqrt(1 - m * m) / (2 * math.pi * FM * m)
    assert diagonal_clipping_limit_s(m, FM) == pytest.approx(limit, rel=1e-12)
    assert limit == pytest.approx(119.4e-6, rel=1e-3)
    rc_us = 2 * limit * 1e6
    audio, rx = run_receiver(_chain({"kind": "diode", "rc_us": rc_us}), INFO, TUNE, _station(m, 0.2))
    assert thd(_audio_tail(audio), AFS, FM) > 0.05   # measured 7.5 %
    assert any("diagonal-clipping" in w for w in rx.warnings), rx.warnings


def test_diode_detector_rc_well_below_the_limit_stays_clean():
    m = 0.8
    # the warning judges RC against the audio bandwidth (4.5 kHz), whose limit is sqrt(1−m²)/(2π·4.5k·m) ≈ 26.5 µs
    rc_us = 0.5 * math.sqrt(1 - m * m) / (2 * math.pi * 4500.0 * m) * 1e6
    # 0.6 s: the summary's depth estimate (90th percentile of 50 ms windows) then ignores the start-up window
    audio, rx = run_receiver(_chain({"kind": "diode", "rc_us": rc_us}), INFO, TUNE, _station(m, 0.6))
    assert thd(_audio_tail(audio), AFS, FM) <= 3e-6   # measured 2.1e-7
    assert not any("diagonal-clipping" in w for w in rx.warnings), rx.warnings


def test_diode_clipping_grows_with_rc():
    m = 0.8
    limit_us = math.sqrt(1 - m * m) / (2 * math.pi * FM * m) * 1e6   # source: diagonal clipping (same source)
    values = []
    for factor in (0.9, 2.0, 4.0):
        audio, _ = run_receiver(_chain({"kind": "diode", "rc_us": factor * limit_us}), INFO, TUNE, _station(m, 0.2))
        values.append(thd(_audio_tail(audio), AFS, FM))
    # just inside the limit the capacitor still follows the envelope (measured THD 2.1e-7); beyond it clipping
    # grows with RC (7.5 % at twice the limit, 21 % at four times)
    assert values[0] < 3e-6 and 0.05 < values[1] < values[2]


def test_synchronous_detector_recovers_the_tone_with_the_predicted_sinad(rng):
    # coherent detection of AM with carrier has the same output S/N as the envelope detector above threshold,
    # m²·(C/N0)/(2·W) (Haykin, Communication Systems, 4th ed., ch. 2; from memory); here no preselector, so W
    # is the IF and audio filters' alone (3057 Hz). 0.8 s measured after 0.2 s of PLL pull-in: 1σ 0.09 dB;
    # measured deviation 0.07 dB; tolerance 0.5 dB
    m, cn_db, seconds = 0.8, 60.0, 1.0
    x = _station(m, seconds, cn_db=cn_db, rng=rng)
    audio, _ = run_receiver(_chain({"kind": "synchronous"}), INFO, TUNE, x)
    tail = audio[int(0.2 * AFS):]
    assert thd(tail, AFS, FM) <= 3e-4   # measured 2.2e-5 (the noise's share of the harmonic fit)
    w = _post_detection_noise_bandwidth_hz(FM, preselector_q=None)
    predicted = 10 * math.log10(1 + m * m * 10 ** (cn_db / 10) * 9e3 / (2 * w))
    assert sinad_db(tail, AFS, FM) == pytest.approx(predicted, abs=0.5)
