"""Image physics through the real chain: equal inputs on the wanted and the image frequency.

The capture holds both (fs 1.2 MS/s centred on the LO), the Receiver is tuned
to 1000 kHz with a 455 kHz IF and high-side LO, so the image is 1910 kHz.
Image rejection ratio = IF output from the wanted frequency over IF output
from the image, equal inputs (source: Federal Standard 1037C definition),
read from the carrier level each run reports, AGC off.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest

from sdrx.chain import design_chain

sys.path.insert(0, str(Path(__file__).parent))  # tests/helpers_rx.py (pytest importlib mode)
from helpers_rx import carrier_level_db, iq_info  # noqa: E402

TUNE = 1000e3
IF_HZ = 455e3
FS = 1.2e6
INFO = iq_info(FS, TUNE + IF_HZ)          # band 855 kHz .. 2055 kHz: wanted and image both inside
IMAGE = TUNE + 2 * IF_HZ                   # source: common practice, high-side LO: f_image = f + 2·IF
LEVEL = -20.0
SECONDS = 0.03
SETTLE_S = 0.01                            # the level meter works in 10 ms windows: skip the first (start-up)


def _chain(preselector, mixer=None):
    spec = {"if_frequency": "455k", "injection": "high", "preselector": preselector,
            "agc": {"enabled": False}}
    if mixer is not None:
        spec["mixer"] = mixer
    return design_chain(spec)   # default IF stages of the medium chain


def _wanted_and_image(d, path="fast"):
    w = carrier_level_db(d, INFO, TUNE, TUNE, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S, path=path)
    im = carrier_level_db(d, INFO, TUNE, IMAGE, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S, path=path)
    return w, im


def test_worked_image_frequency():
    # common practice, high-side LO: 1000 kHz, IF 455 kHz -> LO 1455, image 1910 kHz
    d = _chain({"kind": "none"})
    assert d.lo_hz(TUNE) == pytest.approx(TUNE + IF_HZ)
    assert d.image_hz(TUNE) == pytest.approx(IMAGE)
    assert IMAGE == pytest.approx(1910e3)


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_real_mixer_without_preselector_passes_the_image_at_the_wanted_level(path):
    d = _chain({"kind": "none"})
    w, im = _wanted_and_image(d, path)
    # measured deviation: wanted 5.5e-6 dB (fast), 2.6e-5 dB (exact); image re wanted 8e-8 / 5.6e-7 dB
    assert w == pytest.approx(LEVEL, abs=3e-4)
    # source: physical identity — a real multiplier's image response equals its wanted response
    assert im == pytest.approx(w, abs=1e-5)


def _preselector_rejection_db(q, f, f_im):
    rho = f_im / f - f / f_im
    # source: α = sqrt(1 + Q²ρ²) for one single-tuned RF stage, Kennedy & Davis, Electronic Communication
    # Systems, 4th ed. (1999), receivers chapter (from memory)
    return 20 * math.log10(math.sqrt(1 + (q * rho) ** 2))


# measured deviation 3e-6 dB (Q 10), 6e-6 dB (Q 40), 2.4e-3 dB (Q 100: the image 42.8 dB down)
@pytest.mark.parametrize("q, tol_db", [(10.0, 1e-4), (40.0, 1e-4), (100.0, 0.025)])
def test_tracking_preselector_rejects_the_image_by_sqrt_1_plus_q2_rho2(q, tol_db):
    d = _chain({"kind": "tracking", "q": q})
    w, im = _wanted_and_image(d)
    expected = _preselector_rejection_db(q, TUNE, IMAGE)
    assert w - im == pytest.approx(expected, abs=tol_db)
    if q == 100.0:
        # the formula above at 1000 kHz, IF 455, Q 100: 42.8 dB
        assert expected == pytest.approx(42.8, abs=0.05)


def test_tracking_preselector_exact_path():
    q = 40.0
    d = _chain({"kind": "tracking", "q": q})
    w, im = _wanted_and_image(d, "exact")
    assert w - im == pytest.approx(_preselector_rejection_db(q, TUNE, IMAGE), abs=1e-4)   # measured 6e-6 dB


def _irr_db(gain_error_db, phase_deg):
    g = 10 ** (gain_error_db / 20)
    c = math.cos(math.radians(phase_deg))
    # source: IRR = (1+γ²+2γcosφ)/(1+γ²−2γcosφ), Razavi, RF Microelectronics, 2nd ed. (2011), ch. 4,
    # image-reject receivers (from memory)
    return 10 * math.log10((1 + g * g + 2 * g * c) / (1 + g * g - 2 * g * c))


@pytest.mark.parametrize("gain_error_db, phase_deg", [
    (20 * math.log10(1.01), 1.0),   # 1 % gain error and 1°: 39.96 dB
    (0.0, 1.0),                     # 1° alone: 41.18 dB
    (0.5, 3.0),
    (-1.0, 0.0),
    (0.0, 0.2),                     # 55.2 dB
    (0.015, 0.12),                  # 57.3 dB
])
def test_quadrature_mixer_image_rejection_ratio(gain_error_db, phase_deg):
    d = _chain({"kind": "none"}, {"kind": "quadrature", "gain_error_db": gain_error_db,
                                   "phase_error_deg": phase_deg})
    w, im = _wanted_and_image(d)
    expected = _irr_db(gain_error_db, phase_deg)
    assert expected <= 60.0
    assert w - im == pytest.approx(expected, abs=1e-4)   # measured deviation up to 9e-6 dB (at 57.3 dB)
    if (gain_error_db, phase_deg) == (0.0, 1.0):
        assert expected == pytest.approx(41.18, abs=0.01)
    if phase_deg == 1.0 and gain_error_db > 0:
        assert expected == pytest.approx(39.96, abs=0.01)


def test_quadrature_mixer_exact_path():
    ge, ph = 20 * math.log10(1.01), 1.0
    d = _chain({"kind": "none"}, {"kind": "quadrature", "gain_error_db": ge, "phase_error_deg": ph})
    w, im = _wanted_and_image(d, "exact")
    assert w == pytest.approx(LEVEL, abs=3e-4)                 # measured 3.1e-5 dB
    assert w - im == pytest.approx(_irr_db(ge, ph), abs=0.01)  # measured 7.5e-4 dB


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_wanted_and_image_carriers_beat_with_the_mixing_phase(path):
    # LO cos(2π f_LO t) with t = 0 at the capture's first sample. A wanted carrier A·e^{jα} comes out at the
    # IF as (A/2)·e^{-jα} (high-side: inverted), an image carrier A·e^{jβ} as (A/2)·e^{jβ}; together
    # |e^{-jα} + e^{jβ}| = 2|cos((α+β)/2)|: in phase +6.02 dB, α = β = π/2 they cancel.
    # source: physical identity — product of cosines (cos a·cos b = ½cos(a−b) + ½cos(a+b))
    d = _chain({"kind": "none"})
    n = int(SECONDS * FS)
    from helpers_rx import carrier, run_receiver

    for alpha, beta in [(0.0, 0.0), (1.0, -1.0), (0.3, 0.9)]:
        x = carrier(TUNE, LEVEL, FS, INFO.center_hz, n, alpha) + carrier(IMAGE, LEVEL, FS, INFO.center_hz, n, beta)
        _, rx = run_receiver(d, INFO, TUNE, x, path=path)
        expected = LEVEL + 20 * math.log10(2 * abs(math.cos((alpha + beta) / 2)))
        # measured deviation 5.6e-6 dB (fast), 4.2e-5 dB (exact)
        assert rx.stats(SETTLE_S)["carrier_dbfs"]["mean"] == pytest.approx(expected, abs=5e-4), (alpha, beta)


def test_low_side_injection_image_below_the_tuning():
    tune = 1500e3
    info = iq_info(FS, tune - IF_HZ)            # band 445 kHz .. 1645 kHz
    d = design_chain({"if_frequency": "455k", "injection": "low", "preselector": {"kind": "tracking", "q": 40},
                      "agc": {"enabled": False}})
    f_im = tune - 2 * IF_HZ                     # source: common practice, low-side LO: f_image = f − 2·IF
    assert d.image_hz(tune) == pytest.approx(f_im)
    w = carrier_level_db(d, info, tune, tune, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S)
    im = carrier_level_db(d, info, tune, f_im, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S)
    assert w - im == pytest.approx(_preselector_rejection_db(40.0, tune, f_im), abs=1e-4)   # measured 6e-6 dB


@pytest.mark.parametrize("path", ["fast", "exact"])
def test_low_side_lo_below_the_if_hears_the_image_at_2if_minus_tune(path):
    # tune 600 kHz, IF 455 kHz, low side: LO 145 kHz lies below the IF, so the image is 2·IF − f = 310 kHz,
    # which reaches the IF through the sum product 310 + 145 = 455 kHz
    # source: common practice (mixer spur charts, m·f_LO ± n·f_RF = IF with m = n = 1)
    tune = 600e3
    info = iq_info(FS, 800e3)                    # band 200 kHz .. 1400 kHz: both inside
    d = design_chain({"if_frequency": "455k", "injection": "low", "preselector": {"kind": "none"},
                      "agc": {"enabled": False}})
    f_im = 2 * IF_HZ - tune
    assert d.image_hz(tune) == pytest.approx(f_im)
    assert abs(d.rf_response(f_im, tune)[0]) == pytest.approx(abs(d.rf_response(tune, tune)[0]), rel=1e-9)
    w = carrier_level_db(d, info, tune, tune, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S, path=path)
    im = carrier_level_db(d, info, tune, f_im, level_dbfs=LEVEL, seconds=SECONDS, settle_s=SETTLE_S, path=path)
    # source: physical identity — a real multiplier's image response equals its wanted response
    # (measured deviation: wanted 3.2e-5 dB, image re wanted 5.2e-6 dB)
    assert w == pytest.approx(LEVEL, abs=3e-4)
    assert im == pytest.approx(w, abs=5e-5)


def test_low_side_lo_below_the_if_image_beats_upright_in_both_paths():
    # the sum-product image arrives upright (A/2·e^{jβ}), the low-side wanted upright too (A/2·e^{jα}):
    # |e^{jα} + e^{jβ}| = 2|cos((α−β)/2)|, the same in both paths
    # source: physical identity — cos a·cos b = ½cos(a−b) + ½cos(a+b)
    tune = 600e3
    info = iq_info(FS, 800e3)
    d = design_chain({"if_frequency": "455k", "injection": "low", "preselector": {"kind": "none"},
                      "agc": {"enabled": False}})
    from helpers_rx import carrier, run_receiver

    n = int(SECONDS * FS)
    for alpha, beta in [(0.0, 0.0), (1.0, -1.0), (0.3, 0.9)]:
        x = (carrier(tune, LEVEL, FS, info.center_hz, n, alpha)
             + carrier(2 * IF_HZ - tune, LEVEL, FS, info.center_hz, n, beta))
        got = [run_receiver(d, info, tune, x, path=p)[1].stats(SETTLE_S)["carrier_dbfs"]["mean"] for p in ("fast", "exact")]
        expected = LEVEL + 20 * math.log10(2 * abs(math.cos((alpha - beta) / 2)))
        # measured deviation 5.7e-6 dB (fast), 3.2e-5 dB (exact)
        assert got[0] == pytest.approx(expected, abs=5e-4), (alpha, beta)
        assert got[1] == pytest.approx(expected, abs=5e-4), (alpha, beta)
