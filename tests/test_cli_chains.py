"""``sdrx receive --list-chains`` (overall IF widths, audio band) and ``--show-chain`` (a preset's TOML)."""

import dataclasses
import sys as _sys
from pathlib import Path as _Path

import pytest
from scipy import optimize

from sdrx.analysis.selectivity import if_widths
from sdrx.chain import design_chain, list_presets, load_chain
from sdrx.chain.spec import parse_spec
from sdrx.tomlfile import tomllib

_sys.path.insert(0, str(_Path(__file__).parent))  # tests/helpers_*.py (pytest importlib mode)
from helpers_cli import run  # noqa: E402
from helpers_filters import preset_response_db  # noqa: E402


def _formula_width(preset, level_db):
    """Width between the two points `level_db` down, from the handbook formulas of the IF stages alone."""
    tune = 1e6
    g = lambda d: preset_response_db(preset, tune, tune + d, preselector=False) + level_db
    return optimize.brentq(g, 1.0, 30e3, xtol=1e-4) - optimize.brentq(g, -30e3, -1.0, xtol=1e-4)


@pytest.mark.parametrize("preset", ["medium", "wide"])
def test_if_widths_against_the_stage_formulas(preset):
    # Butterworth 1/(1 + Ω^2n), single- and double-tuned resonators (tests/helpers_filters.py): the product of
    # the stages, not the nominal bandwidth of either; measured agreement 1e-6 Hz
    w = if_widths(design_chain(preset))
    for level in (3.0, 6.0):
        assert w[level] == pytest.approx(_formula_width(preset, level), abs=0.01)
    # the medium chain's 9 kHz Butterworth stage and its Q 60 resonator together are 6.1 kHz wide
    if preset == "medium":
        assert 6.0e3 < w[3.0] < 6.2e3


def test_list_chains_prints_widths_and_audio_band(capsys):
    rc, out, err = run(["receive", "--list-chains"], capsys)
    assert rc == 0, err
    rows = {ln.split()[0]: ln for ln in out.splitlines()[1:] if ln.split() and ln.split()[0] in
            {n for n, _ in list_presets()}}
    assert sorted(rows) == ["medium", "narrow", "wide"]
    for name, line in rows.items():
        design = design_chain(name)
        w = if_widths(design)
        assert f"{w[3.0] / 1e3:.1f} kHz" in line and f"{w[6.0] / 1e3:.1f} kHz" in line
        a = design.audio
        assert f"{a.highpass_hz:g} Hz-{a.lowpass_hz / 1e3:g} kHz" in line
    assert "overall width of the whole IF chain" in out
    # a description names a stage's width as nominal, never as if it were the chain's
    for name, desc in list_presets():
        assert "nominal" in desc


@pytest.mark.parametrize("preset", ["medium", "narrow", "wide"])
def test_show_chain_loads_back_to_the_same_chain(preset, capsys, tmp_path):
    rc, out, err = run(["receive", "--show-chain", preset], capsys)
    assert rc == 0, err
    back = parse_spec(tomllib.loads(out), "<printed>")
    want = load_chain(preset)
    assert dataclasses.replace(back, source=want.source) == want
    # saved under another name it is a chain file that --chain takes
    p = tmp_path / "mine.toml"
    p.write_text(out)
    assert dataclasses.replace(load_chain(str(p)), source=want.source) == want


def test_show_chain_unknown(capsys):
    rc, out, err = run(["receive", "--show-chain", "nosuch"], capsys)
    assert rc == 2
    assert err == "sdrx: error: --show-chain nosuch: no such preset or file (presets: medium, narrow, wide)\n"
