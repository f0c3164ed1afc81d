"""Cases file parsing and validation (sdrx.refs.cases)."""

from __future__ import annotations

import pytest

from sdrx.errors import CaptureError, ParameterError
from sdrx.refs.cases import (DEFAULT_LEVEL_DB, DEFAULT_SNR_DB, DEFAULT_SPECTRUM_DB, check_case_name,
                             load_cases, select_cases)


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "captures").mkdir()
    (tmp_path / "captures" / "harbour.sigmf-meta").write_text("{}")
    (tmp_path / "chains").mkdir()
    (tmp_path / "chains" / "two-stage.toml").write_text('name = "two"\n')
    return tmp_path


def write(folder, text):
    p = folder / "cases.toml"
    p.write_text(text)
    return p


README_EXAMPLE = """
[[case]]
name = "harbour-1130"
capture = "captures/harbour.sigmf-meta"    # relative to this file
tune = "1130k"
chain = "chains/two-stage.toml"            # or a preset name
start = 0.5                                # optional excerpt, seconds
duration = 4.0
path = "fast"                              # optional
tolerance = { snr_db = 60, level_db = 0.1, spectrum_db = 0.5 }   # or tolerance = "exact"
"""


def test_readme_example_parses(folder):
    cf = load_cases(write(folder, README_EXAMPLE))
    (c,) = cf.cases
    assert c.name == "harbour-1130"
    assert c.capture == folder / "captures" / "harbour.sigmf-meta"
    assert c.capture_text == "captures/harbour.sigmf-meta"
    assert c.tune_hz == 1130e3
    assert c.chain_is_file and c.chain == str(folder / "chains" / "two-stage.toml")
    assert (c.start_s, c.duration_s, c.path) == (0.5, 4.0, "fast")
    assert not c.tolerance.exact
    assert (c.tolerance.snr_db, c.tolerance.level_db, c.tolerance.spectrum_db) == (60.0, 0.1, 0.5)


def test_defaults_and_exact_and_preset(folder):
    cf = load_cases(write(folder, """
[[case]]
name = "a"
capture = "captures/harbour.sigmf-meta"
tune = 1130000
chain = "medium"
tolerance = { snr_db = 45 }

[[case]]
name = "b"
capture = "captures/harbour.sigmf-meta"
tune = "1.13M"
chain = "medium"
tolerance = "exact"

[[case]]
name = "c"
capture = "captures/harbour.sigmf-meta"
tune = "1130k"
chain = "medium"
"""))
    a, b, c = cf.cases
    assert not a.chain_is_file and a.chain == "medium"
    assert (a.tolerance.snr_db, a.tolerance.level_db, a.tolerance.spectrum_db) == (45.0, DEFAULT_LEVEL_DB, DEFAULT_SPECTRUM_DB)
    assert b.tolerance.exact
    assert (c.tolerance.snr_db, c.start_s, c.duration_s, c.path) == (DEFAULT_SNR_DB, 0.0, None, "fast")
    assert cf.names() == ["a", "b", "c"]
    assert [x.name for x in select_cases(cf, ["c", "a"])] == ["c", "a"]
    assert select_cases(cf) == cf.cases


BASE = 'capture = "captures/harbour.sigmf-meta"\ntune = "1130k"\nchain = "medium"\n'


@pytest.mark.parametrize("text, exc, match", [
    ('[[case]]\nname = "a"\n' + BASE + '[[case]]\nname = "a"\n' + BASE, ParameterError, "duplicate case name 'a'"),
    ('[[case]]\nname = "../evil"\n' + BASE, ParameterError, "case name '../evil' is not allowed"),
    ('[[case]]\nname = "sub/evil"\n' + BASE, ParameterError, "is not allowed"),
    ('[[case]]\nname = "a"\ncapture = "captures/missing.wav"\ntune = "1130k"\nchain = "medium"\n',
     CaptureError, "missing.wav: no such file"),
    ('[[case]]\nname = "a"\ncapture = "captures/harbour.sigmf-meta"\ntune = "1130k"\nchain = "chains/none.toml"\n',
     ParameterError, "no such chain file"),
    ('[[case]]\nname = "a"\n' + BASE + 'path = "slow"\n', ParameterError, "path: 'slow' is not allowed; choose fast or exact"),
    ('[[case]]\nname = "a"\n' + BASE + 'tolerance = { snr = 3 }\n', ParameterError, "unknown key 'snr'"),
    ('[[case]]\nname = "a"\n' + BASE + 'tolerance = "close"\n', ParameterError, "'close' is not allowed"),
    ('[[case]]\nname = "a"\n' + BASE + 'tolerance = { level_db = -1 }\n', ParameterError, "level_db: must be >= 0"),
    ('[[case]]\nname = "a"\n' + BASE + 'colour = 3\n', ParameterError, "unknown key 'colour'"),
    ('[[case]]\nname = "a"\ntune = "1130k"\nchain = "medium"\n', ParameterError, "missing key 'capture'"),
    ('[[case]]\nname = "a"\n' + BASE.replace('"1130k"', '"fast"'), ParameterError, "cannot read 'fast' as a frequency"),
    ('[[case]]\nname = "a"\n' + BASE + 'duration = 0\n', ParameterError, "duration"),
    ('title = "x"\n', ParameterError, "unknown top-level key 'title'"),
    ('', ParameterError, r"no \[\[case\]\] tables"),
    ('[[case]\n', ParameterError, "not valid TOML"),
])
def test_bad_cases_files(folder, text, exc, match):
    with pytest.raises(exc, match=match):
        load_cases(write(folder, text))


def test_missing_cases_file(tmp_path):
    with pytest.raises(CaptureError, match="no such file"):
        load_cases(tmp_path / "none.toml")


def test_unknown_case_name_lists_cases(folder):
    cf = load_cases(write(folder, '[[case]]\nname = "a"\n' + BASE))
    with pytest.raises(ParameterError, match=r"--case 'zz': no such case in .*cases: a"):
        select_cases(cf, "zz")


@pytest.mark.parametrize("name", ["ok", "A-1.b_c", "x" * 100])
def test_good_names(name):
    assert check_case_name(name, "f") == name


@pytest.mark.parametrize("name", ["", ".hidden", "a..b", "a/b", "a\\b", "x" * 101, 3, "a b"])
def test_bad_names(name):
    with pytest.raises(ParameterError, match="is not allowed"):
        check_case_name(name, "f")
