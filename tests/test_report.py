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


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.keyed = []      # (data-key, text)
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
            self._td = True
            self._buf = ""

    def handle_data(self, data):
        if self._td:
            self._buf += data

    def handle_endtag(self, tag):
        if tag in ("td", "span") and self._td:
            text = self._buf.strip()
            if re.fullmatch(r"[-+]?\d+(\.\d*)?([eE][-+]?\d+)?", text):
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
    # every number in the tables is tagged and equals the JSON value
    assert len(p.numeric_td) == sum(1 for k, t in p.keyed if t != "n/a")
    for key, text in p.keyed:
        v = lookup(data, key)
        if text == "n/a":
            assert v is None, key
        else:
            assert float(text) == v, key
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
