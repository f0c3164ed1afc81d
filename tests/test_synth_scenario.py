"""Scenario TOML: parsing with units, validation messages, property tests over values."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sdrx.errors import CaptureError, ParameterError
from sdrx.synth import load_scenario, parse_scenario

GOOD = '''
title = "test"
[capture]
kind = "iq"
rate = "1.2M"
center = "1.06M"
datatype = "ci16_le"
seconds = "250ms"
noise_dbfs_per_hz = "-125 dBFS/Hz"
seed = 7

[[station]]
name = "Alpha"
frequency = "600k"
level_dbfs = "-26 dBFS"
depth = 0.5
frequency_error = "-7"
[station.program]
kind = "tones"
frequencies = ["400", "1k"]
[station.fading]
model = "two_path"
rate = "1.5"
delay_s = "0.4ms"
level_db = "-2 dB"

[[station]]
name = "Beta"
frequency = "1.51M"
level_dbfs = -14

[impulse_noise]
rate_per_s = 3
level_dbfs = -20
'''


def _write(tmp_path, text, name="s.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_good_scenario_parses_with_units(tmp_path):
    sc = load_scenario(_write(tmp_path, GOOD))
    cap = sc.capture
    assert (cap.kind, cap.fs, cap.center_hz, cap.datatype, cap.seconds, cap.noise_dbfs_per_hz, cap.seed) == (
        "iq", 1.2e6, 1.06e6, "ci16_le", 0.25, -125.0, 7)
    a, b = sc.stations
    assert (a.frequency_hz, a.level_dbfs, a.depth, a.frequency_error_hz, a.rf_hz) == (600e3, -26.0, 0.5, -7.0, 599993.0)
    assert a.program.get("frequencies") == (400.0, 1000.0)
    assert (a.fading.model, a.fading.rate_hz, a.fading.delay_s, a.fading.level_db, a.fading.second) == (
        "two_path", 1.5, 0.0004, -2.0, "rayleigh")
    assert b.depth == 0.3 and b.program.to_json() == {"kind": "tone", "frequency": 1000.0}  # defaults
    assert sc.impulse_noise.rate_per_s == 3.0
    assert sc.with_overrides(seconds="2", seed=9).capture.seconds == 2.0


def _replace(old, new):
    assert old in GOOD
    return GOOD.replace(old, new, 1)


BAD = [
    (_replace('depth = 0.5', 'depth = 1.2'), "station 'Alpha': depth = 1.2 must be 0..1"),
    (_replace('depth = 0.5', 'depth = -0.1'), "station 'Alpha': depth = -0.1 must be 0..1"),
    (_replace('depth = 0.5', 'deph = 0.5'), "station 'Alpha': unknown key 'deph'; did you mean 'depth'?"),
    (_replace('seed = 7', 'sede = 7'), r"\[capture\]: unknown key 'sede'; did you mean 'seed'?"),
    (_replace('title = "test"', 'titel = "test"'), "unknown key 'titel'; did you mean 'title'?"),
    (_replace('kind = "tones"', 'kind = "tone"'), "program \\(tone\\): unknown key 'frequencies'; did you mean 'frequency'?"),
    (_replace('frequency = "1.51M"', 'frequency = "1.70M"'), "station 'Beta': occupies .* outside the capture band 460 kHz .. 1.66 MHz"),
    (_replace('frequency = "600k"', 'frequency = "460k"'), "station 'Alpha': occupies"),
    (_replace('level_dbfs = -14', 'level_dbfs = 3'), "station 'Beta': level_dbfs = 3 is above full scale"),
    (_replace('level_dbfs = -14', 'level_dbfs = "loud"'), "station 'Beta': level_dbfs: cannot read 'loud'"),
    (_replace('rate = "1.2M"', 'rate = "-1.2M"'), r"\[capture\]: rate: '-1.2M' is negative"),
    (_replace('rate = "1.2M"', 'rate = 0'), r"\[capture\]: rate must be above 0 Hz"),
    (_replace('center = "1.06M"', ''), "an iq capture needs 'center'"),
    (_replace('kind = "iq"', 'kind = "IQ"'), "kind = 'IQ' is not one of iq, real; did you mean 'iq'?"),
    (_replace('datatype = "ci16_le"', 'datatype = "ri16_le"'), "datatype = 'ri16_le' is not one of ci16_le"),
    (_replace('seconds = "250ms"', 'seconds = 0'), "seconds: 0 must be a positive number of seconds"),
    (_replace('seed = 7', 'seed = -3'), "seed = -3 must be >= 0"),
    (_replace('seed = 7', 'seed = 1.5'), "seed must be a whole number"),
    (_replace('name = "Beta"', 'name = "Alpha"'), "name 'Alpha' is used by another station"),
    (_replace('model = "two_path"', 'model = "two-path"'), "did you mean 'two_path'"),
    (_replace('rate_per_s = 3', 'rate_per_s = 0'), r"\[impulse_noise\]: rate_per_s = 0 is out of range"),
    (_replace('frequency_error = "-7"', 'frequency_error = "2M"'), "station 'Alpha': occupies"),
    (GOOD.split("[[station]]")[0], r"no \[\[station\]\] given"),
    ("[[station]]\nname = 'x'\n", r"missing \[capture\] table"),
    (_replace('[capture]', '[capture]\nkind = "real"\n'), "not valid TOML"),
]


@pytest.mark.parametrize("text, match", BAD, ids=[m[:40] for _, m in BAD])
def test_bad_scenarios_name_file_station_and_key(tmp_path, text, match):
    p = _write(tmp_path, text)
    with pytest.raises(ParameterError, match=match) as info:
        load_scenario(p)
    msg = str(info.value)
    assert msg.startswith(str(p)) and "\n" not in msg


def test_missing_scenario_file(tmp_path):
    with pytest.raises(CaptureError, match="nope.toml: scenario file not found"):
        load_scenario(tmp_path / "nope.toml")


def test_not_utf8(tmp_path):
    p = tmp_path / "b.toml"
    p.write_bytes(b"\xff\xfe[capture]")
    with pytest.raises(ParameterError, match="not a text"):
        load_scenario(p)


def test_real_capture_rules():
    base = {"capture": {"kind": "real", "rate": "200k", "seconds": 0.1},
            "station": [{"name": "A", "frequency": "50k", "level_dbfs": -20}]}
    assert parse_scenario(base).capture.band_hz == (0.0, 100e3)
    with pytest.raises(ParameterError, match="'center' applies only"):
        parse_scenario({**base, "capture": {**base["capture"], "center": "1M"}})
    with pytest.raises(ParameterError, match="outside the capture band 0 Hz .. 100 kHz"):
        parse_scenario({**base, "station": [{"name": "A", "frequency": "99.5k", "level_dbfs": -20}]})


@settings(max_examples=60, deadline=None)
@given(depth=st.floats(0, 1), channel=st.integers(-50, 50), level=st.floats(-120, 0),
       ferr=st.floats(-100, 100), bw=st.floats(1000, 5000))
def test_any_station_inside_the_band_with_valid_values_loads(depth, channel, level, ferr, bw):
    # capture 1.0 +- 0.6 MHz; channels 1.0 MHz +- 500 kHz stay inside with 4.5 kHz of audio
    d = {"capture": {"kind": "iq", "rate": "1.2M", "center": "1M", "seconds": 0.1},
         "station": [{"name": "S", "frequency": 1e6 + channel * 10e3, "level_dbfs": level, "depth": depth,
                      "frequency_error": ferr, "program": {"kind": "speech", "bandwidth": bw}}]}
    sc = parse_scenario(d)
    s = sc.stations[0]
    assert s.depth == depth and s.level_dbfs == level and s.rf_hz == 1e6 + channel * 10e3 + ferr
    lo, hi = s.occupied_hz
    assert hi - lo == pytest.approx(2 * bw)  # ITU-R BS.639: emission width = 2 x audio bandwidth


@settings(max_examples=40, deadline=None)
@given(depth=st.floats(1.0, 100.0, exclude_min=True), which=st.integers(0, 2))
def test_any_depth_above_one_is_refused_naming_the_station(depth, which):
    stations = [{"name": f"S{i}", "frequency": 0.9e6 + i * 0.1e6, "level_dbfs": -30} for i in range(3)]
    stations[which]["depth"] = depth
    with pytest.raises(ParameterError, match=f"station 'S{which}': depth = .* must be 0..1"):
        parse_scenario({"capture": {"kind": "iq", "rate": "1.2M", "center": "1M", "seconds": 0.1},
                        "station": stations}, name="h.toml")


@settings(max_examples=40, deadline=None)
@given(offset=st.floats(0.6e6 - 999, 5e6))
def test_any_station_beyond_the_band_edge_is_refused(offset):
    # the default program is a 1 kHz tone: the station occupies carrier +- 1 kHz
    d = {"capture": {"kind": "iq", "rate": "1.2M", "center": "1M", "seconds": 0.1},
         "station": [{"name": "Far", "frequency": 1e6 + offset, "level_dbfs": -30}]}
    with pytest.raises(ParameterError, match="station 'Far': occupies .* outside the capture band"):
        parse_scenario(d, name="h.toml")
