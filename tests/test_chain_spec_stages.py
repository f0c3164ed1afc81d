"""Chain-spec keys of the noise blanker, the heterodyne notch and the single-sideband detector."""

from __future__ import annotations

import dataclasses
import re

import pytest

from sdrx.chain import parse_spec, spec_to_dict
from sdrx.chain.spec import BlankerSpec, NotchSpec
from sdrx.errors import ParameterError

from helpers_cli import run
from helpers_programme import make_capture, speech


def test_the_new_stages_are_off_by_default():
    spec = parse_spec({})
    assert spec.blanker == BlankerSpec() and not spec.blanker.enabled
    assert spec.notch == NotchSpec() and not spec.notch.enabled
    assert spec.detector.sideband == "both"


def test_keys_parse_and_round_trip():
    raw = {"blanker": {"enabled": True, "threshold_db": 12, "width_us": 20, "level_ms": 2},
           "notch": {"auto": True, "frequencies": ["1.5k", 3000], "width": "30", "threshold_db": 25,
                     "steady_s": 3, "max_tones": 2},
           "detector": {"kind": "synchronous", "sideband": "lower", "pll_bandwidth": "30"}}
    spec = parse_spec(raw)
    assert spec.blanker == BlankerSpec(True, 12.0, 20.0, 2.0)
    assert spec.notch.frequencies_hz == (1500.0, 3000.0) and spec.notch.width_hz == 30.0
    assert spec.notch.enabled and spec.notch.max_tones == 2
    assert spec.detector.sideband == "lower"
    assert parse_spec(spec_to_dict(spec)) == dataclasses.replace(spec, source="<spec>")
    # fixed frequencies alone switch the notch on
    assert parse_spec({"notch": {"frequencies": [1000]}}).notch.enabled


BAD = [
    ({"blanker": {"widht_us": 10}}, r"^blanker\.widht_us: unknown key; did you mean 'width_us'\?"),
    ({"blanker": {"enabled": 1}}, r"^blanker\.enabled: expected true or false, got 1"),
    ({"blanker": {"threshold_db": 2}}, r"^blanker\.threshold_db: 2 dB is outside 3 dB to 60 dB$"),
    ({"blanker": {"threshold_db": -5}}, r"^blanker\.threshold_db: -5 dB is outside 3 dB to 60 dB$"),
    ({"blanker": {"width_us": 5000}}, r"^blanker\.width_us: 5000 us is outside 0\.1 us to 1000 us$"),
    ({"blanker": {"level_ms": 0.01}}, r"^blanker\.level_ms: 0\.01 ms is outside 0\.05 ms to 100 ms$"),
    ({"notch": {"frequencies": "1.5k"}}, r"^notch\.frequencies: expected a list of frequencies"),
    ({"notch": {"frequencies": [1500, "loud"]}}, r"^notch\.frequencies\[1\]: "),
    ({"notch": {"frequencies": [1500, 0]}}, r"^notch\.frequencies\[1\]: must be above 0 Hz, got 0"),
    ({"notch": {"frequencies": ["30k"]}}, r"^notch\.frequencies\[0\]: 30 kHz must be below half the audio rate \(24 kHz\)"),
    ({"notch": {"width": "2k"}}, r"^notch\.width: 2000 Hz is outside 1 Hz to 500 Hz$"),
    ({"notch": {"max_tones": 2.5}}, r"^notch\.max_tones: expected a whole number from 1 to 16, got 2\.5"),
    ({"notch": {"max_tones": 40}}, r"^notch\.max_tones: expected a whole number from 1 to 16, got 40$"),
    ({"notch": {"steady_s": 0.1}}, r"^notch\.steady_s: 0\.1 s is outside 0\.2 s to 30 s$"),
    ({"notch": {"auto": "yes"}}, r"^notch\.auto: expected true or false, got 'yes'"),
    ({"detector": {"sideband": "left"}}, r"^detector\.sideband: 'left' is not one of both, lower, upper"),
    ({"detector": {"sideband": "lower"}},
     r"^detector\.sideband: 'lower' needs kind = \"synchronous\" \(kind is 'envelope'\)"),
]


@pytest.mark.parametrize("raw, match", BAD)
def test_bad_values_raise_one_line_errors_naming_the_key(raw, match):
    with pytest.raises(ParameterError, match=match) as exc:
        parse_spec(raw)
    assert "\n" not in str(exc.value)


@pytest.fixture(scope="module")
def capture_path(tmp_path_factory):
    d = tmp_path_factory.mktemp("cap")
    make_capture(d, [speech("Wanted", 1.0e6, -30.0)], seconds=0.1)
    return d / "capture.sigmf-meta"


@pytest.mark.parametrize("text, pattern", [
    ("[blanker]\nthreshold_db = 90\n", r"blanker\.threshold_db: 90 dB is outside 3 dB to 60 dB"),
    ("[notch]\nfrequencies = [1500, -3]\n", r"notch\.frequencies\[1\]: "),
    ("[detector]\nsideband = \"upper\"\n", r"detector\.sideband: 'upper' needs kind = \"synchronous\""),
])
def test_the_command_line_says_it_in_one_line_and_exits_2(tmp_path, capture_path, capsys, text, pattern):
    chain = tmp_path / "chain.toml"
    chain.write_text(text)
    rc, _, se = run(["receive", capture_path, "--tune", "1M", "--chain", chain, "-o", tmp_path / "o.wav",
                     "--quiet"], capsys)
    lines = se.strip().splitlines()
    assert rc == 2 and len(lines) == 1 and lines[0].startswith("sdrx: error: ") and "chain.toml" in lines[0]
    assert re.search(pattern, lines[0]), lines[0]
    assert not (tmp_path / "o.wav").exists()
