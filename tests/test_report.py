"""Tests of the report: JSON keys, HTML self-contained and equal to the JSON, byte-identical outputs."""

import json
import re
from html.parser import HTMLParser

import numpy as np
import pytest

from sdrx.capture import open_writer
from sdrx.report.build import build_report, write_report
from sdrx.report.html import lookup

from helpers_filters import preset_response_db

TUNE = 1000e3


@pytest.fixture(scope="module")
def report():
    # measured with few points to keep the test quick; the accuracy itself is tested in test_report_measured.py
    return build_report("medium", TUNE, spacing_hz=10e3, points=7)


def test_json_keys(report):
    d = report.data
    for key in ("chain", "tune_hz", "if_hz", "lo_hz", "image_hz", "spacing_hz", "designed", "measured"):
        assert key in d
    assert d["lo_hz"] == 1455e3 and d["image_hz"] == 1910e3  # common practice: LO f + IF, image f + 2 IF
    for part in ("designed", "measured"):
        p = d[part]
        assert set(p["bandwidth_hz"]) == {"3", "6", "40", "60"}
        assert set(p["adjacent_rejection_db"]) == {"-10000", "10000", "-20000", "20000"}
        for k in ("shape_factor", "image_rejection_db", "response"):
            assert k in p
        assert all(len(row) == 2 for row in p["response"])
    q = d["designed"]["q"]
    assert isinstance(q["stages"], list) and len(q["stages"]) == 3  # preselector + two IF stages
    for k in ("equivalent_rf", "equivalent_if", "shortcut_rf", "shortcut_if"):
        assert q[k] > 0
    json.dumps(d, allow_nan=False)


#: A number as the page prints it: digits, optionally a unit (the unit's size in report.json's SI units).
_PRINTED = re.compile(r"([-+]?\d+(?:\.(\d+))?)(?: (Hz|kHz|MHz|µs))?")
_UNIT = {None: 1.0, "Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "µs": 1e-6}


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.keyed = []      # (data-key, text)
        self.values = {}     # data-key -> data-value (the JSON value as repr)
        self.numeric_td = []  # text of every numeric cell
        self.refs = []       # src/href values
        self.imgs = []
        self._key = None
        self._td = False
        self._buf = ""

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        for name in ("src", "href"):
            if name in a:
                self.refs.append(a[name])
        if tag == "img":
            self.imgs.append(a)
        if tag in ("td", "span"):
            self._key = a.get("data-key")
            if self._key is not None and "data-value" in a:
                self.values[self._key] = a["data-value"]
            self._td = True
            self._buf = ""

    def handle_data(self, data):
        if self._td:
            self._buf += data

    def handle_endtag(self, tag):
        if tag in ("td", "span") and self._td:
            text = self._buf.strip()
            if _PRINTED.fullmatch(text):
                self.numeric_td.append(text)
            if self._key is not None:
                self.keyed.append((self._key, text))
            self._td = False
            self._key = None


def _check_html_against_json(folder):
    data = json.loads((folder / "report.json").read_text())
    page = (folder / "report.html").read_text()
    p = _Collect()
    p.feed(page)
    # every figure is embedded: data: URIs only, nothing external
    assert p.refs and all(r.startswith("data:image/png;base64,") for r in p.refs)
    assert "http://" not in page and "https://" not in page
    assert sorted(i["data-name"] for i in p.imgs) == sorted(data["figures"])
    for name in data["figures"]:
        assert (folder / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # every number in the tables is tagged; its data-value is the JSON value and its text that value as a
    # reader reads it: kHz/MHz (never thousands of Hz, never "600000.0"), µs, rounded to the digits shown
    assert len(p.numeric_td) == sum(1 for k, t in p.keyed if t != "n/a")
    for key, text in p.keyed:
        v = lookup(data, key)
        if text == "n/a":
            assert v is None, key
            continue
        assert float(p.values[key]) == v, key
        m = _PRINTED.fullmatch(text)
        assert m, (key, text)
        decimals = len(m.group(2) or "")
        scale = _UNIT[m.group(3)]
        assert abs(float(m.group(1)) * scale - v) <= 0.5 * 10.0 ** -decimals * scale * (1 + 1e-9), (key, text, v)
        if m.group(3) in ("Hz", "kHz", "MHz"):
            assert abs(float(m.group(1))) < 1000 and not m.group(1).endswith(".0"), (key, text)
    return data, p


def test_html_embeds_figures_and_numbers_equal_json(report, tmp_path):
    write_report(report, tmp_path / "rep")
    data, p = _check_html_against_json(tmp_path / "rep")
    keys = {k for k, _ in p.keyed}
    for k in ("designed.bandwidth_hz.60", "measured.bandwidth_hz.6", "measured.difference.image_rejection_db",
              "designed.q.equivalent_if", "designed.q.stages.2.loaded_q"):
        assert k in keys
    # the "loaded Q" of a filter stage is f0/BW of the stage, and the page says so
    assert data["designed"]["q"]["stages"][1]["response"] == "butterworth"
    assert data["designed"]["q"]["stages"][1]["loaded_q"] == pytest.approx(455e3 / 9e3, abs=0.01)
    assert "f0/BW, not the Q of the resonators" in (tmp_path / "rep" / "report.html").read_text()


def test_user_text_is_escaped(tmp_path):
    rep = build_report({"name": "<b>&x</b>", "preselector": {"kind": "none"}}, TUNE, measure=False)
    write_report(rep, tmp_path / "r")
    page = (tmp_path / "r" / "report.html").read_text()
    assert "<b>&x</b>" not in page and "&lt;b&gt;&amp;x&lt;/b&gt;" in page


def test_dollar_signs_in_the_chain_name_print_as_text(tmp_path):
    # matplotlib would parse "$...$" in a title as mathtext and fail on "\frac{" (a traceback, exit 1)
    name = r"cost $\frac{$ x"
    rep = build_report({"name": name, "preselector": {"kind": "none"}}, TUNE, measure=False)
    assert rep.data["chain"] == name
    for png in rep.figures.values():
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
    write_report(rep, tmp_path / "r")
    assert name in (tmp_path / "r" / "report.html").read_text()


def test_byte_identical_outputs(tmp_path):
    a = build_report("narrow", 1130e3, measure=False)
    b = build_report("narrow", 1130e3, measure=False)
    write_report(a, tmp_path / "a")
    write_report(b, tmp_path / "b")
    for f in sorted((tmp_path / "a").iterdir()):
        assert f.read_bytes() == (tmp_path / "b" / f.name).read_bytes(), f.name
    png = (tmp_path / "a" / "selectivity.png").read_bytes()
    assert b"Software" not in png and b"matplotlib" not in png


def test_existing_output_needs_force(report, tmp_path):
    from sdrx.errors import OutputError

    write_report(report, tmp_path / "r")
    before = (tmp_path / "r" / "report.json").read_bytes()
    with pytest.raises(OutputError, match="exists already; pass --force"):
        write_report(report, tmp_path / "r")
    write_report(report, tmp_path / "r", force=True)
    assert (tmp_path / "r" / "report.json").read_bytes() == before


@pytest.fixture
def capture(tmp_path):
    """An I/Q capture made in code: carriers at the tune, +10 kHz, -20 kHz and +40 kHz."""
    fs, center, seconds = 250e3, 1000e3, 0.3
    rng = np.random.default_rng(7)
    t = np.arange(int(fs * seconds)) / fs
    x = np.zeros(t.size, complex)
    for f, a in ((1000e3, 0.3), (1010e3, 0.1), (980e3, 0.05), (1040e3, 0.2)):
        x += a * np.exp(2j * np.pi * (f - center) * t + 1j * rng.uniform(0, 2 * np.pi))
    x += 1e-4 * (rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size))
    path = tmp_path / "cap.sigmf-meta"
    with open_writer(path, fs=fs, kind="iq", datatype="cf32_le", center_hz=center) as w:
        w.write(x.astype(np.complex64))
    return path, {1000e3: 0.3, 1010e3: 0.1, 980e3: 0.05, 1040e3: 0.2}


def test_capture_carriers_and_spectrum(capture, tmp_path):
    path, truth = capture
    rep = build_report("medium", TUNE, capture=path, measure=False)
    cars = {c["channel_hz"]: c for c in rep.data["carriers"]}
    assert set(truth) <= set(cars)
    for f, a in truth.items():
        c = cars[f]
        assert c["freq_hz"] == f     # on its channel: the interpolated line, to its resolution and 0.1 Hz
        # level convention (README, file formats): 20 log10 of the carrier amplitude (measured deviation 6e-4 dB
        # with the report's rounding to 0.001 dB; tolerance 0.01 dB)
        assert c["antenna_dbfs"] == pytest.approx(20 * np.log10(a), abs=0.01)
        assert c["offset_hz"] == f - TUNE
        # the medium chain's response at the carrier from the handbook formulas (tests/helpers_filters.py),
        # to the report's rounding
        response_db = float(preset_response_db("medium", TUNE, f))
        assert c["selectivity_db"] == pytest.approx(response_db, abs=5e-4)
        # so the detector sees the true carrier level plus that response (measured deviation 1.4e-3 dB)
        assert c["detector_dbfs"] == pytest.approx(20 * np.log10(a) + response_db, abs=0.015)
    assert cars[1000e3]["tuned"] and not cars[1000e3]["within_two_channels"]
    assert cars[1010e3]["within_two_channels"] and cars[980e3]["within_two_channels"]
    assert not cars[1040e3]["within_two_channels"] and not cars[1040e3]["image"]
    assert "spectrum.png" in rep.figures
    write_report(rep, tmp_path / "r")
    _check_html_against_json(tmp_path / "r")


def test_off_grid_carriers_placed_where_they_are(tmp_path):
    # a 10 kHz band reported on the 9 kHz grid: the carriers at 1000.004 and 1010 kHz are found on the 9 kHz
    # channels 999 and 1008 kHz, and listed at their own frequencies, their detector level computed there
    fs, center = 250e3, 1000e3
    t = np.arange(int(fs * 0.3)) / fs
    truth = {1000.004e3: 0.3, 1010e3: 0.1}
    x = sum(a * np.exp(2j * np.pi * (f - center) * t) for f, a in truth.items())
    x = x + 1e-4 * (np.random.default_rng(8).standard_normal(t.size) + 0j)
    path = tmp_path / "off.sigmf-meta"
    with open_writer(path, fs=fs, kind="iq", datatype="cf32_le", center_hz=center) as w:
        w.write(x.astype(np.complex64))
    rep = build_report("medium", 999e3, spacing_hz=9e3, capture=path, measure=False)
    cars = {c["channel_hz"]: c for c in rep.data["carriers"]}
    assert sorted(cars) == [999e3, 1008e3]
    for (ch, c), (f, a) in zip(sorted(cars.items()), sorted(truth.items())):
        assert c["freq_hz"] == pytest.approx(f, abs=0.1)      # measured within 0.01 Hz (bins of 122 Hz)
        assert c["offset_hz"] == pytest.approx(f - 999e3, abs=0.1)
        response_db = float(preset_response_db("medium", 999e3, f))
        assert c["selectivity_db"] == pytest.approx(response_db, abs=5e-4)
        assert c["detector_dbfs"] == pytest.approx(20 * np.log10(a) + response_db, abs=0.015)
    # at the 1 kHz offset the tuned carrier loses under 1 dB; the one at 11 kHz sits far down the skirt,
    # where its channel (9 kHz off) would have read it much higher
    assert cars[999e3]["tuned"] and cars[1008e3]["within_two_channels"]
    assert float(preset_response_db("medium", 999e3, 1008e3)) > cars[1008e3]["selectivity_db"] + 3


def test_tune_outside_capture(capture):
    from sdrx.errors import ParameterError

    with pytest.raises(ParameterError, match="outside the band of capture"):
        build_report("medium", 1500e3, capture=capture[0], measure=False)


def test_datasheet_sections_in_json_and_html(report, tmp_path):
    m = report.data["measured"]
    s = m["sensitivity"]
    for k in ("level_dbm", "sn_db", "depth", "tone_hz", "predicted_dbm", "noise_bandwidth_hz", "noise_figure_db",
              "points", "method", "source"):
        assert k in s, k
    assert s["depth"] == 0.3 and s["tone_hz"] == 1000.0 and s["sn_db"] == 20.0   # common practice: 30 %, 1 kHz
    assert s["noise_figure_db"] == 10.0 and s["noise_figure_from"].startswith("report default")
    assert abs(s["level_dbm"] - s["predicted_dbm"]) <= 1.5                     # the agreement
    f = m["fidelity"]
    assert f["low_3db_hz"] < 1000.0 < f["high_3db_hz"] and all(len(r) == 2 for r in f["response"])
    assert f["response"][0][0] == 50.0 and f["response"][-1][0] == 10000.0
    d = m["distortion"]
    assert set(d["thd_percent"]) == {"0.3", "0.8", "0.95"} and d["deepest"] == 0.95
    assert d["diagonal_clipping"] is None                                        # envelope detector
    assert {"sensitivity.png", "fidelity.png", "distortion.png"} <= set(report.data["figures"])
    write_report(report, tmp_path / "rep")
    data, p = _check_html_against_json(tmp_path / "rep")
    keys = {k for k, _ in p.keyed}
    for k in ("measured.sensitivity.level_dbm", "measured.sensitivity.predicted_dbm",
              "measured.fidelity.high_3db_hz", "measured.distortion.thd_percent.0.95"):
        assert k in keys, k
    page = (tmp_path / "rep" / "report.html").read_text()
    for heading in ("<h2>Sensitivity</h2>", "<h2>Audio fidelity</h2>", "<h2>Distortion</h2>"):
        assert page.count(heading) == 1
    assert page.count("Haykin") >= 2 and page.count('data-name="distortion.png"') == 1


def test_diode_report_draws_the_clipping_limit():
    from sdrx.report.datasheet import datasheet_sections
    from sdrx.chain import design_chain

    d = design_chain({"detector": {"kind": "diode", "rc_us": 300}})
    sec, figs = datasheet_sections(d, TUNE, 10e3)
    clip = sec["distortion"]["diagonal_clipping"]
    # source: diagonal-clipping limit RC <= sqrt(1-m²)/(2π fm m) (Haykin, Communication Systems), for fm
    for k, m in (("0.3", 0.3), ("0.8", 0.8), ("0.95", 0.95)):
        assert clip["onset_hz"][k] == pytest.approx(np.sqrt(1 - m * m) / (2 * np.pi * 300e-6 * m), abs=0.1)
    assert sec["distortion"]["thd_percent"]["0.3"] < 0.01 < 5.0 < sec["distortion"]["thd_percent"]["0.8"]
    assert figs["distortion.png"][:8] == b"\x89PNG\r\n\x1a\n"


def test_ideal_quadrature_mixer_has_infinite_image_rejection(tmp_path):
    """No gain or phase error: K2 = (1 - γe^{-jφ})/2 = 0, no image response at all (it was a TypeError
    drawing the image figure). JSON holds null, the page says infinite, the figure draws no line."""
    rep = build_report({"mixer": {"kind": "quadrature"}}, 1e6, measure=False)
    assert rep.data["designed"]["image_rejection_db"] is None
    written = write_report(rep, tmp_path / "q")
    page = (tmp_path / "q" / "report.html").read_text()
    assert "Image rejection: infinite" in page
    assert {p.name for p in written} >= {"image.png", "report.json"}
    assert json.loads((tmp_path / "q" / "report.json").read_text())["designed"]["image_rejection_db"] is None


def test_most_stages_and_an_odd_name_draw_without_warnings(tmp_path):
    """16 stages (the limit; hundreds gave a matplotlib warning on stderr), a name in a script the font
    lacks and one too long for the layout: the figures are drawn and nothing is printed."""
    import warnings

    stage = {"response": "butterworth", "order": 2, "bandwidth": "9k", "gain_db": 5}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rep = build_report({"name": "名前 " + "long " * 60, "if_stage": [stage] * 16}, 1e6, measure=False)
        write_report(rep, tmp_path / "r")
    assert len(rep.data["designed"]["q"]["stages"]) == 17      # the preselector and 16 IF stages


def test_stages_are_described_in_words_in_the_legend_and_the_table(tmp_path, monkeypatch):
    """The legend and the Q table say "double-tuned pair (two resonators)", not the config's
    "double_tuned, order 1"; the poles counted are those of the design (scipy's lp2bp_zpk doubles them)."""
    from sdrx.chain import design_chain
    from sdrx.report import plots

    seen = []
    draw = plots.stages_png
    monkeypatch.setattr(plots, "stages_png", lambda offs, curves, *a, **k: seen.extend(c[0] for c in curves)
                        or draw(offs, curves, *a, **k))
    rep = build_report("wide", 1130e3, measure=False)
    assert seen == ["preselector: single tuned circuit tracking the tune",
                    "IF stage 1: Butterworth band-pass, 3 resonators (6 poles)",
                    "IF stage 2: double-tuned pair (two resonators)"]
    d = design_chain("wide")
    assert len(d.stages[0].p) == 6 and len(d.stages[1].p) == 4  # two coupled circuits: four poles
    write_report(rep, tmp_path / "r")
    page = (tmp_path / "r" / "report.html").read_text()
    assert "<td>double-tuned pair (two resonators)</td>" in page
    assert "<td>Butterworth band-pass, 3 resonators (6 poles)</td>" in page
    for config_word in ("single_tuned", "double_tuned", "butterworth"):
        assert f"<td>{config_word}</td>" not in page


def test_page_prints_frequencies_in_khz_and_delay_in_us(tmp_path):
    rep = build_report("medium", 600e3, measure=False)
    write_report(rep, tmp_path / "r")
    page = (tmp_path / "r" / "report.html").read_text()
    _check_html_against_json(tmp_path / "r")
    assert re.search(r">\d+\.0 ?Hz<|>\d{4,}(\.\d+)?<", page) is None
    assert 'data-key="tune_hz" data-value="600000.0">600 kHz<' in page
    assert 'data-key="image_hz" data-value="1510000.0">1.51 MHz<' in page
    at = rep.data["designed"]["group_delay"]["at_tune_s"]
    assert f'data-value="{at!r}">{at * 1e6:.1f} µs<' in page


def test_a_long_chain_name_wraps_inside_the_figures(capture, monkeypatch):
    """A 200-character chain name: every title is wrapped (or cut) and lies inside its figure, as
    measured by matplotlib's own renderer after the layout."""
    from sdrx.report import plots

    drawn = []
    save = plots._png
    monkeypatch.setattr(plots, "_png", lambda fig, ctx: drawn.append(fig) or save(fig, ctx))
    for name in ("chain " * 34)[:200], "x" * 200:
        drawn.clear()
        rep = build_report({"name": name}, TUNE, capture=capture[0], measure=False)
        assert len(drawn) == len(rep.figures) == 5
        for fig in drawn:
            renderer = fig.canvas.get_renderer()
            titles = plots._titles(fig)
            assert titles
            for t in titles:
                box = t.get_window_extent(renderer)
                assert 0 <= box.x0 and box.x1 <= fig.bbox.width, t.get_text()
                assert 0 <= box.y0 and box.y1 <= fig.bbox.height, t.get_text()
                assert t.get_text().count("\n") < plots.TITLE_LINES
        assert any("\n" in t.get_text() for fig in drawn for t in plots._titles(fig))


def test_spectrum_states_its_resolution_bandwidth(capture, tmp_path, monkeypatch):
    """The RBW printed on the spectrum (and kept in report.json) is the Hann window's equivalent noise
    bandwidth fs·Σw²/(Σw)² (Harris 1978, Proc. IEEE 66(1), sec. IV-A), computed here from scipy's window."""
    from scipy.signal import get_window

    from sdrx.report import plots

    drawn = {}
    draw = plots.spectrum_png
    monkeypatch.setattr(plots, "spectrum_png", lambda *a, **k: drawn.update(k) or draw(*a, **k))
    rep = build_report("medium", TUNE, capture=capture[0], measure=False)
    s = rep.data["spectrum"]
    fs, n = 250e3, s["fft_points"]
    assert n & (n - 1) == 0 and fs / n <= 10e3 / 20 < 2 * fs / n   # the next power of two of fs / (spacing/20)
    w = get_window("hann", n, fftbins=False)                       # symmetric, as numpy's hanning
    enbw_hz = fs * np.sum(w ** 2) / np.sum(w) ** 2
    assert s["rbw_hz"] == pytest.approx(enbw_hz, abs=1e-3) and s["bin_hz"] == pytest.approx(fs / n, abs=1e-3)
    # Harris Table 1: 1.50 bins for the (DFT-even) Hann window; the symmetric N-point one, zero at both ends,
    # has Σw = (N-1)/2 and Σw² = 3(N-1)/8: 1.5·N/(N-1) bins
    assert s["rbw_hz"] / s["bin_hz"] == pytest.approx(1.5 * n / (n - 1), rel=1e-5)
    assert drawn["rbw_hz"] == pytest.approx(enbw_hz, rel=1e-12)
    write_report(rep, tmp_path / "r")
    page = (tmp_path / "r" / "report.html").read_text()
    assert f">{enbw_hz:.1f} Hz</span>; level in dBFS per RBW" in page
    _check_html_against_json(tmp_path / "r")


def test_spectrum_text_names_the_rbw(monkeypatch):
    from sdrx.report import plots

    figs = []
    save = plots._png
    monkeypatch.setattr(plots, "_png", lambda fig, ctx: figs.append(fig) or save(fig, ctx))
    f = np.linspace(990e3, 1010e3, 50)
    plots.spectrum_png(f, -100 + 0 * f, 1e6, (996e3, 1004e3), 1.91e6, [], rbw_hz=439.56, bin_hz=292.97)
    (fig,) = figs
    assert fig._supxlabel.get_text().startswith("RBW 439.6 Hz: noise bandwidth of the Hann window, bins 293 Hz")
    assert fig.axes[0].get_ylabel() == "level, dBFS per RBW"


def test_spectrum_floor_reads_the_noise_power_within_the_rbw(tmp_path):
    """White noise of power σ² (complex, E|x|² = σ²) reads σ²·RBW/fs on the spectrum: the level is dBFS per
    RBW. 146 segments of 512 bins: the mean's spread is about 0.01 dB."""
    from sdrx.report.spectrum import capture_spectrum, spectrum_resolution

    fs, sigma2 = 250e3, 1e-6
    rng = np.random.default_rng(11)
    x = np.sqrt(sigma2 / 2) * (rng.standard_normal(75000) + 1j * rng.standard_normal(75000))
    path = tmp_path / "noise.sigmf-meta"
    with open_writer(path, fs=fs, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
        w.write(x.astype(np.complex64))
    from sdrx.capture import open_capture

    _f, level = capture_spectrum(open_capture(path), 500.0)
    r = spectrum_resolution(fs, 500.0)
    mean_db = 10 * np.log10(np.mean(10 ** (level / 10)))
    assert mean_db == pytest.approx(10 * np.log10(sigma2 * r.rbw_hz / fs), abs=0.05)


def test_image_curve_is_drawn_on_a_fine_grid(monkeypatch):
    """Between the drawn samples the straight segments stay within 0.05 dB of the true response (above
    -100 dB, away from the elliptic stage's notches); report.json's coarse curve (spacing/10 steps near the
    image) missed by several dB."""
    from sdrx.chain import design_chain
    from sdrx.analysis.selectivity import relative_response_db
    from sdrx.report import plots

    got = {}
    draw = plots.image_png
    monkeypatch.setattr(plots, "image_png", lambda designed, *a, **k: got.update(d=np.asarray(designed))
                        or draw(designed, *a, **k))
    rep = build_report("narrow", 1130e3, spacing_hz=9e3, measure=False)
    design = design_chain("narrow")

    def worst(curve):
        o, v = curve[:, 0], curve[:, 1]
        mid = (o[1:] + o[:-1]) / 2
        true = relative_response_db(design, 1130e3, 1130e3 + mid)
        keep = (np.minimum(v[1:], v[:-1]) > -100) & (true > -100)
        return float(np.max(np.abs((v[1:] + v[:-1])[keep] / 2 - true[keep])))

    assert worst(got["d"]) < 0.05
    coarse = np.asarray([r for r in rep.data["designed"]["response"] if r[0] > 450e3], dtype=float)
    assert worst(coarse) > 1.0   # the polygon of the issue


def test_measured_points_below_the_floor_are_marked(monkeypatch):
    """A test carrier reading below the figure's range is drawn on the floor with its own marker and
    legend entry, not as a circle at the floor."""
    from sdrx.report import plots

    figs = []
    save = plots._png
    monkeypatch.setattr(plots, "_png", lambda fig, ctx: figs.append(fig) or save(fig, ctx))
    im = 910e3
    o = im + np.linspace(-27e3, 27e3, 541)
    designed = np.column_stack([o, -40 - 2e-3 * np.abs(o - im) - 1e-7 * (o - im) ** 2])
    measured = [[im, -40.0], [im + 9e3, -60.0], [im + 17e3, -143.3], [im - 18e3, -float("inf")]]
    plots.image_png(designed, measured, im, 9e3, 40.0)
    plots.selectivity_png(designed - [im, 0], [[0.0, 0.0], [18e3, -120.0]], 9e3, {})
    for fig, below, above in ((figs[0], [17.0, -18.0], [0.0, 9.0]), (figs[1], [18.0], [0.0])):
        ax = fig.axes[0]
        bottom = ax.get_ylim()[0]
        tri = [ln for ln in ax.get_lines() if ln.get_marker() == "v" and len(ln.get_xdata())
               and ln.get_label().startswith("measured below")]
        (tri,) = tri
        assert sorted(tri.get_xdata()) == sorted(below) and set(tri.get_ydata()) == {bottom}
        assert tri.get_label() == f"measured below {bottom:g} dB (drawn on the floor)"
        (circ,) = [ln for ln in ax.get_lines() if ln.get_marker() == "o"]
        assert sorted(circ.get_xdata()) == sorted(above) and min(circ.get_ydata()) > bottom
        assert tri.get_label() in [t.get_text() for t in ax.get_legend().get_texts()]


def test_capture_carriers_in_dbm_beside_dbfs(capture, tmp_path):
    """--full-scale-dbm (or the spec's frontend.full_scale_dbm): each carrier in dBm = dBFS + the full scale."""
    path, truth = capture
    plain = build_report("medium", TUNE, capture=path, measure=False)
    assert plain.data["full_scale_dbm"] is None and plain.data["full_scale_from"] is None
    assert all(c["antenna_dbm"] is None and c["detector_dbm"] is None for c in plain.data["carriers"])
    rep = build_report("medium", TUNE, capture=path, measure=False, full_scale_dbm="-10 dBm")
    assert rep.data["full_scale_dbm"] == -10.0 and rep.data["full_scale_from"] == "--full-scale-dbm"
    cars = {c["channel_hz"]: c for c in rep.data["carriers"]}
    for f, a in truth.items():
        c = cars[f]
        assert c["antenna_dbm"] == pytest.approx(c["antenna_dbfs"] - 10.0, abs=1e-9)
        assert c["detector_dbm"] == pytest.approx(c["detector_dbfs"] - 10.0, abs=1e-9)
        assert c["antenna_dbm"] == pytest.approx(20 * np.log10(a) - 10.0, abs=0.01)   # the carrier as made
    write_report(rep, tmp_path / "r")
    _check_html_against_json(tmp_path / "r")
    assert "at antenna, dBm" in (tmp_path / "r" / "report.html").read_text()
    # the spec's own full scale, and the option over it
    spec = {"frontend": {"full_scale_dbm": -20}}
    own = build_report(spec, TUNE, capture=path, measure=False)
    assert (own.data["full_scale_dbm"], own.data["full_scale_from"]) == (-20.0, "chain spec")
    over = build_report(spec, TUNE, capture=path, measure=False, full_scale_dbm=-10)
    assert [c["antenna_dbm"] for c in over.data["carriers"]] == [c["antenna_dbm"] for c in rep.data["carriers"]]
