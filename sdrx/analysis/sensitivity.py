"""Sensitivity: the antenna level of a 30 %, 1 kHz AM carrier that gives 20 dB audio S/N.

*Measured*: the chain runs with its front end's thermal noise F·k·T0
(:mod:`sdrx.dsp.thermal`) at several carrier levels around the prediction;
at each, the audio S/N is the power of the 1 kHz tone (least-squares fit)
over the power of everything else in the audio (noise, and any distortion);
a straight line through S/N (dB) against level (dBm) gives the level for the
wanted S/N. AGC held at the gain the loop settles to for each level.

*Predicted*: the envelope detector above threshold,

    S/N = m²·(C/N0) / (2·W)

(Haykin, Communication Systems, noise in AM receivers, envelope detection
above threshold; the coherent detector gives the same), with
N0 = F·k·T0 (kT0 = −174 dBm/Hz at 290 K) and W the post-detection noise
bandwidth. W is computed from the design, not taken as the audio cut-off:
the noise at the detector is the in-phase part of the IF noise, whose
density at audio frequency f is N0·(|H(f)|² + |H(−f)|²)/2 for the designed
antenna-to-IF response H (relative to the tune), and the audio filters
(the analog Butterworth prototypes of ``[audio]``) shape it further; the
tone passes with the in-phase sideband response G = (H(fm) + conj H(−fm))/2
and the audio filters at fm. So

    W = ∫₀^∞ (|H(f)|² + |H(−f)|²)/2 · |Ha(f)|² df / (|G(fm)|²·|Ha(fm)|²),

which is the audio bandwidth for brick-wall filters. Noise arriving through
the image response adds the same integral over the image's response; its
share (``image_noise_db``) is added to the prediction (a fraction of a
hundredth of a dB behind a tracking preselector).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from ..dsp.thermal import thermal_density_dbm_per_hz
from ..errors import ParameterError
from .amtest import harmonic_fit, run_am_test, segment

__all__ = ["Sensitivity", "noise_bandwidth_hz", "predicted_sensitivity_dbm", "measure_sensitivity",
           "audio_response", "with_frontend", "DEFAULT_NOISE_FIGURE_DB", "DEFAULT_FULL_SCALE_DBM"]

#: Noise figure used when the chain spec gives none (a broadcast receiver's front end, common practice).
DEFAULT_NOISE_FIGURE_DB = 10.0
#: Full scale used when the spec gives none; S/N does not depend on it (the chain is linear up to the detector).
DEFAULT_FULL_SCALE_DBM = 0.0
#: Carrier levels measured, dB about the prediction.
LEVEL_OFFSETS_DB = (-4.0, 0.0, 4.0)


def audio_response(design, f_hz):
    """The audio filters' analog Butterworth prototypes at ``f_hz`` (complex, high-pass × low-pass).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> round(float(20 * np.log10(abs(audio_response(design_chain("medium"), [4500.0])[0]))), 2)
    -3.01
    """
    from scipy import signal

    au = design.audio
    w = 2 * math.pi * np.atleast_1d(np.asarray(f_hz, dtype=float))
    bh, ah = signal.butter(au.highpass_order, 2 * math.pi * au.highpass_hz, btype="highpass", analog=True)
    bl, al = signal.butter(au.lowpass_order, 2 * math.pi * au.lowpass_hz, btype="lowpass", analog=True)
    return signal.freqs(bh, ah, w)[1] * signal.freqs(bl, al, w)[1]


def _relative(design, tune_hz, centre_hz, f):
    ref = design.rf_response(np.array([tune_hz]), tune_hz)[0]
    return design.rf_response(centre_hz + f, tune_hz) / ref


def noise_bandwidth_hz(design, tune_hz: float, tone_hz: float = 1000.0, *, image: bool = False) -> float:
    """Post-detection noise bandwidth W of the chain (see the module notes), Hz.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    tone_hz : float
        The modulating frequency the noise is referred to.
    image : bool
        The same integral for the noise reaching the detector through the
        image response (still referred to the wanted tone).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> round(noise_bandwidth_hz(design_chain("medium"), 1e6))
    2991
    """
    top = min(0.5 * design.audio.rate_hz, 4.0 * design.audio.lowpass_hz)
    f = np.linspace(0.0, top, int(top) * 2 + 1)
    centre = design.image_hz(tune_hz) if image else tune_hz
    hp, hm = _relative(design, tune_hz, centre, f), _relative(design, tune_hz, centre, -f)
    ha2 = np.abs(audio_response(design, f)) ** 2
    dens = 0.5 * (np.abs(hp) ** 2 + np.abs(hm) ** 2) * ha2
    g = _relative(design, tune_hz, tune_hz, np.array([tone_hz, -tone_hz]))
    g_tone = 0.5 * (g[0] + np.conj(g[1]))
    ref = abs(g_tone) ** 2 * float(np.abs(audio_response(design, [tone_hz])[0]) ** 2)
    return float(np.trapezoid(dens, f) / ref)


def predicted_sensitivity_dbm(noise_figure_db: float, depth: float, w_hz: float, sn_db: float = 20.0,
                              image_noise_db: float = 0.0) -> float:
    """Carrier level (dBm) for ``sn_db`` audio S/N from S/N = m²·(C/N0)/(2·W), N0 = F·k·T0.

    Examples
    --------
    >>> round(predicted_sensitivity_dbm(10.0, 0.3, 3000.0), 1)   # C/N0 = 68.2 dB-Hz
    -95.8
    """
    c_n0 = sn_db + 10 * math.log10(2 * w_hz) - 20 * math.log10(depth)
    return c_n0 + thermal_density_dbm_per_hz(noise_figure_db) + image_noise_db


@dataclass(frozen=True)
class Sensitivity:
    """Measured and predicted sensitivity of a chain (levels in dBm at the antenna)."""

    level_dbm: float | None
    predicted_dbm: float
    sn_db: float
    depth: float
    tone_hz: float
    noise_figure_db: float
    full_scale_dbm: float
    noise_bandwidth_hz: float
    image_noise_db: float
    points: tuple            # (level_dbm, measured S/N dB)
    slope_db_per_db: float | None
    path: str

    @property
    def difference_db(self):
        return None if self.level_dbm is None else self.level_dbm - self.predicted_dbm


def with_frontend(design, *, noise_figure_db=None, full_scale_dbm=None):
    """The design with its [frontend] noise figure and/or full scale replaced (others kept)."""
    from ..chain import design_chain

    fe = design.frontend
    if noise_figure_db is not None:
        fe = dataclasses.replace(fe, noise_figure_db=float(noise_figure_db))
    if full_scale_dbm is not None:
        fe = dataclasses.replace(fe, full_scale_dbm=float(full_scale_dbm))
    if fe == design.frontend:
        return design
    return design_chain(dataclasses.replace(design.spec, frontend=fe))


def _sn_db(audio, fs, tone_hz):
    amps, rest = harmonic_fit(audio, fs, tone_hz, 1)
    return 10 * math.log10((amps[0] ** 2 / 2) / max(rest, 1e-300))


def measure_sensitivity(design, tune_hz: float, *, path: str = "fast", spacing_hz: float = 10e3, depth: float = 0.3,
                        tone_hz: float = 1000.0, sn_db: float = 20.0, measure_s: float = 0.5,
                        offsets_db=LEVEL_OFFSETS_DB, progress=None) -> Sensitivity:
    """Find the carrier level for ``sn_db`` audio S/N by running the chain with its thermal noise.

    Parameters
    ----------
    design : ChainDesign
        Must give ``frontend.noise_figure_db`` and ``frontend.full_scale_dbm``
        (see :func:`with_frontend`).
    tune_hz : float
    path : {"fast", "exact"}
    spacing_hz : float
    depth, tone_hz : float
        The test modulation (30 % at 1 kHz: the common bench signal).
    sn_db : float
        The wanted audio S/N.
    measure_s : float
        Audio measured per level, after 0.1 s of settling.
    offsets_db : sequence of float
        Levels run, dB about the prediction; when the fitted level lies
        outside them, the run is repeated around the fitted level (twice at most).
    progress : callable, optional
        ``progress(done, total)`` in runs.

    Returns
    -------
    Sensitivity

    Raises
    ------
    ParameterError
        When the design lacks a noise figure or a full scale.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> d = with_frontend(design_chain("medium"), noise_figure_db=10.0, full_scale_dbm=-10.0)
    >>> s = measure_sensitivity(d, 1e6, measure_s=0.2)
    >>> round(s.predicted_dbm, 1), abs(s.difference_db) < 0.5
    (-95.7, True)
    """
    fe = design.frontend
    if fe.noise_figure_db is None or fe.full_scale_dbm is None:
        raise ParameterError("sensitivity: the chain needs frontend.noise_figure_db and frontend.full_scale_dbm")
    w = noise_bandwidth_hz(design, tune_hz, tone_hz)
    w_im = noise_bandwidth_hz(design, tune_hz, tone_hz, image=True)
    im_db = 10 * math.log10(1 + w_im / w)
    pred = predicted_sensitivity_dbm(fe.noise_figure_db, depth, w, sn_db, im_db)
    seg = segment(tone_hz, depth, settle_s=0.05, measure_s=measure_s)
    points = {}
    centre = pred
    level = None
    slope = None
    total = 3 * len(offsets_db)
    for _round in range(3):
        for off in offsets_db:
            lv = round(centre + off, 3)
            if lv in points:
                continue
            audio, fa = run_am_test(design, tune_hz, [seg], level_dbfs=lv - fe.full_scale_dbm, path=path,
                                    spacing_hz=spacing_hz, thermal_noise=True)
            points[lv] = _sn_db(audio[0], fa, tone_hz)
            if progress is not None:
                progress(len(points), total)
        x = np.array(sorted(points))
        y = np.array([points[v] for v in x])
        near = np.argsort(np.abs(y - sn_db))[:len(offsets_db)]
        slope, icpt = np.polyfit(x[near], y[near], 1)
        level = (sn_db - icpt) / slope if slope > 0 else None
        if level is not None and x[near].min() <= level <= x[near].max():
            break
        centre = level if level is not None else centre + 6.0
    if progress is not None:
        progress(total, total)
    pts = tuple((float(v), float(points[v])) for v in sorted(points))
    return Sensitivity(None if level is None else float(level), float(pred), float(sn_db), float(depth),
                       float(tone_hz), float(fe.noise_figure_db), float(fe.full_scale_dbm), w, im_db, pts,
                       None if slope is None else float(slope), path)


