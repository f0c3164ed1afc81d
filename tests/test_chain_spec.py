"""Chain specs: defaults, presets, round trips and the one-line validation errors."""

from __future__ import annotations

import dataclasses

import pytest

from sdrx.chain import ChainSpec, list_presets, load_chain, parse_spec, spec_to_dict
from sdrx.chain.spec import AgcSpec, AudioSpec, DetectorSpec, IfStageSpec, MixerSpec, PreselectorSpec
from sdrx.errors import ParameterError


def _all_fields_set(obj):
    for f in dataclasses.fields(obj):
        v = getattr(obj, f.name)
        if dataclasses.is_dataclass(v):
            _all_fields_set(v)
        elif isinstance(v, tuple):
            for s in v:
                assert dataclasses.is_dataclass(s)
        yield f.name, v


def test_empty_spec_fills_every_key_with_its_default():
    spec = parse_spec({})
    assert isinstance(spec, ChainSpec)
    assert spec.if_hz == 455e3 and spec.injection == "high"
    for sub, cls in [(spec.preselector, PreselectorSpec), (spec.mixer, MixerSpec), (spec.agc, AgcSpec),
                     (spec.detector, DetectorSpec), (spec.audio, AudioSpec)]:
        assert sub == cls()
    assert len(spec.if_stages) >= 1 and all(isinstance(s, IfStageSpec) for s in spec.if_stages)
    assert any(s.agc for s in spec.if_stages)
    # every TOML key of the format has a value in the resolved dict
    d = spec_to_dict(spec)
    for key in ("name", "if_frequency", "injection", "preselector", "mixer", "if_stage", "agc", "detector", "audio"):
        assert key in d
    assert set(d["agc"]) == {"enabled", "reference_dbfs", "carrier_filter_ms", "attack_ms", "release_ms", "hang_ms",
                             "max_gain_db", "min_gain_db"}
    assert set(d["preselector"]) == {"kind", "q", "cutoff", "low", "high", "order"}
    assert set(d["mixer"]) == {"kind", "gain_error_db", "phase_error_deg"}
    assert {"kind", "rc_us"} <= set(d["detector"])
    assert {"rate", "highpass", "lowpass"} <= set(d["audio"])
    for table in ("preselector", "mixer", "agc", "detector", "audio"):
        assert all(v is not None for v in d[table].values()), table


def test_one_line_spec_is_a_whole_chain():
    spec = parse_spec({"if_frequency": "450k"})
    assert spec.if_hz == 450e3
    assert spec.if_stages == parse_spec({}).if_stages


def test_empty_spec_equals_the_medium_preset_chain():
    a = spec_to_dict(parse_spec({}))
    b = spec_to_dict(load_chain("medium"))
    for key in ("if_frequency", "injection", "preselector", "mixer", "if_stage", "agc", "detector", "audio"):
        assert a[key] == b[key], key


def test_presets_load_by_name_and_are_listed():
    names = [n for n, _ in list_presets()]
    assert {"wide", "medium", "narrow"} <= set(names)
    for name, desc in list_presets():
        spec = load_chain(name)
        assert spec.name == name
        assert desc and "\n" not in desc


def test_wide_is_wider_than_medium_is_wider_than_narrow():
    from sdrx.chain import design_chain

    widths = {}
    for name in ("wide", "medium", "narrow"):
        d = design_chain(name)
        widths[name] = min(st.bandwidth_hz for st in d.stages)
    assert widths["wide"] > widths["medium"] > widths["narrow"]


@pytest.mark.parametrize("name", ["wide", "medium", "narrow"])
def test_spec_to_dict_round_trips_through_parse_spec(name):
    spec = load_chain(name)
    again = parse_spec(spec_to_dict(spec), source=spec.source)
    assert dataclasses.replace(again, source=spec.source) == spec


def test_spec_to_dict_round_trips_a_custom_spec(tmp_path):
    raw = {"name": "trial", "if_frequency": "450k", "injection": "low",
           "preselector": {"kind": "bandpass", "low": "500k", "high": "1.7M", "order": 3},
           "mixer": {"kind": "quadrature", "gain_error_db": 0.1, "phase_error_deg": 2},
           "if_stage": [{"response": "chebyshev", "order": 3, "bandwidth": "7k", "ripple_db": 0.25, "agc": True},
                        {"response": "double_tuned", "bandwidth": "12k", "gain_db": 15}],
           "agc": {"attack_ms": 2, "release_ms": 150, "hang_ms": 50},
           "detector": {"kind": "diode", "rc_us": 50},
           "audio": {"rate": 44100, "highpass": "100", "lowpass": "3k"}}
    spec = parse_spec(raw)
    assert parse_spec(spec_to_dict(spec)) == dataclasses.replace(spec)


def test_toml_file_and_units(tmp_path):
    p = tmp_path / "mine.toml"
    p.write_text('if_frequency = "10.7M"\n[[if_stage]]\nresponse = "butterworth"\norder = 3\nbandwidth = "12k"\n'
                 '[agc]\nreference_dbfs = "-20 dBFS"\n')
    spec = load_chain(p)
    assert spec.if_hz == 10.7e6
    assert spec.if_stages[0].bandwidth_hz == 12e3
    assert spec.if_stages[0].agc      # the first stage takes the AGC by default
    assert spec.agc.reference_dbfs == -20.0
    assert spec.name == "mine"


@pytest.mark.parametrize("raw, match", [
    ({"agc": {"atack_ms": 5}}, r"^agc\.atack_ms: unknown key; did you mean 'attack_ms'\?"),
    ({"if_frequncy": "455k"}, r"^if_frequncy: unknown key; did you mean 'if_frequency'\?"),
    ({"if_stage": [{"bandwith": "9k"}]}, r"^if_stage\[1\]\.bandwith: unknown key; did you mean 'bandwidth'\?"),
    ({"agc": {"attack_ms": "fast"}}, r"^agc\.attack_ms: expected a number, got 'fast'"),
    ({"agc": {"enabled": "yes"}}, r"^agc\.enabled: expected true or false"),
    ({"if_stage": [{"order": 2.5}]}, r"^if_stage\[1\]\.order: expected a whole number from 1 to 12"),
    ({"preselector": {"kind": "magic"}}, r"^preselector\.kind: 'magic' is not one of none, tracking, lowpass, bandpass"),
    ({"preselector": 3}, r"^preselector: expected a table"),
    ({"if_stage": [{"bandwidth": "1.2M"}]}, r"^if_stage\[1\]\.bandwidth: 1\.2 MHz is wider than twice the IF \(910 kHz\)"),
    ({"if_stage": [{"bandwidth": "910k"}]}, r"^if_stage\[1\]\.bandwidth: 910 kHz is wider than twice the IF"),
    ({"if_stage": [{"response": "single_tuned", "q": 0}]}, r"^if_stage\[1\]\.q: 0 must be above 0\.5 and at most 10000"),
    ({"if_stage": [{"response": "single_tuned", "q": -5}]}, r"^if_stage\[1\]\.q: -5 must be above 0\.5"),
    ({"preselector": {"q": 0}}, r"^preselector\.q: 0 must be above 0\.5 and at most 1000"),
    ({"agc": {"min_gain_db": 70, "max_gain_db": 60}}, r"^agc\.min_gain_db: 70 is above agc\.max_gain_db \(60\)"),
    ({"mixer": {"gain_error_db": 0.5}}, r"only a quadrature mixer has imbalance"),
])
def test_bad_specs_raise_one_line_errors_naming_the_key(raw, match):
    with pytest.raises(ParameterError, match=match) as exc:
        parse_spec(raw)
    assert "\n" not in str(exc.value)


def test_unknown_preset_lists_the_presets():
    with pytest.raises(ParameterError, match=r"--chain mediun: no such preset or file \(presets: medium, narrow, wide"):
        load_chain("mediun")


def test_bad_toml_file_is_named(tmp_path):
    p = tmp_path / "broken.toml"
    p.write_text("if_frequency = \n")
    with pytest.raises(ParameterError, match=r"broken\.toml: not valid TOML"):
        load_chain(p)
    q = tmp_path / "typo.toml"
    q.write_text("[agc]\nrelease = 300\n")
    with pytest.raises(ParameterError, match=r"typo\.toml: agc\.release: unknown key; did you mean 'release_ms'\?"):
        load_chain(q)


def test_frontend_is_optional_and_absent_by_default():
    spec = parse_spec({})
    assert spec.frontend.full_scale_dbm is None and spec.frontend.noise_figure_db is None
    assert "frontend" not in spec_to_dict(spec)   # absent stays absent: no scale, no noise


def test_frontend_keys_parse_and_round_trip():
    spec = parse_spec({"frontend": {"full_scale_dbm": "-10 dBm", "noise_figure_db": "7 dB", "seed": 3}})
    assert (spec.frontend.full_scale_dbm, spec.frontend.noise_figure_db, spec.frontend.seed) == (-10.0, 7.0, 3)
    assert spec_to_dict(spec)["frontend"] == {"full_scale_dbm": -10.0, "noise_figure_db": 7.0, "seed": 3}
    assert parse_spec(spec_to_dict(spec)) == spec
    only_nf = parse_spec({"frontend": {"noise_figure_db": 0}})
    assert spec_to_dict(only_nf)["frontend"] == {"noise_figure_db": 0.0, "seed": 0}


@pytest.mark.parametrize("raw, match", [
    ({"frontend": {"noise_figure": 10}}, r"^frontend\.noise_figure: unknown key; did you mean 'noise_figure_db'\?"),
    ({"frontend": {"noise_figure_db": -1}}, r"^frontend\.noise_figure_db: -1 .*0.*60"),
    ({"frontend": {"noise_figure_db": 75}}, r"^frontend\.noise_figure_db: 75 .*0.*60"),
    ({"frontend": {"noise_figure_db": "low"}}, r"^frontend\.noise_figure_db: cannot read 'low' as a level in dB"),
    ({"frontend": {"full_scale_dbm": 200}}, r"^frontend\.full_scale_dbm: 200 must be a power from -150 to 60 dBm$"),
    ({"frontend": {"full_scale_dbm": "hot"}}, r"^frontend\.full_scale_dbm: cannot read 'hot' as a power in dBm$"),
    ({"frontend": {"full_scale_dbm": True}}, r"^frontend\.full_scale_dbm: expected a power in dBm, got True$"),
    ({"frontend": {"seed": -2}}, r"^frontend\.seed: expected a whole number from 0 to 2\^63 - 1, got -2$"),
    ({"frontend": {"seed": 1.5}}, r"^frontend\.seed: expected a whole number from 0 to 2\^63 - 1, got 1\.5$"),
    ({"frontend": 3}, r"^frontend: expected a table"),
])
def test_bad_frontend_raises_one_line_errors_naming_the_key(raw, match):
    with pytest.raises(ParameterError, match=match) as exc:
        parse_spec(raw)
    assert "\n" not in str(exc.value)


def test_one_numbering_of_if_stages():
    """A validation error and a refs difference name the same stage the same way (from 1, as the report's 'IF 1')."""
    from sdrx.chain import spec_to_dict
    from sdrx.refs.runcase import dict_differences

    two = [{"bandwidth": "9k"}, {"response": "single_tuned", "q": 60}]
    with pytest.raises(ParameterError, match=r"^if_stage\[2\]\.q: 0\.1 must be above 0\.5"):
        parse_spec({"if_stage": [two[0], {"response": "single_tuned", "q": 0.1}]})
    a = spec_to_dict(parse_spec({"if_stage": two}))
    b = spec_to_dict(parse_spec({"if_stage": [two[0], {"response": "single_tuned", "q": 50}]}))
    assert dict_differences(a, b) == ["if_stage[2].q: 60.0 -> 50.0"]


def test_bound_table_covers_every_number():
    """Every numeric key of every section has both bounds (the pattern new sections follow)."""
    from sdrx.chain import spec as spec_mod

    tables = [spec_mod._TOP_KEYS, spec_mod._PRESELECTOR_KEYS, spec_mod._MIXER_KEYS, spec_mod._STAGE_KEYS,
              spec_mod._AGC_KEYS, spec_mod._DETECTOR_KEYS, spec_mod._AUDIO_KEYS, spec_mod._FRONTEND_KEYS,
              spec_mod._BLANKER_KEYS, spec_mod._NOTCH_KEYS]
    for table in tables:
        for name, key in table.items():
            if key is not None and key.kind in ("freq", "int", "float", "db"):
                assert key.low is not None and key.high is not None, name
