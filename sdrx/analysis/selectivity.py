"""Selectivity and image figures of a chain, designed (from the analog prototypes) and measured.

*Designed* figures come only from the chain design: ``design.rf_response``
(preselector × mixer conversion × every IF stage at ``|f - f_LO|``),
``stage.freq_response`` and ``design.preselector.response``. Nothing here
re-derives a filter.

*Measured* figures run unmodulated test carriers through the actual chain
(:class:`sdrx.run.Receiver`) with the AGC held at a fixed gain and read the
carrier level at the detector: the single-signal selectivity method of
ITU-R SM.332. Each test carrier is a short I/Q capture made in code, centred
between the tuning and the image so that both lie inside it.

Conventions: offsets are RF minus tune, in Hz; responses are in dB relative
to the response at the tuned frequency (0 dB there, negative elsewhere);
rejections are positive dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize

from ..errors import ParameterError
from ..limits import MAX_RF_HZ, MAX_SPACING_HZ, MIN_SPACING_HZ, check_range
from ..units import db20, format_frequency
from . import qfactor

__all__ = [
    "BANDWIDTH_LEVELS_DB",
    "Figures",
    "relative_response_db",
    "band_edges",
    "figures_from_response",
    "designed_figures",
    "stage_responses_db",
    "group_delay_s",
    "q_summary",
    "measure_levels_dbfs",
    "measured_figures",
    "validate_tuning",
]

#: Levels (dB below the response at the tune) at which bandwidths are reported.
BANDWIDTH_LEVELS_DB = (3.0, 6.0, 40.0, 60.0)


@dataclass(frozen=True)
class Figures:
    """Selectivity figures of one chain at one tuning (designed or measured).

    Attributes
    ----------
    method : str
        ``"designed"`` or ``"measured (fast path)"`` etc.
    bandwidth_hz : dict
        ``{"3": w, "6": w, "40": w, "60": w}`` full widths, Hz (None if that
        level is not reached within the search range).
    edges_hz : dict
        ``{"3": (lower_offset, upper_offset), ...}`` offsets of the edges, Hz.
    shape_factor : float or None
        60 dB width over 6 dB width.
    adjacent_rejection_db : dict
        Signed offset in Hz as a string (``"-10000"``) -> rejection, dB.
    image_rejection_db : float
    response : tuple of (offset_hz, db)
    """

    method: str
    bandwidth_hz: dict
    edges_hz: dict
    shape_factor: float | None
    adjacent_rejection_db: dict
    image_rejection_db: float
    response: tuple = field(default=())


def validate_tuning(design, tune_hz, spacing_hz):
    """Check a tuning and channel spacing for the reports; return them as floats.

    Raises
    ------
    ParameterError
        If the tune is not positive, the spacing is not in (0, IF/4], the
        offsets ±3 spacings would reach 0 Hz or the LO, or (low side) the
        image would be at or below 0 Hz.
    """
    f = float(tune_hz)
    d = float(spacing_hz)
    if not math.isfinite(f) or f <= 0:
        raise ParameterError(f"--tune {tune_hz!r}: must be a frequency above 0 Hz")
    check_range(f, "--tune", high=MAX_RF_HZ, unit="Hz")
    check_range(d, "--spacing", MIN_SPACING_HZ, MAX_SPACING_HZ, unit="Hz")
    if not math.isfinite(d) or d <= 0 or d > design.if_hz / 4:
        raise ParameterError(
            f"--spacing {format_frequency(d)}: must be above 0 and at most IF/4 = {format_frequency(design.if_hz / 4)}")
    if f - 3 * d <= 0:
        raise ParameterError(
            f"--tune {format_frequency(f)}: offsets of 3 channel spacings ({format_frequency(3 * d)}) "
            f"would reach 0 Hz; tune above {format_frequency(3 * d)}")
    if design.image_hz(f) <= 0 or design.lo_hz(f) <= 0:
        raise ParameterError(
            f"--tune {format_frequency(f)}: with {design.injection}-side injection and IF "
            f"{format_frequency(design.if_hz)} the LO or image is at or below 0 Hz; tune above "
            f"{format_frequency(2 * design.if_hz)}")
    return f, d


def relative_response_db(design, tune_hz, f_hz):
    """Designed response at RF ``f_hz`` relative to the response at the tune, dB.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    f_hz : float or array_like
        Antenna RF frequencies, Hz.

    Returns
    -------
    ndarray
        ``20·log10(|rf_response(f)| / |rf_response(tune)|)``.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> d = design_chain("medium")
    >>> float(relative_response_db(d, 1e6, [1e6])[0])
    0.0
    """
    f = np.atleast_1d(np.asarray(f_hz, dtype=float))
    ref = design.rf_response(np.array([tune_hz]), tune_hz)[0]
    return db20(design.rf_response(f, tune_hz) / ref)


def band_edges(resp_db, level_db, max_offset_hz, step_hz):
    """Offsets where a response first falls ``level_db`` below 0 dB, each side of 0.

    Parameters
    ----------
    resp_db : callable
        offsets (ndarray, Hz) -> response, dB (0 at offset 0).
    level_db : float
        Positive dB below the centre.
    max_offset_hz : float
        Search no further than this each side.
    step_hz : float
        Grid step of the search; each crossing is then refined with brentq.

    Returns
    -------
    (lower, upper) : tuple of float or None
        Signed offsets (lower < 0 < upper), None on a side that does not
        reach the level.

    Examples
    --------
    >>> band_edges(lambda x: -(x / 1e3) ** 2, 4.0, 10e3, 100.0)
    (-2000.0, 2000.0)
    """
    out = []
    for sign in (-1.0, 1.0):
        n = int(math.ceil(max_offset_hz / step_hz))
        x = sign * step_hz * np.arange(n + 1)
        y = np.asarray(resp_db(x), dtype=float) + level_db
        below = np.nonzero(y <= 0)[0]
        if below.size == 0:
            out.append(None)
            continue
        i = int(below[0])
        if y[i] == 0:
            out.append(float(x[i]))
            continue
        a, b = x[i - 1], x[i]
        g = lambda t: float(np.asarray(resp_db(np.array([t])), dtype=float)[0] + level_db)
        out.append(float(optimize.brentq(g, min(a, b), max(a, b), xtol=1e-6, rtol=1e-12)))
    return tuple(out)


def _key(offset_hz) -> str:
    return str(int(round(offset_hz)))


def figures_from_response(method, resp_db, tune_hz, spacing_hz, image_offset_hz, max_offset_hz,
                          step_hz, response=()):
    """Bandwidths, shape factor, adjacent-channel and image rejection from a response function.

    ``resp_db(offsets)`` gives the response in dB relative to the tune;
    the same routine serves designed and measured figures.
    """
    widths, edges = {}, {}
    for lvl in BANDWIDTH_LEVELS_DB:
        lo, hi = band_edges(resp_db, lvl, max_offset_hz, step_hz)
        k = f"{lvl:g}"
        edges[k] = (lo, hi)
        widths[k] = None if lo is None or hi is None else hi - lo
    sf = None
    if widths["60"] is not None and widths["6"]:
        sf = widths["60"] / widths["6"]
    offs = np.array([-spacing_hz, spacing_hz, -2 * spacing_hz, 2 * spacing_hz])
    adj = {_key(o): float(-v) for o, v in zip(offs, np.asarray(resp_db(offs), dtype=float))}
    image = float(-np.asarray(resp_db(np.array([image_offset_hz])), dtype=float)[0])
    return Figures(method, widths, edges, sf, adj, image, tuple(response))


def _search_range(design, tune_hz, spacing_hz):
    """How far from the tune to look for band edges: below the IF and the LO distance."""
    return min(0.9 * design.if_hz, 0.9 * tune_hz, 100 * spacing_hz)


def response_offsets(design, tune_hz, spacing_hz, per_spacing=40):
    """Offsets of the reported response: ±3 spacings about the tune and about the image."""
    n = 3 * per_spacing
    near = spacing_hz / per_spacing * np.arange(-n, n + 1)
    im = design.image_hz(tune_hz) - tune_hz
    per_im = max(per_spacing // 4, 5)
    around = im + spacing_hz / per_im * np.arange(-3 * per_im, 3 * per_im + 1)
    return np.concatenate([near, around])


def designed_figures(design, tune_hz, spacing_hz=10e3):
    """Designed selectivity figures, referred to RF, for one tuning.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    spacing_hz : float
        Channel spacing, Hz.

    Returns
    -------
    Figures

    Notes
    -----
    Band edges are found on a grid of 1/200 spacing and refined with
    Brent's method on the analog response (exact to 1 µHz).

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> f = designed_figures(design_chain("medium"), 1e6)
    >>> sorted(f.bandwidth_hz)
    ['3', '40', '6', '60']
    """
    tune_hz, spacing_hz = validate_tuning(design, tune_hz, spacing_hz)
    resp = lambda off: relative_response_db(design, tune_hz, tune_hz + np.asarray(off, dtype=float))
    offs = response_offsets(design, tune_hz, spacing_hz)
    curve = tuple((float(o), float(v)) for o, v in zip(offs, resp(offs)))
    return figures_from_response("designed", resp, tune_hz, spacing_hz, design.image_hz(tune_hz) - tune_hz,
                                 _search_range(design, tune_hz, spacing_hz), spacing_hz / 200, curve)


def stage_responses_db(design, tune_hz, offsets_hz):
    """Each stage's own response referred to RF offsets, dB relative to its value at the tune.

    Returns
    -------
    list of (label, ndarray)
        The preselector first (when it has a response), then each IF stage
        evaluated at the IF that the offset mixes to, ``|tune + offset - LO|``.
    """
    f = tune_hz + np.asarray(offsets_hz, dtype=float)
    out = []
    pre = design.preselector
    if pre.kind != "none":
        h = pre.response(f, tune_hz) / pre.response(np.array([tune_hz]), tune_hz)[0]
        out.append((f"preselector ({pre.kind})", db20(h)))
    lo = design.lo_hz(tune_hz)
    f_if = np.abs(f - lo)
    for i, st in enumerate(design.stages, 1):
        h = st.freq_response(f_if) / st.freq_response(np.array([design.if_hz]))[0]
        out.append((f"IF stage {i} ({st.response}, order {st.order})", db20(h)))
    return out


def _phase_delay_derivative(h_fn, f, step_hz):
    """-dφ/dω of a response by central differences of the unwrapped phase."""
    hp = h_fn(f + step_hz / 2)
    hm = h_fn(f - step_hz / 2)
    dphi = np.angle(hp / hm)  # phase difference over one small step, no unwrapping ambiguity
    return -dphi / (2 * math.pi * step_hz)


def group_delay_s(design, tune_hz, offsets_hz, step_hz=1.0):
    """Group delay of the chain across RF offsets, seconds.

    Notes
    -----
    Numerical derivative of the analog responses' phase:
    ``tau = -dφ/dω`` by central differences over ``step_hz`` (1 Hz), the
    phase difference taken as ``angle(H(f+h/2)/H(f-h/2))`` so that no
    unwrapping is needed. The IF stages are differentiated with respect to
    the IF frequency (the envelope delay does not depend on whether the
    mixer inverts the spectrum) and the preselector with respect to RF; the
    delays add.
    """
    f = tune_hz + np.asarray(offsets_hz, dtype=float)
    lo = design.lo_hz(tune_hz)
    f_if = np.abs(f - lo)
    tau = _phase_delay_derivative(design.if_response, f_if, step_hz)
    if design.preselector.kind != "none":
        tau = tau + _phase_delay_derivative(lambda x: design.preselector.response(x, tune_hz), f, step_hz)
    return tau


def q_summary(design, tune_hz, spacing_hz, figures):
    """Loaded Q of each stage and the equivalent single-tuned Q at RF and at the IF.

    Parameters
    ----------
    design : ChainDesign
    tune_hz, spacing_hz : float
    figures : Figures
        Designed figures (for the rejection at one channel spacing).

    Returns
    -------
    dict
        ``stages`` (list of dicts: response, order, centre, design bandwidth,
        ``loaded_q``, and for Butterworth/Chebyshev stages the external Q of
        the end resonators of a coupled-resonator realisation,
        ``end_resonator_q_in``/``end_resonator_q_out``, see
        :mod:`sdrx.chain.ladder`), ``rejection_db`` (the smaller of the two
        rejections at ±1 spacing), ``equivalent_rf``/``equivalent_if`` (exact
        universal resonance curve: the Q of ONE single-tuned circuit at the
        tune / at the IF rejecting ``spacing`` by that much, on the worse,
        upper side) and ``shortcut_rf``/``shortcut_if``
        (``10^(x/20)·f0/(2·spacing)``) with their errors in percent.

    Notes
    -----
    Universal resonance curve (Terman, Radio Engineers' Handbook, McGraw-Hill
    1943, sec. 3; from memory): ``x = 10·log10(1 + Q²rho²)``.
    """
    stages = []
    pre = design.preselector
    if pre.kind == "tracking":
        stages.append({"stage": "preselector", "response": "single_tuned", "order": 1, "f0_hz": tune_hz,
                       "bandwidth_hz": tune_hz / pre.q, "loaded_q": pre.q,
                       "end_resonator_q_in": None, "end_resonator_q_out": None})
    for i, st in enumerate(design.stages, 1):
        ends = st.end_resonator_q
        stages.append({"stage": f"IF {i}", "response": st.response, "order": st.order, "f0_hz": st.f0_hz,
                       "bandwidth_hz": st.bandwidth_hz, "loaded_q": st.loaded_q,
                       "end_resonator_q_in": None if ends is None else ends[0],
                       "end_resonator_q_out": None if ends is None else ends[1]})
    adj = figures.adjacent_rejection_db
    x = min(adj[_key(-spacing_hz)], adj[_key(spacing_hz)])
    out = {"stages": stages, "rejection_db": x, "offset_hz": spacing_hz}
    for where, f0 in (("rf", tune_hz), ("if", design.if_hz)):
        if x > 0 and math.isfinite(x):
            exact = qfactor.q_for_rejection(f0, spacing_hz, x)
            short = qfactor.shortcut_q(f0, spacing_hz, x)
            err = 100.0 * (short / exact - 1.0)
        else:
            exact = short = err = None
        out[f"equivalent_{where}"] = exact
        out[f"shortcut_{where}"] = short
        out[f"shortcut_{where}_error_pct"] = err
    return out


# ----------------------------------------------------------------------------- measured


@dataclass(frozen=True)
class _ToneCapture:
    """Capture info for a test tone made in code (what the Receiver reads from an info)."""

    fs: float
    center_hz: float
    kind: str = "iq"

    @property
    def band_hz(self):
        return (self.center_hz - self.fs / 2, self.center_hz + self.fs / 2)


def tone_capture(design, tune_hz, spacing_hz):
    """Sample rate and centre of the test captures: centred between tune and image.

    Returns
    -------
    _ToneCapture
        ``center = (tune + image)/2`` (the LO), ``fs`` a multiple of 100 kHz
        holding ±(IF + 4 spacings) with 20 % margin.
    """
    center = (tune_hz + design.image_hz(tune_hz)) / 2
    half = design.if_hz + 4 * spacing_hz
    fs = math.ceil(2.4 * half / 1e5) * 1e5
    return _ToneCapture(fs, center)


def measure_levels_dbfs(design, tune_hz, freqs_hz, spacing_hz=10e3, *, path="fast", amplitude=0.1,
                        hold_gain_db=0.0, settle_s=0.04, measure_s=0.05, progress=None):
    """Carrier level at the detector for unmodulated test carriers, AGC held, dBFS.

    Parameters
    ----------
    design : ChainDesign
    tune_hz : float
    freqs_hz : array_like
        RF frequencies of the test carriers (one short run each).
    spacing_hz : float
        Channel spacing (sets the capture rate, see :func:`tone_capture`).
    path : {"fast", "exact"}
    amplitude : float
        Test carrier amplitude, full scale 1 (0.1 = -20 dBFS).
    hold_gain_db : float
        Gain at which the AGC is held.
    settle_s, measure_s : float
        Run ``settle_s`` first (filters and detector settle), then read the
        detector's carrier level over the following ``measure_s``.
    progress : callable, optional
        ``progress(done, total)`` in carriers.

    Returns
    -------
    ndarray
        Mean carrier level at the detector over the measurement window, dBFS
        (the receiver refers it to the antenna: the IF envelope over the
        chain's designed response at the tune, so a carrier on tune of A dBFS
        reads A; relative levels are the selectivity).

    Notes
    -----
    Single-signal method with the AGC held (ITU-R SM.332), free of the
    front end's thermal noise (a strong-signal measurement): one receiver per
    carrier, fed ``settle_s + measure_s`` of the carrier; the level is
    ``rx.stats(settle_s)["carrier_dbfs"]["mean"]``, the mean over the 10 ms
    windows after ``settle_s``.
    """
    from ..run import Receiver

    info = tone_capture(design, tune_hz, spacing_hz)
    fs = info.fs
    n = int(round((settle_s + measure_s) * fs))
    t = np.arange(n) / fs
    freqs = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    out = np.empty(freqs.size)
    for i, f in enumerate(freqs):
        rx = Receiver(design, info, tune_hz, path=path, agc_hold_gain_db=hold_gain_db, thermal_noise=False)
        x = amplitude * np.exp(2j * math.pi * (f - info.center_hz) * t)
        rx.process(x.astype(np.complex64))
        rx.flush()
        level = rx.stats(settle_s=settle_s)["carrier_dbfs"]["mean"]
        out[i] = -math.inf if level is None else level
        if progress is not None:
            progress(i + 1, freqs.size)
    return out


def measured_offsets(design, tune_hz, spacing_hz, designed, points=31):
    """Test-carrier offsets: a grid over ±3 spacings, the designed band edges, ±1/±2 spacings, the image."""
    grid = np.linspace(-3 * spacing_hz, 3 * spacing_hz, points)
    edges = [e for k in designed.edges_hz for e in designed.edges_hz[k] if e is not None]
    adj = [-2 * spacing_hz, -spacing_hz, spacing_hz, 2 * spacing_hz]
    im = design.image_hz(tune_hz) - tune_hz
    around = im + spacing_hz * np.array([-2.0, -1.0, -0.5, 0.5, 1.0, 2.0])
    offs = np.unique(np.concatenate([[0.0], grid, edges, adj, [im], around]))
    keep = np.concatenate([[True], np.diff(offs) > 1e-3])  # drop near-duplicates
    return offs[keep]


def measured_figures(design, tune_hz, spacing_hz, designed, *, path="fast", points=31, progress=None,
                     **measure_kw):
    """Measured selectivity figures by running test carriers through the chain.

    Band edges: a test carrier sits on each designed edge; the measured
    edge is that offset moved by one Newton step along the designed slope,
    ``e + (-x - measured(e)) / slope(e)`` (exact when the measured and
    designed curves differ by a constant near the edge). Rejections are
    measured at their exact offsets. ``response`` holds every measured point.

    Returns
    -------
    Figures
    """
    tune_hz, spacing_hz = validate_tuning(design, tune_hz, spacing_hz)
    offs = measured_offsets(design, tune_hz, spacing_hz, designed, points)
    lv = measure_levels_dbfs(design, tune_hz, tune_hz + offs, spacing_hz, path=path, progress=progress,
                             **measure_kw)
    i0 = int(np.argmin(np.abs(offs)))
    rel = lv - lv[i0]

    def at(o):
        i = int(np.argmin(np.abs(offs - o)))
        return float(rel[i]) if abs(offs[i] - o) <= 1e-3 else float("nan")

    dres = lambda o: relative_response_db(design, tune_hz, tune_hz + np.asarray(o, dtype=float))

    # Newton step on each designed edge
    edges, widths = {}, {}
    for k, (lo, hi) in designed.edges_hz.items():
        lvl = float(k)
        pair = []
        for e in (lo, hi):
            if e is None:
                pair.append(None)
                continue
            h = max(abs(e) * 1e-4, 1.0)
            slope = float((dres([e + h])[0] - dres([e - h])[0]) / (2 * h))
            m = at(e)
            pair.append(e + (-lvl - m) / slope if slope != 0 and math.isfinite(m) else None)
        edges[k] = tuple(pair)
        widths[k] = None if None in pair else pair[1] - pair[0]
    sf = widths["60"] / widths["6"] if widths.get("60") and widths.get("6") else None
    adj = {_key(o): -at(o) for o in (-spacing_hz, spacing_hz, -2 * spacing_hz, 2 * spacing_hz)}
    im = -at(design.image_hz(tune_hz) - tune_hz)
    resp = tuple((float(o), float(v)) for o, v in zip(offs, rel))
    return Figures(f"measured ({path} path)", widths, edges, sf, adj, im, resp)


def if_widths(design, levels_db=(3.0, 6.0)) -> dict:
    """Overall widths of the whole IF chain at each level below its response at the IF, Hz.

    Parameters
    ----------
    design : ChainDesign
    levels_db : sequence of float
        Positive dB below the response at the IF frequency.

    Returns
    -------
    dict
        ``{level_db: width_hz}`` from the product of every IF stage's analog
        response (:meth:`ChainDesign.if_response`), not a stage's nominal
        bandwidth; None where a side does not fall that far within ±IF/2.

    Examples
    --------
    >>> from sdrx.chain import design_chain
    >>> w = if_widths(design_chain("medium"))
    >>> 5e3 < w[3.0] < w[6.0] < 9e3
    True
    """
    f0 = design.if_hz
    ref = abs(design.if_response(np.array([f0]))[0])
    resp = lambda off: db20(np.abs(design.if_response(f0 + np.asarray(off, dtype=float))) / ref)
    out = {}
    for level in levels_db:
        lo, hi = band_edges(resp, float(level), f0 / 2.0, 25.0)
        out[float(level)] = None if lo is None or hi is None else hi - lo
    return out
