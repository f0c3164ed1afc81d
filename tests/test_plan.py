"""Tests of sdrx.analysis.plan: LO, image, spurs and required Q over a band."""

import math

import pytest

from sdrx.analysis import plan as pl
from sdrx.analysis import qfactor as qf
from sdrx.errors import ParameterError


def test_region2_grid_lo_and_image_ranges():
    p = pl.frequency_plan("455k", "540k:1700k", "10k")
    # source: Region 2 MF broadcasting plans, 10 kHz channels: Rio de Janeiro 1981 (535-1605 kHz) and its
    # extension, Rio de Janeiro 1988 (1605-1705 kHz); carriers 540...1700 kHz, 117 channels
    assert len(p.channels) == (1700 - 540) // 10 + 1 == 117
    # common practice: high-side LO f + IF, image f + 2 IF
    for c in p.channels:
        assert c.lo_hz == pytest.approx(c.tune_hz + 455e3, abs=1e-6)
        assert c.image_hz == pytest.approx(c.tune_hz + 2 * 455e3, abs=1e-6)
    assert p.lo_range_hz == pytest.approx((540e3 + 455e3, 1700e3 + 455e3))
    assert p.image_range_hz == pytest.approx((540e3 + 910e3, 1700e3 + 910e3))
    ratio = (1700e3 + 455e3) / (540e3 + 455e3)
    assert p.lo_tuning_ratio == pytest.approx(ratio, rel=1e-12)
    # f = 1/(2 pi sqrt(LC)): capacitance ratio is the square of the tuning ratio (physical identity)
    assert p.lo_capacitance_ratio == pytest.approx(ratio**2, rel=1e-12)


def test_worked_channel_1000k():
    p = pl.frequency_plan(455e3, (540e3, 1700e3), 10e3)
    c = next(c for c in p.channels if c.tune_hz == pytest.approx(1000e3))
    # common practice: 1000 kHz, IF 455 kHz: LO 1455, image 1910 kHz
    assert c.lo_hz == pytest.approx(1455e3)
    assert c.image_hz == pytest.approx(1910e3)
    assert c.image_channel_hz is None  # 1910 kHz is above the band
    # common practice (mixer spur charts): half-IF spur at f_LO - IF/2 = 1227.5 kHz
    assert c.half_if_spur_hz == pytest.approx(1455e3 - 455e3 / 2)
    assert c.half_if_spur_hz == pytest.approx(1227.5e3)


def test_image_in_band_names_the_channel():
    p = pl.frequency_plan(455e3, (540e3, 1700e3), 10e3)
    c = p.channels[0]
    assert c.image_hz == pytest.approx(1450e3)
    assert c.image_channel_hz == pytest.approx(1450e3)
    # images fall inside the band for f + 910 kHz <= 1700 kHz: 540..790 kHz -> 26 channels
    n_in = sum(ch.image_channel_hz is not None for ch in p.channels)
    assert n_in == (790 - 540) // 10 + 1


def test_low_side_injection():
    p = pl.frequency_plan(455e3, (3.0e6, 4.0e6), 10e3, "low")
    c = p.channels[0]
    assert c.lo_hz == pytest.approx(3.0e6 - 455e3)  # common practice: low side f - IF, image f - 2 IF
    assert c.image_hz == pytest.approx(3.0e6 - 910e3)
    assert c.half_if_spur_hz == pytest.approx(c.lo_hz + 455e3 / 2)


def test_spurs_satisfy_the_mixing_relation():
    p = pl.frequency_plan(455e3, (540e3, 1700e3), 10e3)
    for c in p.channels[::7]:
        for s in c.spurs:
            # common practice (mixer spur charts): m f_LO + n f_RF = IF
            assert s.m * c.lo_hz + s.n * s.rf_hz == pytest.approx(455e3, abs=1e-3)
            assert abs(s.m) <= 3 and 1 <= abs(s.n) <= 3
            assert 540e3 <= s.rf_hz <= 1700e3
            assert not (abs(s.m) == 1 and abs(s.n) == 1 and s.rf_hz in (c.tune_hz, c.image_hz))
        # brute force: every in-band solution of the relation is listed once
        want = set()
        for m in range(-3, 4):
            for n in (-3, -2, -1, 1, 2, 3):
                rf = (455e3 - m * c.lo_hz) / n
                if 540e3 <= rf <= 1700e3 and not (abs(rf - c.tune_hz) < 1e-3 or abs(rf - c.image_hz) < 1e-3):
                    want.add(round(rf, 3))
        assert {round(s.rf_hz, 3) for s in c.spurs} == want
    c = next(c for c in p.channels if c.tune_hz == pytest.approx(1000e3))
    assert any(s.rf_hz == pytest.approx(1227.5e3) and (s.m, s.n) == (2, -2) for s in c.spurs)


def test_q_table_exact_forms():
    p = pl.frequency_plan(455e3, (540e3, 1700e3), 10e3, reject_db=40, at_hz=10e3)
    qt = p.q_required
    assert len(qt.rows) == 3 * (4 + 2)
    for r in qt.rows:
        rho = (r.f0_hz + 10e3) / r.f0_hz - r.f0_hz / (r.f0_hz + 10e3)
        per = 40 / r.stages
        if r.kind == "single":
            x = math.sqrt(10 ** (per / 10) - 1)
            # source: universal resonance curve, Terman, Radio Engineers' Handbook (McGraw-Hill, 1943),
            # sec. 3 (from memory)
        else:
            x = math.sqrt(2) * (10 ** (per / 10) - 1) ** 0.25
            # source: critical coupling kQ = 1, Terman, Radio Engineers' Handbook (1943), sec. 3,
            # coupled circuits (from memory)
        assert r.q_loaded == pytest.approx(x / rho, rel=1e-12)
        assert r.practical == (r.q_loaded <= pl.PRACTICAL_LOADED_Q)
        # and the stages really give 40 dB at that offset
        assert qf.stage_attenuation_db(r.f0_hz + 10e3, r.f0_hz, r.q_loaded, r.stages, r.kind) == pytest.approx(40)
    assert "common practice" in qt.verdict()
    # lower centre frequency needs less Q for the same rejection: the point of the superhet
    q_if = next(r.q_loaded for r in qt.rows if r.where == "if" and r.kind == "single" and r.stages == 2)
    q_top = next(r.q_loaded for r in qt.rows if r.where == "band_top" and r.kind == "single" and r.stages == 2)
    assert q_top > 3 * q_if


def test_json_shape():
    d = pl.frequency_plan("455k", "540k:1700k", "10k", reject_db="40", at_hz="10k").to_json()
    for key in ("lo_range_hz", "image_range_hz", "channels", "q_required"):
        assert key in d
    ch = d["channels"][0]
    assert set(ch) >= {"tune_hz", "lo_hz", "image_hz", "image_channel_hz", "half_if_spur_hz", "spurs"}
    assert pl.frequency_plan("455k", "540k:1700k").to_json()["q_required"] is None


@pytest.mark.parametrize("kwargs, match", [
    (dict(if_hz="455k", band_hz="1700k:540k"), "not below high edge"),
    (dict(if_hz="1M", band_hz="540k:1700k"), "inside the band"),
    (dict(if_hz="455k", band_hz="540k:1700k", reject_db=40), "needs --at"),
    (dict(if_hz="455k", band_hz="540k:1700k", at_hz="10k"), "needs --reject"),
    (dict(if_hz="455k", band_hz="540k:1700k", reject_db=40, at_hz="2M"), "beyond the band"),
    (dict(if_hz="455k", band_hz="150k:285k", injection="low"), "injection low"),
    (dict(if_hz="455k", band_hz="540k-1700k"), "LO:HI"),
    (dict(if_hz="455k", band_hz="540k:1700k", spacing_hz="0"), "--spacing"),
])
def test_bad_input(kwargs, match):
    with pytest.raises(ParameterError, match=match):
        pl.frequency_plan(**kwargs)
