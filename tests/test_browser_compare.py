"""The comparison page in a real browser: Debian's headless Chromium driven by Playwright.

Fails (never skips) when the browser cannot be launched: `make test` installs
Debian's ``chromium`` and ``chromium-driver`` first (the Makefile's ``browser`` target).
The screenshot is kept under test-artifacts/ (git-ignored).
"""

import json
import time
from pathlib import Path

import numpy as np
import pytest
from scipy import signal
from scipy.stats import binom

from sdrx.chain import design_chain
from sdrx.compare.blind import plan_trials
from sdrx.compare.run import SpecChoice, write_comparison

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--autoplay-policy=no-user-gesture-required"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"
FS = 48000.0


def _page_folder(tmp_path, n_trials=3, seed=2024):
    """A comparison of two fake outputs (different low-passes and delays of one programme)."""
    rng = np.random.default_rng(11)
    n = int(4.0 * FS)
    t = np.arange(n) / FS
    prog = signal.sosfilt(signal.butter(4, 4000, fs=FS, output="sos"), rng.standard_normal(n))
    prog *= 0.6 + 0.4 * np.sin(2 * np.pi * 2.5 * t)
    a = 0.5 * signal.sosfilt(signal.butter(2, 6000, fs=FS, output="sos"), prog)
    b = 0.1 * np.concatenate([np.zeros(30), signal.sosfilt(signal.butter(8, 2500, fs=FS, output="sos"), prog)[:-30]])
    choices = [SpecChoice("wide", "wide", "wide", ("preset", "wide")),
               SpecChoice("narrow", "narrow", "narrow", ("preset", "narrow"))]
    out = tmp_path / "cmp"
    write_comparison(out, choices, [design_chain("wide"), design_chain("narrow")], [a, b], [FS, FS],
                     plan=plan_trials(n_trials, 2, seed), tune_hz=1.13e6, spacing_hz=10e3,
                     header={"capture": {}, "excerpt": {}, "path": "fast", "subtitle": "synthesized",
                             "capture_name": "synthesized"})
    return out


def _launch(p):
    # no try/except: a browser that cannot start fails the test
    return p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)


def _state(page):
    return page.evaluate(
        "() => Array.from(document.querySelectorAll('audio.sdrx-audio'))"
        ".map(a => ({t: a.currentTime, paused: a.paused, ready: a.readyState}))")


def _wait(page, cond, timeout_s=5.0, what="condition"):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout_s:
        st = _state(page)
        if cond(st):
            return st
        page.wait_for_timeout(50)
    raise AssertionError(f"timed out waiting for {what}: {_state(page)}")


def run_page_checks(page, folder, key, second_label):
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto((folder / "index.html").as_uri())
    _wait(page, lambda st: all(a["ready"] >= 3 for a in st), what="audio loaded")

    # the cautions are on screen above the player: hearing, with the gains the matching applied, and transmitting
    player_top = page.locator("#player").bounding_box()["y"]
    for sel in ("#caution-hearing", "#caution-transmit"):
        assert page.is_visible(sel)
        assert page.locator(sel).bounding_box()["y"] < player_top
    gains = [s["gain_db"] for s in json.loads((folder / "compare.json").read_text())["specs"]]
    hearing = page.inner_text("#caution-hearing")
    assert "low volume" in hearing and "headphones" in hearing
    assert f"{min(gains):+.1f} to {max(gains):+.1f} dB of gain" in hearing
    assert "never transmit" in page.inner_text("#caution-transmit").lower()

    # play A (the first output), then switch to B at the same position
    page.click("#src-0")
    page.click("#play")
    st = _wait(page, lambda st: (not st[0]["paused"]) and st[0]["t"] > 0.6, what="A playing")
    assert st[1]["paused"]
    t_click = time.monotonic()
    page.click("#src-1")
    st = _state(page)
    since_click_s = time.monotonic() - t_click
    assert st[0]["paused"] and not st[1]["paused"]
    # B starts where A was: the switch does not restart the excerpt; B has played on for at most the
    # wall time since the click (on a loaded machine that is more than the 50 ms of slack)
    assert st[0]["t"] - 0.05 <= st[1]["t"] <= st[0]["t"] + since_click_s + 0.05
    assert st[1]["t"] > 0.6
    t_switch = st[1]["t"]
    st = _wait(page, lambda st: st[1]["t"] > t_switch + 0.2, what="B advancing")
    assert page.inner_text("#now") == f"Now playing: {second_label}"

    # blind trial 1: listen to X, it plays from the same position, answer right; trial 2 answer wrong.
    # Every trial button seeks, even to the output heard already: otherwise a switch to X would be
    # seamless exactly when X is the output playing, and the listener could tell by the (missing) gap.
    page.evaluate("() => { window.sdrxSeeks = 0; document.querySelectorAll('audio.sdrx-audio')"
                  ".forEach(a => a.addEventListener('seeking', () => { window.sdrxSeeks += 1; })); }")
    page.click("#play-0-A")
    page.click("#play-0-A")
    page.click("#play-0-X")
    t0 = time.monotonic()
    while page.evaluate("() => window.sdrxSeeks") < 3 and time.monotonic() - t0 < 5:
        page.wait_for_timeout(50)
    assert page.evaluate("() => window.sdrxSeeks") == 3
    st = _state(page)
    heard = [i for i, a in enumerate(st) if not a["paused"]]
    assert len(heard) == 1
    assert heard[0] == (0 if key[0] == "A" else 1)
    assert page.inner_text("#now") == "Now playing: trial 1, X"
    page.click(f"#answer-0-{key[0]}")
    page.click(f"#answer-1-{'B' if key[1] == 'A' else 'A'}")
    assert page.inner_text("#answered") == "Answered 2 of 3."
    before = page.inner_text("body")
    assert "X was" not in before  # key not in the visible text before reveal

    page.click("#reveal")
    for t, x in enumerate(key):
        assert f"X was {x}" in page.inner_text(f"#key-{t}")
    p_shown = float(page.inner_text("#p-value"))
    # source: binomial tail via scipy.stats: 1 right of 3 by guessing, P(K >= 1)
    assert p_shown == pytest.approx(float(binom.sf(0, 3, 0.5)), rel=1e-3)
    assert "Score: 1 of 3 right" in page.inner_text("#result")
    assert errors == []


def _real_run(tmp_path):
    """The whole `sdrx compare` on a synthesized 3 s capture, two shipped presets."""
    from sdrx.cli import main
    from sdrx.synth import parse_scenario, synthesize

    sc = parse_scenario({
        "title": "browser test (invented)",
        "capture": {"kind": "iq", "rate": "240k", "center": "1M", "datatype": "ci16_le", "seconds": 3.0,
                    "noise_dbfs_per_hz": -120, "seed": 8},
        "station": [
            {"name": "Alpha", "frequency": "1M", "level_dbfs": -20, "depth": 0.8, "program": {"kind": "speech"}},
            {"name": "Beta", "frequency": "1.01M", "level_dbfs": -32, "depth": 0.8, "program": {"kind": "music"}},
        ]})
    cap = tmp_path / "band.sigmf-meta"
    synthesize(sc, cap)
    out = tmp_path / "real"
    try:
        rc = main(["compare", str(cap), "--tune", "1M", "wide", "medium", "-o", str(out), "--blind", "3",
                   "--seed", "5", "--quiet"])
    except SystemExit as exc:
        rc = exc.code
    assert rc == 0
    return out


@pytest.mark.parametrize("source", ["synthesized-wavs", "sdrx-compare-run"])
def test_page_in_chromium(tmp_path, source):
    from playwright.sync_api import sync_playwright

    folder = _page_folder(tmp_path) if source == "synthesized-wavs" else _real_run(tmp_path)
    key = [t["x_is"] for t in json.loads((folder / "blind-key.json").read_text())["trials"]]
    second = json.loads((folder / "compare.json").read_text())["specs"][1]["label"]
    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / f"compare-page-{source}.png"
    with sync_playwright() as p:
        browser = _launch(p)
        try:
            page = browser.new_page(viewport={"width": 1200, "height": 1400})
            run_page_checks(page, folder, key, second)
            page.screenshot(path=str(shot), full_page=True)
        finally:
            browser.close()
    assert shot.stat().st_size > 10000
