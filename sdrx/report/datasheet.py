"""The report's datasheet measurements: sensitivity, audio fidelity and distortion, as JSON and figures.

:func:`datasheet_sections` runs the three measurements of
:mod:`sdrx.analysis.sensitivity`, :mod:`~sdrx.analysis.fidelity` and
:mod:`~sdrx.analysis.distortion` on the chain and returns the
``measured.sensitivity``, ``measured.fidelity`` and ``measured.distortion``
sections of ``report.json`` (numbers rounded as the rest of the report) and
the PNG figures ``sensitivity.png``, ``fidelity.png``, ``distortion.png``.
"""

from __future__ import annotations

import math

import numpy as np

from ..analysis import distortion as dist
from ..analysis import fidelity as fid
from ..analysis import sensitivity as sens
from ..dsp.thermal import kt0_dbm_per_hz
from ..units import format_frequency
from .words import short_name

__all__ = ["datasheet_sections", "METHODS", "SOURCES"]

METHODS = {
    "sensitivity": (
        "a carrier modulated {depth:g} % at {tone:g} Hz, with the front end's thermal noise F*k*T0 per Hz "
        "(kT0 = -174 dBm/Hz at 290 K) added to the test capture at its full rate, run through the chain with "
        "the AGC held at the gain it settles to, at several levels around the prediction; audio S/N = power of "
        "the tone (least-squares fit) over the power of the rest of the audio; the level for {sn:g} dB S/N "
        "from a straight line through S/N against level. Prediction: the envelope detector above threshold, "
        "S/N = m^2*(C/N0)/(2*W), W the post-detection noise bandwidth from the designed antenna-to-IF "
        "response (in-phase noise density) and the audio filters' analog prototypes, referred to the tone; "
        "noise through the image response added"),
    "fidelity": (
        "a carrier modulated {depth:g} % by a tone stepping through the ISO 266 one-third-octave frequencies "
        "(and the predicted -3 dB points), AGC held, no thermal noise; the audio tone's amplitude "
        "(least-squares fit) relative to that at 1 kHz; -3 dB points: the predicted ones moved by one Newton "
        "step along the predicted slope. Prediction: the in-phase sideband response (H(fm) + conj H(-fm))/2 "
        "of the designed antenna-to-IF response times the audio filters' analog Butterworth prototypes; the "
        "audio filters run as bilinear-transform designs at the channel rate, which fall faster than the "
        "prototypes far above their cut-off (about 1 dB more at 10 kHz for a 4.5 kHz, order-4 low-pass)"),
    "distortion": (
        "for each depth a carrier modulated by a tone stepping through the ISO 266 one-third octaves, AGC "
        "held, no thermal noise; THD = sqrt(sum A_k^2, k = 2..10)/A_1 from a joint least-squares fit of the "
        "fundamental and its harmonics below half the audio rate, at the audio output (harmonics above the "
        "audio low-pass count as attenuated by it). Diode detector: no diagonal clipping while "
        "RC <= sqrt(1-m^2)/(2*pi*fm*m), i.e. below fm = sqrt(1-m^2)/(2*pi*RC*m) for each depth"),
}
SOURCES = {
    "sensitivity": ("S. Haykin, Communication Systems, noise in AM receivers using envelope detection (above "
                    "threshold); T0 = 290 K and the noise factor: IEEE Std 100 (noise factor); H. T. Friis, "
                    "'Noise figures of radio receivers', Proc. IRE 32 (1944)"),
    "fidelity": ("universal resonance curve (F. E. Terman, Radio Engineers' Handbook, resonant circuits); "
                 "Butterworth attenuation 10*log10(1+W^(2n)) with the low-pass to band-pass transformation "
                 "(A. I. Zverev, Handbook of Filter Synthesis); ISO 266 preferred frequencies"),
    "distortion": ("diagonal clipping of the diode detector: S. Haykin, Communication Systems, AM envelope "
                   "detection; THD by sine fitting: IEEE Std 1241 (ADC testing, sine-fit methods)"),
}


def _r(v, nd=3):
    return None if v is None or not math.isfinite(v) else round(float(v), nd) + 0.0


def _pairs(rows, nd_x=1, nd_y=3):
    return [[_r(a, nd_x), _r(b, nd_y)] for a, b in rows]


def _sensitivity_json(s, nf_from, fs_from) -> dict:
    return {
        "method": METHODS["sensitivity"].format(depth=s.depth * 100, tone=s.tone_hz, sn=s.sn_db),
        "source": SOURCES["sensitivity"],
        "path": s.path,
        "depth": s.depth,
        "tone_hz": s.tone_hz,
        "sn_db": s.sn_db,
        "level_dbm": _r(s.level_dbm, 2),
        "predicted_dbm": _r(s.predicted_dbm, 2),
        "difference_db": _r(s.difference_db, 2),
        "noise_bandwidth_hz": _r(s.noise_bandwidth_hz, 1),
        "image_noise_db": _r(s.image_noise_db, 4),
        "noise_figure_db": s.noise_figure_db,
        "noise_figure_from": nf_from,
        "kt0_dbm_per_hz": _r(kt0_dbm_per_hz(), 3),
        "noise_added": "F*k*T0 per Hz (a matched 290 K source seen through the noise figure)",
        "full_scale_dbm": s.full_scale_dbm,
        "full_scale_from": fs_from,
        "slope_db_per_db": _r(s.slope_db_per_db, 4),
        "points": _pairs(s.points, 3, 3),
    }


def _fidelity_json(f, design, tune_hz) -> dict:
    lo = min(50.0, min(a for a, _ in f.response))
    hi = max(a for a, _ in f.response)
    grid = np.geomspace(lo, hi, 121)
    curve = fid.predicted_response_db(design, tune_hz, grid)
    diffs = [abs(m - p) for (_, m), (_, p) in zip(f.response, f.predicted) if p >= -20.0]
    return {
        "method": METHODS["fidelity"].format(depth=f.depth * 100),
        "source": SOURCES["fidelity"],
        "path": f.path,
        "depth": f.depth,
        "level_dbfs": f.level_dbfs,
        "reference_hz": fid.REFERENCE_HZ,
        "low_3db_hz": _r(f.low_3db_hz, 1),
        "high_3db_hz": _r(f.high_3db_hz, 1),
        "predicted_low_3db_hz": _r(f.predicted_low_3db_hz, 1),
        "predicted_high_3db_hz": _r(f.predicted_high_3db_hz, 1),
        "max_abs_difference_db_down_to_20": _r(max(diffs), 3) if diffs else None,
        "response": _pairs(f.response),
        "predicted": _pairs(f.predicted),
        "predicted_curve": _pairs(zip(grid.tolist(), curve.tolist())),
    }


def _distortion_json(d) -> dict:
    clip = None
    if d.rc_us is not None:
        clip = {"rc_us": d.rc_us,
                "onset_hz": {k: _r(v, 1) for k, v in d.clipping_onset_hz.items()},
                "limit_rc_us_at_tone": {k: _r(v, 2) for k, v in d.limit_rc_us.items()},
                "formula": "RC <= sqrt(1 - m^2) / (2*pi*fm*m)"}
    deepest = max(d.thd_percent, key=float)
    return {
        "method": METHODS["distortion"],
        "source": SOURCES["distortion"],
        "path": d.path,
        "tone_hz": dist.TONE_HZ,
        "level_dbfs": d.level_dbfs,
        "thd_percent": {k: _r(v, 4) for k, v in d.thd_percent.items()},
        "deepest": float(deepest),
        "thd_vs_frequency": {k: _pairs(v, 1, 4) for k, v in d.thd_vs_frequency.items()},
        "diagonal_clipping": clip,
    }


def _bench_design(design, noise_figure_db, full_scale_dbm=None):
    """The design with the noise figure and full scale the sensitivity runs with, and where each came from."""
    fe = design.frontend
    if noise_figure_db is not None:
        nf, nf_from = float(noise_figure_db), "--noise-figure"
    elif fe.noise_figure_db is not None:
        nf, nf_from = fe.noise_figure_db, "chain spec"
    else:
        nf, nf_from = sens.DEFAULT_NOISE_FIGURE_DB, "report default (the chain spec gives none)"
    if full_scale_dbm is not None:
        fs, fs_from = float(full_scale_dbm), "--full-scale-dbm"
    elif fe.full_scale_dbm is not None:
        fs, fs_from = fe.full_scale_dbm, "chain spec"
    else:
        fs, fs_from = sens.DEFAULT_FULL_SCALE_DBM, "report default (S/N does not depend on it)"
    return sens.with_frontend(design, noise_figure_db=nf, full_scale_dbm=fs), nf_from, fs_from


def datasheet_sections(design, tune_hz: float, spacing_hz: float, *, path: str = "fast", noise_figure_db=None,
                       progress=None, full_scale_dbm=None) -> tuple:
    """Measure sensitivity, fidelity and distortion; return (JSON sections, figures).

    Parameters
    ----------
    design : ChainDesign
    tune_hz, spacing_hz : float
    path : {"fast", "exact"}
    noise_figure_db : float, optional
        Noise figure for the sensitivity (default: the spec's, else
        :data:`sdrx.analysis.sensitivity.DEFAULT_NOISE_FIGURE_DB`).
    full_scale_dbm : float, optional
        ``--full-scale-dbm``: the full scale of the sensitivity runs, dBm (default:
        the spec's, else :data:`sdrx.analysis.sensitivity.DEFAULT_FULL_SCALE_DBM`).
    progress : callable, optional
        ``progress(done, total)`` over the three measurements.

    Returns
    -------
    (dict, dict)
        ``{"sensitivity": ..., "fidelity": ..., "distortion": ...}`` and
        file name -> PNG bytes.
    """
    from . import datasheet_plots as dp

    bench, nf_from, fs_from = _bench_design(design, noise_figure_db, full_scale_dbm)
    step = (lambda k: progress(k, 3)) if progress is not None else (lambda k: None)
    s = sens.measure_sensitivity(bench, tune_hz, path=path, spacing_hz=spacing_hz)
    step(1)
    f = fid.measure_fidelity(design, tune_hz, path=path, spacing_hz=spacing_hz)
    step(2)
    d = dist.measure_distortion(design, tune_hz, path=path, spacing_hz=spacing_hz)
    step(3)
    sec = {"sensitivity": _sensitivity_json(s, nf_from, fs_from), "fidelity": _fidelity_json(f, design, tune_hz),
           "distortion": _distortion_json(d)}
    where = f"{short_name(design.name)}: tuned to {format_frequency(tune_hz)}, {path} path"
    figs = {
        "sensitivity.png": dp.sensitivity_png(sec["sensitivity"], title=f"Sensitivity - {where}"),
        "fidelity.png": dp.fidelity_png(sec["fidelity"], title=f"Audio fidelity, antenna to audio - {where}"),
        "distortion.png": dp.distortion_png(sec["distortion"], title=f"THD against modulating frequency - {where}"),
    }
    return sec, figs
