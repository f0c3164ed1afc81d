"""Usage errors on the command line: one line ``sdrx: error: ...``, exit 2, nothing written; --debug anywhere."""

import pytest

from helpers_cli import run


def one_line(rc, err, match):
    assert rc == 2, err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("sdrx: error: "), lines[0]
    assert match in lines[0], lines[0]
    return lines[0]


@pytest.fixture(scope="module")
def capture(tmp_path_factory):
    from sdrx.synth import parse_scenario, synthesize

    d = tmp_path_factory.mktemp("errcap")
    sc = parse_scenario({"capture": {"kind": "iq", "rate": "240k", "center": "1M", "seconds": 0.1},
                         "station": [{"name": "A", "frequency": "1M", "level_dbfs": -20, "depth": 0.3}]})
    synthesize(sc, d / "c.sigmf-meta")
    return d / "c.sigmf-meta"


@pytest.mark.parametrize("args, match", [
    (["receive", "{cap}", "-o", "{out}"], "receive: Missing option '--tune'. (see sdrx receive --help)"),
    (["receive", "{cap}", "--tune", "1M", "-o", "{out}", "--tunee", "1M"], "No such option"),
    (["receive", "{dir}", "--tune", "1M", "-o", "{out}"], "is a directory"),
    (["synth", "{cap}", "-o", "{out}", "--seed", "x"], "Invalid value for '--seed'"),
    (["plan", "--if", "455k", "--band", "540k:1700k", "--max-q", "lots"], "Invalid value for '--max-q'"),
    (["report", "medium", "--tune", "1M", "-o", "{dir}/r", "--points", "many"], "Invalid value for '--points'"),
    (["nosuch"], "No such command 'nosuch'"),
])
def test_click_usage_errors_are_one_line(capture, tmp_path, capsys, args, match):
    fill = {"cap": capture, "out": tmp_path / "o.wav", "dir": tmp_path}
    argv = [a.format(**fill) for a in args]
    rc, out, err = run(argv, capsys)
    one_line(rc, err, match)
    assert sorted(p.name for p in tmp_path.iterdir()) == []


@pytest.mark.parametrize("args, option", [
    (["receive", "{cap}", "--tune", "600k", "--tune", "880k", "-o", "{out}"], "--tune"),
    (["receive", "{cap}", "--tune", "1M", "-o", "{out}", "--output", "{out}2"], "--output"),
    (["receive", "{cap}", "--tune", "1M", "-o", "{out}", "--path", "fast", "--path=exact"], "--path"),
    (["plan", "--if", "455k", "--band", "540k:1700k", "--band", "520k:1610k"], "--band"),
    (["refs", "verify", "{cap}", "--store", "a", "--store", "b"], "--store"),
])
def test_single_value_option_given_twice_is_refused(capture, tmp_path, capsys, args, option):
    fill = {"cap": capture, "out": tmp_path / "o.wav"}
    rc, out, err = run([a.format(**fill) for a in args], capsys)
    one_line(rc, err, f"{option} is given more than once; give it once")
    assert list(tmp_path.iterdir()) == []


def test_repeatable_options_and_flags_may_repeat(capsys):
    rc, out, err = run(["plan", "--if", "455k", "--if", "10.7M", "--band", "540k:1700k", "--json"], capsys)
    assert rc == 0, err


def test_debug_anywhere_shows_the_traceback(capture, tmp_path, capsys):
    args = ["receive", str(capture), "--tune", "5M", "-o", str(tmp_path / "o.wav")]
    rc, out, err = run(args, capsys)
    one_line(rc, err, "outside the capture's band")
    from sdrx.errors import ParameterError

    for where in (0, 2, len(args)):
        argv = args[:where] + ["--debug"] + args[where:]
        with pytest.raises(ParameterError, match="outside the capture's band"):
            run(argv, capsys)


def test_debug_shows_click_errors_too(capsys):
    import click

    with pytest.raises(click.UsageError):
        run(["plan", "--band", "1:2", "--debug"], capsys)


def test_name_too_long_is_one_line(capture, tmp_path, capsys):
    rc, out, err = run(["receive", str(capture), "--tune", "1M", "--chain", "x" * 300 + ".toml",
                        "-o", str(tmp_path / "o.wav")], capsys)
    one_line(rc, err, "--chain xxxxxxxx")
    rc, out, err = run(["receive", str(capture), "--tune", "1M", "-o", str(tmp_path / ("y" * 300 + ".wav"))],
                       capsys)
    one_line(rc, err, "file name longer than 250 bytes")


def test_summary_may_not_overwrite_the_chain_spec(capture, tmp_path, capsys):
    spec = tmp_path / "my.toml"
    spec.write_text('name = "mine"\n')
    rc, out, err = run(["receive", str(capture), "--tune", "1M", "--chain", str(spec), "-o",
                        str(tmp_path / "o.wav"), "--summary", str(spec), "--force"], capsys)
    one_line(rc, err, "is one of the inputs")
    assert spec.read_text() == 'name = "mine"\n'
    assert sorted(p.name for p in tmp_path.iterdir()) == ["my.toml"]


@pytest.mark.parametrize("value, match", [
    ("hot", "--full-scale-dbm: cannot read 'hot' as a power in dBm"),
    ("90", "--full-scale-dbm: '90' must be a power from -150 to 60 dBm"),
])
@pytest.mark.parametrize("args", [
    ["receive", "{cap}", "--tune", "1M", "-o", "{out}"],
    ["compare", "{cap}", "--tune", "1M", "wide", "narrow", "-o", "{dir}/c"],
    ["band", "{cap}", "-o", "{dir}/b"],
    ["report", "medium", "--tune", "1M", "--capture", "{cap}", "--no-measure", "-o", "{dir}/r"],
    ["report", "medium", "--tune", "1M", "-o", "{dir}/r"],
])
def test_bad_full_scale_is_one_line_on_every_command(capture, tmp_path, capsys, args, value, match):
    """--full-scale-dbm is checked alike by every command that runs a chain on a capture, before any work."""
    fill = {"cap": capture, "out": tmp_path / "o.wav", "dir": tmp_path}
    rc, out, err = run([a.format(**fill) for a in args] + ["--quiet", "--full-scale-dbm", value], capsys)
    assert one_line(rc, err, match) == f"sdrx: error: {match}"
    assert sorted(p.name for p in tmp_path.iterdir()) == []


def test_report_full_scale_needs_a_capture_or_the_measured_figures(tmp_path, capsys):
    rc, out, err = run(["report", "medium", "--tune", "1M", "--no-measure", "--full-scale-dbm", "-10",
                        "-o", str(tmp_path / "r")], capsys)
    one_line(rc, err, "--full-scale-dbm -10: only applies with --capture CAPTURE or to the measured figures")
    assert sorted(p.name for p in tmp_path.iterdir()) == []
