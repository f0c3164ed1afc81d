"""Selectivity and image report of a chain at one tuning: data, figures, files.

:func:`build_report` gathers the designed figures (from the chain design),
the measured figures (test carriers through :class:`sdrx.run.Receiver`, AGC
held) and, with a capture, the carriers near the tuning and the spectrum;
it returns the JSON-ready data and the PNG figures as bytes.
:func:`write_report` writes ``report.json``, the PNGs and one
self-contained ``report.html`` into a folder, each file atomically.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import OutputError, ParameterError
from ..fileio import check_output, write_folder
from ..limits import MAX_POINTS, MIN_POINTS
from ..units import format_frequency
from ..analysis import selectivity as sel
from ..analysis.agc_figures import measure_agc
from .words import short_name, stage_labels

__all__ = ["Report", "build_report", "write_report", "report_files", "GROUP_DELAY_METHOD"]

GROUP_DELAY_METHOD = ("numerical derivative of the analog responses' phase: central difference over 1 Hz, "
                      "IF stages with respect to the IF frequency, preselector with respect to RF, summed")
MEASURE_METHOD = ("single-signal method (ITU-R SM.332): one unmodulated test carrier at a time, AGC held, "
                  "carrier level at the detector, relative to the level of a carrier at the tune")
Q_METHOD = ("one single-tuned circuit, exact universal resonance curve 10*log10(1+Q^2 rho^2) at "
            "tune+spacing (worse side), rejection = smaller of the two at +-1 spacing; shortcut "
            "Q = 10^(x/20)*f0/(2*spacing)")

#: Every file a report may hold (the figures depend on --capture).
KNOWN_FILES = ("report.json", "report.html", "selectivity.png", "stages.png", "image.png", "group_delay.png",
               "spectrum.png")

#: Points of the designed curves drawn in selectivity.png and image.png (200 per spacing over ±3 spacings).
FIGURE_POINTS = 1201

#: Carriers within this many channel spacings of the tune are listed (and any near the image).
NEAR_CHANNELS = 5


@dataclass(frozen=True)
class Report:
    """A built report: ``data`` (JSON-ready dict) and ``figures`` (file name -> PNG bytes)."""

    data: dict
    figures: dict


def _hz(v):
    return None if v is None or not math.isfinite(v) else round(float(v), 1) + 0.0


def _db(v):
    return None if v is None or not math.isfinite(v) else round(float(v), 3) + 0.0


def _q(v):
    return None if v is None or not math.isfinite(v) else round(float(v), 2) + 0.0


def _figures_json(fig, response_offsets_fmt=True) -> dict:
    return {
        "method": fig.method,
        "bandwidth_hz": {k: _hz(v) for k, v in fig.bandwidth_hz.items()},
        "edges_hz": {k: [_hz(a), _hz(b)] for k, (a, b) in fig.edges_hz.items()},
        "shape_factor": None if fig.shape_factor is None else round(fig.shape_factor, 4),
        "adjacent_rejection_db": {k: _db(v) for k, v in fig.adjacent_rejection_db.items()},
        "image_rejection_db": _db(fig.image_rejection_db),
        "response": [[_hz(o), _db(v)] for o, v in fig.response],
    }


def _diff(a, b, rnd):
    return None if a is None or b is None else rnd(a - b)


def _difference(meas: dict, des: dict, designed_fn) -> dict:
    out = {
        "bandwidth_hz": {k: _diff(meas["bandwidth_hz"][k], des["bandwidth_hz"][k], _hz) for k in des["bandwidth_hz"]},
        "shape_factor": (None if meas["shape_factor"] is None or des["shape_factor"] is None
                         else round(meas["shape_factor"] - des["shape_factor"], 4)),
        "adjacent_rejection_db": {k: _diff(meas["adjacent_rejection_db"][k], des["adjacent_rejection_db"][k], _db)
                                  for k in des["adjacent_rejection_db"]},
        "image_rejection_db": _diff(meas["image_rejection_db"], des["image_rejection_db"], _db),
    }
    # each measured point against the designed response at the same offset
    offs = np.array([o for o, _ in meas["response"]], dtype=float)
    dvals = designed_fn(offs)
    out["response"] = [[o, _db(v - d)] for (o, v), d in zip(meas["response"], dvals)]
    within = [abs(v - d) for (o, v), d in zip(meas["response"], dvals) if d >= -80.0]
    out["max_abs_db_down_to_80"] = _db(max(within)) if within else None
    return out


def _carriers(reader, design, tune_hz, spacing_hz, start_s, duration_s, progress, full_scale_dbm=None):
    from ..analysis.survey import round_to_resolution, survey_carriers
    from ..run import levels_dbm

    found = survey_carriers(reader, spacing_hz=spacing_hz, start_s=start_s, duration_s=duration_s,
                            progress=progress)
    image = design.image_hz(tune_hz)
    rows = []
    for c in found:
        # each carrier where it is (its interpolated line), not at the channel of the grid it was found on
        f = c.line_hz
        off = f - tune_hz
        on_image = abs(f - image) <= spacing_hz / 2
        if abs(off) > NEAR_CHANNELS * spacing_hz + spacing_hz / 2 and abs(f - image) > spacing_hz * 1.5:
            continue
        rel = float(sel.relative_response_db(design, tune_hz, [f])[0])
        dbm = levels_dbm({"antenna": _db(c.level_dbfs), "detector": _db(c.level_dbfs + rel)}, full_scale_dbm) or {}
        rows.append({
            "freq_hz": _hz(round_to_resolution(f, c.offset_resolution_hz)),
            "channel_hz": _hz(c.freq_hz),
            "offset_hz": _hz(round_to_resolution(off, c.offset_resolution_hz)),
            "antenna_dbfs": _db(c.level_dbfs),
            "selectivity_db": _db(rel),
            "detector_dbfs": _db(c.level_dbfs + rel),
            "antenna_dbm": dbm.get("antenna"),
            "detector_dbm": dbm.get("detector"),
            "tuned": abs(off) <= spacing_hz / 2,
            "image": bool(on_image),
            "within_two_channels": bool(spacing_hz / 2 < abs(off) <= 2 * spacing_hz + spacing_hz / 2),
        })
    rows.sort(key=lambda r: (r["offset_hz"], r["freq_hz"]))
    return rows


def build_report(chain, tune_hz, *, spacing_hz=10e3, capture=None, path="fast", measure=True, points=31,
                 start_s=0.0, duration_s=None, progress=None, capture_kw=None, correct=None, ppm=None,
                 noise_figure_db=None, full_scale_dbm=None) -> Report:
    """Build the selectivity and image report of a chain at one tuning.

    Parameters
    ----------
    chain : str, dict, ChainSpec or ChainDesign
        Preset name, TOML path, spec or design.
    tune_hz : float or str
        The tuned carrier ("1130k").
    spacing_hz : float or str
        Channel spacing.
    capture : str or Path, optional
        A capture to survey: carriers near the tuning and its spectrum.
    path : {"fast", "exact"}
        Execution path of the measured figures.
    measure : bool
        Run the measured figures (test carriers through the chain).
    points : int
        Number of grid offsets of the measured curve across ±3 spacings.
    start_s, duration_s : float
        Excerpt of the capture.
    progress : callable, optional
    capture_kw : dict, optional
        ``datatype``, ``fs``, ``center_hz`` for :func:`sdrx.capture.open_capture`.
    correct, ppm : optional
        Capture corrections (``--correct``, ``--ppm``): the carriers and the
        spectrum are those of the corrected capture.
    noise_figure_db : float, optional
        Noise figure of the measured sensitivity (default: the spec's
        ``frontend.noise_figure_db``, else 10 dB); see :mod:`sdrx.report.datasheet`.
    full_scale_dbm : float or str, optional
        ``--full-scale-dbm``: antenna power of a full-scale carrier, dBm (overrides the
        spec's ``frontend.full_scale_dbm``): the capture's carriers in dBm beside dBFS,
        and the full scale of the measured sensitivity.

    Returns
    -------
    Report

    Raises
    ------
    ParameterError
        Bad tuning or spacing; a tuning outside the capture's band.
    CaptureError
        From the capture reader.

    Notes
    -----
    The steps, in order: check the options (:func:`_checked_options`), open
    the capture (:func:`_opened_capture`), the designed figures
    (:func:`_designed_section`), the measured ones (:func:`_measured_section`),
    the figures of the design (:func:`_design_figures`) and, with a capture,
    its carriers and spectrum (:func:`_add_capture`).
    """
    from ..chain import design_chain

    from ..chain.spec import full_scale_override

    design = design_chain(chain)
    tune, spacing = _checked_options(design, tune_hz, spacing_hz, path, points)
    fs_dbm = full_scale_override(full_scale_dbm)
    reader, plan = _opened_capture(capture, capture_kw, tune, spacing, correct, ppm, start_s, duration_s)
    designed = sel.designed_figures(design, tune, spacing)
    des = _designed_section(design, tune, spacing, designed)
    meas, datasheet_figs = None, {}
    if measure:
        meas, datasheet_figs = _measured_section(design, tune, spacing, designed, des, path, points,
                                                 noise_figure_db, progress, fs_dbm)
    data = _report_head(design, tune, spacing, des, meas)
    title = f"{short_name(design.name)}: tuned to {format_frequency(tune)}, IF {format_frequency(design.if_hz)}"
    figs = _design_figures(design, tune, spacing, designed, des, meas, title)
    if reader is not None:
        _add_capture(data, figs, reader, plan, design, tune, spacing, designed, start_s, duration_s, title,
                     fs_dbm)
    figs.update(datasheet_figs)
    data["figures"] = sorted(figs)
    return Report(data, figs)


def _checked_options(design, tune_hz, spacing_hz, path, points):
    """The tuning and spacing in Hz, checked against the design; ``path`` and ``points`` checked."""
    from ..units import parse_frequency

    tune = parse_frequency(tune_hz, "--tune")
    spacing = parse_frequency(spacing_hz, "--spacing")
    tune, spacing = sel.validate_tuning(design, tune, spacing)
    if path not in ("fast", "exact"):
        raise ParameterError(f"--path {path!r}: choose fast or exact")
    if isinstance(points, bool) or not isinstance(points, int) or not MIN_POINTS <= points <= MAX_POINTS:
        raise ParameterError(f"--points {points!r}: must be a whole number from {MIN_POINTS} to {MAX_POINTS} "
                             "(each point is a receiver run)")
    return tune, spacing


def _opened_capture(capture, capture_kw, tune, spacing, correct, ppm, start_s, duration_s):
    """The capture's corrected reader and its corrections plan, or ``(None, None)`` without a capture."""
    if capture is None:
        if correct not in (None, "none", ()) or ppm is not None:
            raise ParameterError("--correct/--ppm: only apply with --capture CAPTURE")
        return None, None
    from ..capture import open_capture
    from ..capture.correct import corrected_reader, plan_corrections

    reader = open_capture(capture, **(capture_kw or {}))
    lo_b, hi_b = reader.info.band_hz
    if not (lo_b < tune < hi_b):
        raise ParameterError(
            f"--tune {format_frequency(tune)}: outside the band of capture {reader.info.path} "
            f"({format_frequency(lo_b)} to {format_frequency(hi_b)})")
    plan = plan_corrections(reader, correct, ppm=ppm, spacing_hz=spacing, start_s=start_s, duration_s=duration_s)
    return corrected_reader(reader, plan), plan


def _designed_response(design, tune):
    """Designed response relative to the tune, as a function of offsets (Hz) from it."""
    return lambda o: sel.relative_response_db(design, tune, tune + np.asarray(o, dtype=float))


def _designed_section(design, tune, spacing, designed) -> dict:
    """The ``designed`` block: figures, Q summary and group delay."""
    des = _figures_json(designed)
    des["q"] = _q_json(sel.q_summary(design, tune, spacing, designed))
    des["group_delay"] = _group_delay_json(design, tune, *_group_delay_curve(design, tune, spacing, designed))
    return des


def _q_json(qs) -> dict:
    """The Q summary rounded for ``report.json``, with its method."""
    stages = [{"stage": s["stage"], "response": s["response"], "order": s["order"], "f0_hz": _hz(s["f0_hz"]),
               "bandwidth_hz": _hz(s["bandwidth_hz"]), "loaded_q": _q(s["loaded_q"]),
               "end_resonator_q_in": None if s["end_resonator_q_in"] is None else _q(s["end_resonator_q_in"]),
               "end_resonator_q_out": None if s["end_resonator_q_out"] is None else _q(s["end_resonator_q_out"])}
              for s in qs["stages"]]
    out = {"stages": stages, "rejection_db": _db(qs["rejection_db"]), "offset_hz": _hz(qs["offset_hz"])}
    for k in ("equivalent_rf", "equivalent_if", "shortcut_rf", "shortcut_if", "shortcut_rf_error_pct",
              "shortcut_if_error_pct"):
        out[k] = _q(qs[k])
    out["method"] = Q_METHOD
    return out


def _group_delay_curve(design, tune, spacing, designed):
    """Offsets (1.25 times the −6 dB half-width each side, 201 points), group delay there, −3 dB edges."""
    e6 = designed.edges_hz["6"]
    span = 1.25 * max(abs(e6[0] or spacing / 2), abs(e6[1] or spacing / 2))
    offs = np.linspace(-span, span, 201)
    return offs, sel.group_delay_s(design, tune, offs), designed.edges_hz["3"]


def _group_delay_json(design, tune, offs, gd, e3) -> dict:
    """Group delay at the tune, its variation within the −3 dB band and the curve, seconds."""
    lo = e3[0] if e3[0] is not None else -np.inf
    hi = e3[1] if e3[1] is not None else np.inf
    in3 = (offs >= lo) & (offs <= hi)
    return {
        "method": GROUP_DELAY_METHOD,
        "at_tune_s": round(float(sel.group_delay_s(design, tune, [0.0])[0]), 9),
        "variation_in_3db_s": round(float(gd[in3].max() - gd[in3].min()), 9) if in3.any() else None,
        "response": [[_hz(o), round(float(t), 9)] for o, t in zip(offs, gd)],
    }


def _measured_section(design, tune, spacing, designed, des, path, points, noise_figure_db, progress,
                      full_scale_dbm=None):
    """The ``measured`` block (test carriers, AGC, datasheet sections) and the datasheet figures."""
    from .datasheet import datasheet_sections

    measured = sel.measured_figures(design, tune, spacing, designed, path=path, points=points, progress=progress)
    meas = _figures_json(measured)
    meas["path"] = path
    meas["method_detail"] = MEASURE_METHOD
    meas["difference"] = _difference(meas, des, _designed_response(design, tune))
    meas["agc"] = measure_agc(design, tune, path)
    sections, figs = datasheet_sections(design, tune, spacing, path=path, noise_figure_db=noise_figure_db,
                                        progress=progress, full_scale_dbm=full_scale_dbm)
    meas.update(sections)
    return meas, figs


def _report_head(design, tune, spacing, des, meas) -> dict:
    """The report's data: the tuning's frequencies, the designed and measured blocks; no capture yet."""
    return {
        "chain": design.name,
        "tune_hz": _hz(tune),
        "if_hz": _hz(design.if_hz),
        "lo_hz": _hz(design.lo_hz(tune)),
        "image_hz": _hz(design.image_hz(tune)),
        "spacing_hz": _hz(spacing),
        "injection": design.injection,
        "designed": des,
        "measured": meas,
        "capture": None,
        "carriers": None,
    }


def _design_figures(design, tune, spacing, designed, des, meas, title) -> dict:
    """Selectivity, each stage, image, group delay and (measured) AGC figures: name -> PNG bytes."""
    from . import plots

    dres = _designed_response(design, tune)
    image = design.image_hz(tune)
    mresp = meas["response"] if meas else None
    figs = {}
    figs["selectivity.png"] = plots.selectivity_png(_fine_curve(dres, 0.0, spacing), mresp, spacing,
                                                    des["adjacent_rejection_db"],
                                                    title=f"Overall selectivity referred to RF - {title}")
    st_offs = np.linspace(-3 * spacing, 3 * spacing, 241)
    curves = [(label, db) for label, (_config, db) in zip(stage_labels(design),
                                                          sel.stage_responses_db(design, tune, st_offs))]
    figs["stages.png"] = plots.stages_png(st_offs, curves, dres(st_offs), spacing,
                                          title=f"Each stage referred to RF - {title}")
    figs["image.png"] = plots.image_png(_fine_curve(dres, image - tune, spacing), mresp, image - tune, spacing,
                                        des["image_rejection_db"],
                                        title=f"Image region ({format_frequency(image)}) - {title}")
    gd_offs, gd, e3 = _group_delay_curve(design, tune, spacing, designed)
    figs["group_delay.png"] = plots.group_delay_png(gd_offs, gd, e3, title=f"Group delay - {title}")
    if meas:
        a = meas["agc"]
        figs["agc.png"] = plots.agc_png(a["characteristic"], a["range_db"], a["range_dbfs"], a["reference_dbfs"],
                                        title=f"AGC characteristic - {title}")
    return figs


def _fine_curve(dres, centre_hz, spacing):
    """The designed response on a fine grid for a figure: ±3 spacings about ``centre_hz``, 200 points per
    spacing (report.json keeps its coarser curve)."""
    offs = centre_hz + np.linspace(-3 * spacing, 3 * spacing, FIGURE_POINTS)
    return np.column_stack([offs, dres(offs)])


def _add_capture(data, figs, reader, plan, design, tune, spacing, designed, start_s, duration_s, title,
                 full_scale_dbm=None):
    """Add the capture, its corrections, its full scale and the carriers near the tuning to ``data``, its
    spectrum to ``figs``."""
    from ..receiver.receiver import station_full_scale

    scale = station_full_scale(design, full_scale_dbm)
    data["capture"] = reader.info.to_json()
    data["corrections"] = plan.to_json()
    data["full_scale_dbm"] = scale
    data["full_scale_from"] = (None if scale is None else
                               "--full-scale-dbm" if full_scale_dbm is not None else "chain spec")
    data["carriers"] = _carriers(reader, design, tune, spacing, start_s, duration_s, None, scale)
    figs["spectrum.png"], resolution = _spectrum_figure(reader, design, tune, spacing, designed, data["carriers"],
                                                        start_s, duration_s, title)
    data["spectrum"] = resolution.to_json()


def _spectrum_figure(reader, design, tune, spacing, designed, carriers, start_s, duration_s, title):
    """The capture's spectrum around the tuning (and around the image when the capture holds it).

    Returns the PNG bytes and the spectrum's :class:`~sdrx.report.spectrum.Resolution`.
    """
    from . import plots
    from .spectrum import capture_spectrum, spectrum_resolution

    image = design.image_hz(tune)
    e6 = designed.edges_hz["6"]
    f, lv = capture_spectrum(reader, spacing / 20, start_s=start_s, duration_s=duration_s)
    resolution = spectrum_resolution(reader.info.fs, spacing / 20)
    near = np.abs(f - tune) <= (NEAR_CHANNELS + 0.5) * spacing
    nim = np.abs(f - image) <= 3.5 * spacing
    cars = [(c["freq_hz"], c["antenna_dbfs"]) for c in carriers]
    png = plots.spectrum_png(
        f[near], lv[near], tune, (tune + e6[0], tune + e6[1]) if None not in e6 else (tune, tune), image, cars,
        image_freqs_hz=f[nim] if nim.sum() > 4 else None, image_level_dbfs=lv[nim] if nim.sum() > 4 else None,
        title=f"Capture spectrum - {title}", rbw_hz=resolution.rbw_hz, bin_hz=resolution.bin_hz)
    return png, resolution


def report_files(out_dir, figures) -> list:
    """The files :func:`write_report` writes into ``out_dir``."""
    d = Path(out_dir)
    return [d / "report.json", d / "report.html"] + [d / name for name in sorted(figures)]


def write_report(report: Report, out_dir, *, force=False, inputs=()) -> list:
    """Write ``report.json``, the PNG figures and ``report.html`` into ``out_dir``.

    The folder is created when missing (its parent must exist). Every file
    is checked before anything is written (existing files need ``force``)
    and each is written atomically.

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputError
        Output folder's parent missing, the folder is a file, or a file exists
        without ``force``.
    """
    from .html import render_html

    d = Path(out_dir)
    if d.exists() and not d.is_dir():
        raise OutputError(f"-o {d}: exists and is not a folder")
    parent = d.parent if str(d.parent) else Path(".")
    if not parent.is_dir():
        raise OutputError(f"-o {d}: folder {parent} does not exist")
    files = report_files(d, report.figures)
    if d.is_dir():
        for p in files:
            check_output(p, inputs=inputs, force=force, option="-o")
    text = json.dumps(report.data, indent=1, allow_nan=False) + "\n"
    page = render_html(report.data, report.figures)
    payload = {p.name: None for p in files}
    payload.update({"report.json": text.encode(), "report.html": page.encode()})
    payload.update(report.figures)
    # figures of an earlier report that this one does not draw (spectrum.png without --capture)
    stale = [d / name for name in KNOWN_FILES if name not in payload and (d / name).is_file()]
    written = write_folder(d, payload, head="report.html", retire=stale)
    return written
