"""The comparison folder and page (sdrx.compare.run.write_comparison, sdrx.compare.page) on audio made here."""

import base64
import html
import json
from html.parser import HTMLParser

import numpy as np
import pyloudnorm
import pytest
import soundfile as sf
from scipy import signal
from scipy.stats import binom

from sdrx.chain import design_chain
from sdrx.compare.blind import decode_key, plan_trials
from sdrx.compare.page import json_for_script
from sdrx.compare.run import MARKER, SpecChoice, check_out_dir, safe_label, write_comparison
from sdrx.errors import OutputError

FS = 48000.0
EVIL = "<script>alert(1)</script>"


@pytest.fixture
def rng():
    return np.random.default_rng(5150)


def fake_outputs(rng, seconds=3.0):
    """Band-limited noise with a syllabic envelope, through three low-passes of different delay and level."""
    n = int(seconds * FS)
    t = np.arange(n) / FS
    prog = signal.sosfilt(signal.butter(4, 5000, fs=FS, output="sos"), rng.standard_normal(n))
    prog *= 0.6 + 0.4 * np.sin(2 * np.pi * 3.0 * t)
    outs = []
    for cutoff, order, level, delay in ((7000, 2, 0.8, 0), (3500, 6, 0.05, 40), (2200, 8, 0.3, 11)):
        y = level * signal.sosfilt(signal.butter(order, cutoff, fs=FS, output="sos"), prog)
        outs.append(np.concatenate([np.zeros(delay), y[: n - delay]]))
    return outs


def make(tmp_path, rng, *, blind=0, seed=42, names=("wide", "medium", "narrow"), out_name="cmp"):
    designs = [design_chain("wide"), design_chain({"name": EVIL}), design_chain("narrow")]
    choices = [SpecChoice(n, n, safe_label(n), ("preset", n)) for n in names]
    out = tmp_path / out_name
    old = check_out_dir(out)
    result = write_comparison(
        out, choices, designs, fake_outputs(rng), [FS] * 3, plan=plan_trials(blind, 3, seed),
        tune_hz=1.13e6, spacing_hz=10e3, old_files=old,
        header={"capture": {"path": "x.wav"}, "excerpt": {"start_s": 0.0, "duration_s": 3.0},
                "path": "fast", "subtitle": f"capture {EVIL}.wav", "capture_name": f"{EVIL}.wav"},
    )
    return out, result


class _Text(HTMLParser):
    """Visible text of a page: everything outside <script> and <style>."""

    def __init__(self):
        super().__init__()
        self.skip = 0
        self.parts = []

    def handle_starttag(self, tag, attrs):
        if tag in ("script", "style"):
            self.skip += 1

    def handle_endtag(self, tag):
        if tag in ("script", "style"):
            self.skip -= 1

    def handle_data(self, data):
        if not self.skip:
            self.parts.append(data)


def visible_text(page):
    p = _Text()
    p.feed(page)
    return " ".join(p.parts)


def test_written_wavs_are_loudness_matched_and_unclipped(tmp_path, rng):
    out, result = make(tmp_path, rng)
    meter = pyloudnorm.Meter(FS, filter_class="DeMan")
    levels = []
    for s in result["specs"]:
        x, fs = sf.read(out / s["wav"], dtype="float64")
        assert fs == FS
        levels.append(meter.integrated_loudness(x))
        assert np.max(np.abs(x)) <= 10 ** (-1 / 20)  # sample peak at or below -1 dBFS: nothing clipped
    # consistency check: the BS.1770 meter sdrx uses (pyloudnorm, the filters of BS.1770-4's tables) run
    # again on the written 16-bit files (measured deviation 1.4e-6 LU; tolerance 1e-5 LU)
    np.testing.assert_allclose(levels, result["loudness"]["target_lufs"], rtol=0, atol=1e-5)
    # the gains differ by what the inputs' loudness differed by (0.8 vs 0.05 level: about 24 dB)
    gains = [s["gain_db"] for s in result["specs"]]
    befores = [s["loudness_lufs_before"] for s in result["specs"]]
    np.testing.assert_allclose(np.add(gains, befores), result["loudness"]["target_lufs"], atol=1e-9)


def test_written_wavs_are_time_aligned(tmp_path, rng):
    out, result = make(tmp_path, rng)
    xs = [sf.read(out / s["wav"], dtype="float64")[0] for s in result["specs"]]
    assert len({x.size for x in xs}) == 1
    for x in xs[1:]:
        r = signal.correlate(x - x.mean(), xs[0] - xs[0].mean(), mode="full")
        lags = signal.correlation_lags(x.size, xs[0].size, mode="full")
        # alignment: cross-correlation peak at zero lag within one sample
        assert abs(lags[np.argmax(r)]) <= 1
    assert result["specs"][0]["delay_ms"] == 0.0
    assert result["specs"][1]["delay_ms"] > result["specs"][2]["delay_ms"] > 0


def test_compare_json_fields(tmp_path, rng):
    out, result = make(tmp_path, rng, blind=6)
    on_disk = json.loads((out / "compare.json").read_text())
    assert on_disk == result
    for s in on_disk["specs"]:
        for k in ("label", "chain", "wav", "loudness_lufs_before", "gain_db", "delay_ms",
                  "adjacent_rejection_db", "image_rejection_db", "bandwidth_6db_hz", "bandwidth_60db_hz"):
            assert k in s
    assert on_disk["key_file"] == "blind-key.json"
    assert len(on_disk["trials"]) == 6
    assert all(set(t) == {"trial", "a", "b"} for t in on_disk["trials"])  # no key in compare.json
    assert "x_is" not in (out / "compare.json").read_text()
    assert sorted(json.loads((out / MARKER).read_text())["files"]) == sorted(
        ["wide.wav", "medium.wav", "narrow.wav", "compare.json", "index.html", "blind-key.json"])


def test_designed_figures_follow_the_presets(tmp_path, rng):
    _, result = make(tmp_path, rng)
    wide, _, narrow = result["specs"]
    assert narrow["bandwidth_6db_hz"] < wide["bandwidth_6db_hz"]
    assert narrow["adjacent_rejection_db"]["worst"] > wide["adjacent_rejection_db"]["worst"]
    assert narrow["image_hz"] == pytest.approx(1.13e6 + 2 * 455e3)


def test_audio_bandwidth_is_the_chains_not_the_programmes(tmp_path, rng):
    # the page's audio bandwidth follows the chain (test tones through it, sdrx.analysis.audio_response:
    # checked against the filter formulas in test_audio_response.py), the same figure refs records
    from sdrx.analysis.audio_response import AUDIO_BANDWIDTH_DEFINITION, audio_bandwidth_hz
    from sdrx.chain import design_chain

    out, result = make(tmp_path, rng)
    assert result["audio_bandwidth_definition"] == AUDIO_BANDWIDTH_DEFINITION
    got = [s["audio_bandwidth_hz"] for s in result["specs"]]
    assert got == [audio_bandwidth_hz(design_chain(s["chain"]), 1.13e6) for s in result["specs"]]
    wide, medium, narrow = got
    assert narrow < 2500 < medium < 4500 < wide          # 2.15, 3.01 and 6.28 kHz
    page = (out / "index.html").read_text()
    assert "audio bandwidth (−3 dB re 1 kHz, test tones through the chain)" in page
    assert f"{medium / 1e3:.2f}" in page


def test_blind_key_reproducible_and_hidden(tmp_path, rng):
    out1, _ = make(tmp_path, rng, blind=12, seed=77, out_name="a")
    out2, _ = make(tmp_path, np.random.default_rng(5150), blind=12, seed=77, out_name="b")
    key1 = json.loads((out1 / "blind-key.json").read_text())
    key2 = json.loads((out2 / "blind-key.json").read_text())
    assert key1 == key2
    assert key1["trials"][0]["x_is"] == plan_trials(12, 3, 77).x_is[0]
    page = (out1 / "index.html").read_text()
    text = visible_text(page)
    assert "X was" not in text
    for t in key1["trials"]:
        assert f"X was {t['x_is']}" not in page
    x_is = [t["x_is"] for t in key1["trials"]]
    for plain in (json.dumps(x_is), json.dumps(x_is, separators=(",", ":"))):
        assert plain not in page
        assert base64.b64encode(plain.encode()).decode() not in page
    # but the page does carry it, obfuscated, for the reveal
    data = json.loads(page.split('<script type="application/json" id="sdrx-data">')[1].split("</script>")[0])
    assert decode_key(data["blind"]["key"], base64.b64decode(data["blind"]["salt"])) == x_is
    # and its probability table is the binomial tail
    for k, p in enumerate(data["blind"]["chance"]):
        assert p == pytest.approx(binom.sf(k - 1, 12, 0.5), rel=1e-12)  # source: binomial tail via scipy.stats


def test_user_text_is_escaped(tmp_path, rng):
    out, _ = make(tmp_path, rng, names=("wide", "medium", "narrow"))
    page = (out / "index.html").read_text()
    assert EVIL not in page
    assert html.escape(EVIL) in page
    assert f"{EVIL}.wav" not in page
    assert "alert(1)" in visible_text(page)  # shown as text


def test_json_in_script_cannot_close_the_element():
    s = json_for_script({"a": "</script><script>alert(1)</script>", "b": "<!--"})
    assert "</" not in s and "<" not in s
    assert json.loads(s)["a"] == "</script><script>alert(1)</script>"


def test_folder_with_foreign_files_is_refused(tmp_path):
    d = tmp_path / "cmp"
    d.mkdir()
    (d / "notes.txt").write_text("mine")
    with pytest.raises(OutputError, match=r"holds files not made by sdrx \(notes.txt\).*--force"):
        check_out_dir(d)
    assert check_out_dir(d, force=True) == set()


def test_earlier_comparison_needs_force_and_is_replaced(tmp_path, rng):
    out, _ = make(tmp_path, rng, blind=3)
    with pytest.raises(OutputError, match="holds an earlier comparison; pass --force"):
        check_out_dir(out)
    (out / "keep.txt").write_text("not ours")
    old = check_out_dir(out, force=True)
    assert "blind-key.json" in old
    choices = [SpecChoice(n, n, n, ("preset", n)) for n in ("wide", "narrow")]
    write_comparison(out, choices, [design_chain("wide"), design_chain("narrow")], fake_outputs(rng)[::2],
                     [FS] * 2, plan=plan_trials(0, 2, 1), tune_hz=1e6, spacing_hz=9e3, old_files=old,
                     header={"capture": {}, "excerpt": {}, "path": "fast", "subtitle": "", "capture_name": "c"})
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted([MARKER, "compare.json", "index.html", "keep.txt", "narrow.wav", "wide.wav"])


def test_rerun_is_byte_identical(tmp_path):
    a, _ = make(tmp_path, np.random.default_rng(1), blind=4, seed=9, out_name="a")
    b, _ = make(tmp_path, np.random.default_rng(1), blind=4, seed=9, out_name="b")
    for name in ("wide.wav", "medium.wav", "narrow.wav", "compare.json", "index.html", "blind-key.json"):
        assert (a / name).read_bytes() == (b / name).read_bytes(), name


def test_selectivity_plot_colour_blind_safe_and_literal_labels():
    import io

    import matplotlib.image

    from sdrx.compare.plot import COLOURS, STYLES, selectivity_png

    off = np.linspace(-30e3, 30e3, 601)
    curves = [(r"a $\frac{$ b", off, -np.abs(off) / 500), ("two", off, -np.abs(off) / 300),
              ("three", off, -np.abs(off) / 200)]
    png = selectivity_png(curves, tune_hz=1e6, spacing_hz=10e3)  # "$...$" would be mathtext and fail
    img = matplotlib.image.imread(io.BytesIO(png), format="png")[..., :3]
    for hexcol in COLOURS[:3]:
        rgb = np.array([int(hexcol[i:i + 2], 16) / 255 for i in (1, 3, 5)])
        # source: Okabe & Ito (2008) colour-universal palette; each curve is drawn in its colour
        assert (np.abs(img - rgb).max(axis=-1) < 0.02).sum() > 50, hexcol
    assert len(set(map(str, STYLES[:3]))) == 3


def test_page_cautions_give_the_gains_applied_and_say_never_transmit(tmp_path, rng):
    out, result = make(tmp_path, rng)
    text = visible_text((out / "index.html").read_text(encoding="utf-8"))
    gains = [s["gain_db"] for s in result["specs"]]
    # fake outputs at 0.8, 0.05 and 0.3 of full scale: the quiet one is raised by more than 20 dB
    assert max(gains) > 20
    assert f"applied {min(gains):+.1f} to {max(gains):+.1f} dB of gain" in text
    assert "start at a low volume, above all on headphones" in text
    assert "Never transmit a capture" in text and "local licensing law applies" in text
    assert text.index("Hearing:") < text.index("Listen")
