"""Sensitivity: the chain run with its thermal noise against S/N = m²·(C/N0)/(2·W), kT0 = -174 dBm/Hz."""

from __future__ import annotations

import math

import pytest

from sdrx.analysis import sensitivity as sens
from sdrx.chain import design_chain

TUNE = 1000e3
QUICK = {"offsets_db": (-3.0, 0.0, 3.0), "measure_s": 0.3}


def _design(spec, nf=10.0, fs=-10.0):
    return sens.with_frontend(design_chain(spec), noise_figure_db=nf, full_scale_dbm=fs)


def test_prediction_is_the_envelope_detector_formula():
    # source: Haykin, Communication Systems, noise in AM receivers (envelope detection above threshold):
    # S/N = m²·(C/N0)/(2W); kT0 = -174 dBm/Hz (T0 = 290 K, IEEE noise-figure definition)
    m, w, sn = 0.3, 3000.0, 20.0
    c_n0 = sn + 10 * math.log10(2 * w) - 20 * math.log10(m)
    assert c_n0 == pytest.approx(68.2, abs=0.05)
    want = c_n0 - 174.0 + 10.0
    assert want == pytest.approx(-95.8, abs=0.05)
    assert sens.predicted_sensitivity_dbm(10.0, m, w, sn) == pytest.approx(want, abs=0.03)   # -173.975 vs -174


def test_noise_bandwidth_of_a_butterworth_audio_filter_behind_a_wide_if():
    # with an IF far wider than the audio, W is the audio filter's equivalent noise bandwidth:
    # Butterworth low-pass of order n, B_n = fc·(π/2n)/sin(π/2n) (filter handbooks, e.g. Williams & Taylor);
    # a first-order high-pass at f_h removes (π/2)·f_h of it (its noise bandwidth deficit, same source)
    fc, n, f_h = 3000.0, 4, 20.0
    spec = {"preselector": {"kind": "none"},
            "if_stage": [{"response": "butterworth", "order": 2, "bandwidth": "120k"}],
            "audio": {"lowpass": fc, "lowpass_order": n, "highpass": f_h, "highpass_order": 1}}
    want = fc * (math.pi / (2 * n)) / math.sin(math.pi / (2 * n)) - math.pi / 2 * f_h
    assert sens.noise_bandwidth_hz(design_chain(spec), TUNE) == pytest.approx(want, rel=0.003)


@pytest.mark.parametrize("preset", ["wide", "medium", "narrow"])
def test_measured_sensitivity_agrees_with_the_formula(preset):
    r = sens.measure_sensitivity(_design(preset), TUNE, path="fast")
    # issue: within 1.5 dB; the chain's envelope detector at IF S/N near 30 dB is far above threshold and
    # the measured figure lands within a few tenths of a dB (the noise estimate's scatter)
    assert r.level_dbm == pytest.approx(r.predicted_dbm, abs=0.5)
    assert r.slope_db_per_db == pytest.approx(1.0, abs=0.02)   # above threshold: 1 dB of S/N per dB of carrier
    assert r.image_noise_db < 0.05                              # a tracking preselector keeps image noise out
    assert all(abs(sn - 20.0) < 7.0 for _, sn in r.points)


def test_ten_db_more_noise_figure_costs_ten_db():
    a = sens.measure_sensitivity(_design("medium", nf=10.0), TUNE, **QUICK)
    b = sens.measure_sensitivity(_design("medium", nf=20.0), TUNE, **QUICK)
    assert b.level_dbm - a.level_dbm == pytest.approx(10.0, abs=0.05)


def test_the_noise_added_is_f_kt0_not_f_minus_1():
    # a noiseless receiver (NF 0 dB, F = 1) still hears its 290 K source: F·kT0 gives a finite sensitivity
    # and 3 dB of noise figure (F = 2) costs 10·log10(2) = 3.01 dB; with (F−1)·kT0 NF 0 would add no noise
    a = sens.measure_sensitivity(_design("medium", nf=0.0), TUNE, **QUICK)
    b = sens.measure_sensitivity(_design("medium", nf=10 * math.log10(2)), TUNE, **QUICK)
    assert math.isfinite(a.level_dbm)
    assert b.level_dbm - a.level_dbm == pytest.approx(10 * math.log10(2), abs=0.05)
    assert a.level_dbm == pytest.approx(a.predicted_dbm, abs=0.5)


def test_exact_path_measures_the_same_samples():
    d = _design("medium")
    fast = sens.measure_sensitivity(d, TUNE, path="fast", **QUICK)
    exact = sens.measure_sensitivity(d, TUNE, path="exact", **QUICK)
    # the noise is added to the capture samples, so both paths see the same noisy signal
    assert exact.level_dbm == pytest.approx(fast.level_dbm, abs=0.1)
    assert exact.level_dbm == pytest.approx(exact.predicted_dbm, abs=0.5)


def test_full_scale_does_not_move_the_sensitivity():
    a = sens.measure_sensitivity(_design("medium", fs=-30.0), TUNE, **QUICK)
    b = sens.measure_sensitivity(_design("medium", fs=10.0), TUNE, **QUICK)
    assert a.level_dbm == pytest.approx(b.level_dbm, abs=0.01)


def test_needs_a_noise_figure_and_full_scale():
    from sdrx.errors import ParameterError

    with pytest.raises(ParameterError, match="frontend.noise_figure_db and frontend.full_scale_dbm"):
        sens.measure_sensitivity(design_chain("medium"), TUNE)


def test_without_preselection_the_image_noise_doubles_the_noise():
    # physical identity: a real mixer's image response equals its wanted response, so with no preselector
    # the noise around the image reaches the detector as strongly as that around the tune: +10·log10(2) dB
    r = sens.measure_sensitivity(_design({"preselector": {"kind": "none"}}), TUNE, **QUICK)
    assert r.image_noise_db == pytest.approx(10 * math.log10(2), abs=0.01)
    assert r.level_dbm == pytest.approx(r.predicted_dbm, abs=0.5)
