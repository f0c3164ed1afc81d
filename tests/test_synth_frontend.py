"""The synthesizer's recorder faults, bare carriers and neighbours, and the fractional resampler they use.

Outside references: a complex tone evaluated analytically at the resampled instants (band-limited
interpolation must reproduce it); the faults' own equations applied to a tone in numpy.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from helpers_cli import run
from sdrx.dsp.fractional import FractionalResampler, output_count
from sdrx.errors import ParameterError
from sdrx.synth import synthesize
from sdrx.synth.scenario import parse_scenario
from sdrx.synth.synthesize import iter_capture


@pytest.mark.parametrize("f", [0.01, 0.2, 0.4, -0.45])
def test_resampler_reproduces_a_tone_at_the_new_instants(f):
    n = 60_000
    ratio = 1 + 60e-6
    x = np.exp(2j * np.pi * f * np.arange(n))
    rs = FractionalResampler(ratio)
    m = output_count(n, ratio)
    y = np.concatenate([rs.process(x), rs.flush(m)])
    ref = np.exp(2j * np.pi * f * np.arange(m) * ratio)        # the tone at t = m·ratio, exactly
    err = np.abs(y - ref)[64:-64]                               # away from the zero-padded ends
    assert 20 * np.log10(err.max()) < -90.0


def test_resampler_shift_and_real_samples():
    n = 10_000
    x = np.cos(2 * np.pi * 0.1 * np.arange(n))
    rs = FractionalResampler(1 - 1e-4, complex_samples=False)
    y = np.concatenate([rs.process(x), rs.flush(output_count(n, 1 - 1e-4))])
    assert y.dtype == np.float64
    np.testing.assert_allclose(y[64:-64], np.cos(2 * np.pi * 0.1 * np.arange(y.size) * (1 - 1e-4))[64:-64], atol=1e-4)
    with pytest.raises(ValueError, match="complex"):
        FractionalResampler(1.0, 0.01, complex_samples=False)


def _sc(front_end=None, kind="iq", carriers=(), stations=None, seconds=0.05):
    cap = {"kind": kind, "rate": "200k", "seconds": seconds, "datatype": "cf32_le" if kind == "iq" else "rf32_le"}
    if kind == "iq":
        cap["center"] = "1M"
    st = stations or [{"name": "Tone Bay", "frequency": "1.03M" if kind == "iq" else "30k", "level_dbfs": -10,
                       "depth": 0.0}]
    data = {"capture": cap, "station": st}
    if front_end is not None:
        data["front_end"] = front_end
    if carriers:
        data["carrier"] = list(carriers)
    return parse_scenario(data)


def test_faults_follow_their_equations_on_a_tone():
    ppm, g_db, ph_deg, dc_db, dc_deg = 80.0, 1.0, 3.0, -40.0, 30.0
    sc = _sc({"clock_error_ppm": ppm, "iq_gain_error_db": g_db, "iq_phase_error_deg": ph_deg,
              "dc_offset_dbfs": dc_db, "dc_phase_deg": dc_deg}, seconds=0.1)
    clean = np.concatenate(list(iter_capture(_sc(seconds=0.1))))
    x = np.concatenate(list(iter_capture(sc, block_size=4099)))
    assert x.size == clean.size
    # the faulty recorder's tone: the RF carrier (1.03 MHz) read f/(1+ε) through an LO at center·(1+ε),
    # then Q_r = g·(Q cos φ − I sin φ), then + DC
    eps = ppm * 1e-6
    n = np.arange(x.size)
    phase0 = np.angle(clean[0])
    z = 10 ** (-10 / 20) * np.exp(1j * (2 * np.pi * (1.03e6 / (1 + eps) - 1e6) * n / 200e3 + phase0))
    g, ph = 10 ** (g_db / 20), math.radians(ph_deg)
    d = 10 ** (dc_db / 20) * np.exp(1j * math.radians(dc_deg))
    want = (z.real + d.real) + 1j * (g * (z.imag * math.cos(ph) - z.real * math.sin(ph)) + d.imag)
    np.testing.assert_allclose(x[100:-100], want[100:-100], atol=2e-5)


def test_recorded_capture_does_not_depend_on_the_block_size():
    sc = _sc({"clock_error_ppm": -40, "iq_gain_error_db": 0.5}, seconds=0.2)
    a = np.concatenate(list(iter_capture(sc, block_size=1 << 16)))
    for b in (7919, 1 << 20):
        np.testing.assert_array_equal(np.concatenate(list(iter_capture(sc, block_size=b))), a)


def test_truth_records_faults_carriers_and_one_sided_neighbours(tmp_path):
    stations = [{"name": "Quay", "frequency": "1.0M", "level_dbfs": -30},
                {"name": "Upper Neighbour", "frequency": "1.009M", "level_dbfs": -20},
                {"name": "Far Away", "frequency": "1.06M", "level_dbfs": -30}]
    sc = _sc({"iq_gain_error_db": 1.0, "iq_phase_error_deg": 3.0, "clock_error_ppm": 60},
             carriers=[{"name": "Whistle", "frequency": "1.0015M", "level_dbfs": -40, "phase_deg": 0}],
             stations=stations)
    truth = synthesize(sc, tmp_path / "t.sigmf-meta")
    fe = truth["front_end"]
    assert fe["clock_error_ppm"] == 60 and fe["iq_gain_error_db"] == 1.0
    assert fe["mirror_rejection_db"] == pytest.approx(24.0, abs=0.05)   # 1 dB and 3 degrees (Razavi's formula)
    assert truth["carriers"] == [{"name": "Whistle", "frequency_hz": 1001500.0, "level_dbfs": -40.0,
                                  "phase_deg": 0.0, "offset_hz": 1500.0}]
    by = {s["name"]: s for s in truth["stations"]}
    assert by["Quay"]["adjacent_side"] == "above"
    assert by["Quay"]["neighbours"] == [{"name": "Upper Neighbour", "offset_hz": 9000.0, "level_db": 10.0}]
    assert by["Far Away"]["adjacent_side"] is None
    assert json.loads((tmp_path / "t.truth.json").read_text())["front_end"] == fe


def test_bare_carrier_is_a_steady_line(tmp_path):
    sc = _sc(carriers=[{"name": "Beacon", "frequency": "1.05M", "level_dbfs": -20, "phase_deg": 90}],
             stations=[{"name": "Quiet", "frequency": "0.95M", "level_dbfs": -60, "depth": 0.0}])
    x = np.concatenate(list(iter_capture(sc)))
    n = np.arange(x.size)
    quiet = 10 ** (-60 / 20) * 1.0
    beacon = 0.1 * np.exp(1j * (2 * np.pi * 50e3 * n / 200e3 + np.pi / 2))
    assert np.max(np.abs(x - beacon)) <= quiet * 1.0001 + 1e-9


@pytest.mark.parametrize("table, kind, message", [
    ({"clock_error_ppm": 5000}, "iq", "clock_error_ppm"),
    ({"iq_gain_error_db": 1.0}, "real", "iq_gain_error_db applies to I/Q captures"),
    ({"dc_offset_dbfs": 0}, "iq", "is above -6 dBFS"),
    ({"dc_ofset_dbfs": -40}, "iq", "dc_offset_dbfs"),
])
def test_bad_front_end_tables_name_the_key(table, kind, message):
    with pytest.raises(ParameterError, match=message):
        _sc(table, kind=kind)


def test_bad_front_end_in_a_scenario_file_is_a_one_line_error(tmp_path, capsys):
    p = tmp_path / "s.toml"
    p.write_text('[capture]\nkind = "iq"\nrate = "200k"\ncenter = "1M"\nseconds = 0.01\n'
                 '[front_end]\nclock_error_ppm = "fast"\n'
                 '[[station]]\nname = "A"\nfrequency = "1.01M"\nlevel_dbfs = -20\n')
    rc, out, err = run(["synth", p, "-o", tmp_path / "o.sigmf-meta"], capsys)
    assert rc == 2 and err.startswith("sdrx: error: ") and err.count("\n") == 1 and "clock_error_ppm" in err
    assert not (tmp_path / "o.sigmf-meta").exists()
