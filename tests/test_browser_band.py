"""The band overview page in a real browser: Debian's headless Chromium driven by Playwright.

Fails (never skips) when the browser cannot be launched (`make test` installs
Debian's chromium first). The screenshot is kept under test-artifacts/.
"""

import json
import time
from pathlib import Path

import pytest
import soundfile as sf

from sdrx.band import band

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--autoplay-policy=no-user-gesture-required"]
ARTIFACTS = Path(__file__).resolve().parents[1] / "test-artifacts"


def _audio(page):
    return page.evaluate("() => Array.from(document.querySelectorAll('audio.station'))"
                         ".map(a => ({t: a.currentTime, paused: a.paused, ready: a.readyState, d: a.duration,"
                         " src: a.getAttribute('src')}))")


def _wait(page, cond, what, timeout_s=10.0):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout_s:
        st = _audio(page)
        if cond(st):
            return st
        page.wait_for_timeout(50)
    raise AssertionError(f"timed out waiting for {what}: {_audio(page)}")


@pytest.fixture(scope="module")
def band_folder(band_capture, tmp_path_factory):
    out = tmp_path_factory.mktemp("band-page") / "overview"
    band([band_capture], out, stations="850k,930k,1010k", duration_s=4.0)
    return out


def test_band_page_in_chromium(band_folder):
    from playwright.sync_api import sync_playwright

    data = json.loads((band_folder / "band.json").read_text())
    stations = data["captures"][0]["stations"]
    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / "band-page.png"
    requests, errors = [], []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
        try:
            page = browser.new_page(viewport={"width": 1300, "height": 1200})
            page.on("request", lambda r: requests.append(r.url))
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto((band_folder / "index.html").as_uri())
            # every player has its WAV beside the page, with the station's length
            st = _wait(page, lambda s: len(s) == 3 and all(a["ready"] >= 1 for a in s), "metadata")
            assert [a["src"] for a in st] == [s["file"] for s in stations]
            for a, s in zip(st, stations):
                assert a["d"] == pytest.approx(sf.info(str(band_folder / s["file"])).duration, abs=0.01)
            # the spectrogram is drawn, one level plot per station
            assert page.evaluate("() => document.querySelector('img.spectrogram').naturalWidth") > 500
            assert page.evaluate("() => document.querySelectorAll('tr.station svg.level polyline').length") == 3
            rows = page.evaluate("() => Array.from(document.querySelectorAll('tr.station')).map(r => r.dataset.station)")
            assert rows == ["850k", "930k", "1010k"]
            # playing one station pauses the one heard before
            page.evaluate("() => document.querySelectorAll('audio.station')[0].play()")
            _wait(page, lambda s: not s[0]["paused"] and s[0]["t"] > 0.3, "first playing")
            page.evaluate("() => document.querySelectorAll('audio.station')[2].play()")
            st = _wait(page, lambda s: s[0]["paused"] and not s[2]["paused"] and s[2]["t"] > 0.2, "switch")
            assert page.inner_text("#now") == "Now playing: 1010k"
            page.screenshot(path=str(shot), full_page=True)
        finally:
            browser.close()
    assert errors == []
    # nothing but the page's own folder was asked for: no network
    assert requests and all(u.startswith("file://") or u.startswith("data:") for u in requests)
    assert shot.stat().st_size > 10000
