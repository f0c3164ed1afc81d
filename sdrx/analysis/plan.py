"""Frequency plan of a superheterodyne over a band: LO, images, spurious responses, required Q.

The plan needs no chain: it is the arithmetic of the mixer and of tuned
circuits. For every channel ``f`` of the band grid (``lo + k·spacing``):

- high-side injection: ``f_LO = f + IF``, image ``f + 2·IF``;
  low-side injection: ``f_LO = f - IF``, image ``f - 2·IF``;
- mixer spurious responses: every RF frequency with
  ``m·f_LO + n·f_RF = IF`` for integers ``|m| <= 3``, ``1 <= |n| <= 3``,
  other than the wanted channel and the image (the two ``|m| = |n| = 1``
  products) and inside the band;
- half-IF spur: the ``|m| = |n| = 2`` response between the tuning and the LO,
  ``f_LO -/+ IF/2`` (``f + IF/2`` for high side, ``f - IF/2`` for low side).

With a rejection target, :func:`q_requirements` gives the loaded Q per
circuit for 1–4 identical single-tuned and 1–2 critically coupled
double-tuned stages at the bottom and top of the band and at the IF.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ..errors import ParameterError
from ..limits import (MAX_IF_HZ, MAX_PLAN_CHANNELS, MAX_RF_HZ, MAX_SPACING_HZ, MIN_IF_HZ, MIN_SPACING_HZ,
                      check_range)
from ..units import format_frequency, parse_db, parse_frequency, to_float
from ..chain.design import image_frequency, lo_frequency  # the one definition of the LO plan
from . import qfactor

__all__ = [
    "PRACTICAL_LOADED_Q",
    "SINGLE_STAGES",
    "DOUBLE_STAGES",
    "Spur",
    "ChannelPlan",
    "QRequirement",
    "QTable",
    "FrequencyPlan",
    "parse_band",
    "channel_grid",
    "lo_frequency",
    "image_frequency",
    "half_if_spur",
    "spurious_responses",
    "q_requirements",
    "frequency_plan",
    "capacitance_verdict",
    "USUAL_CAPACITANCE_RATIO",
    "MAX_CAPACITANCE_RATIO",
]

#: Highest loaded Q taken as practical for LC tuned circuits at MF and at a
#: 455 kHz-class IF. Common practice: broadcast-band ferrite/litz coils reach
#: unloaded Q of roughly 100–300, and a circuit loaded by its source and load
#: keeps perhaps half to two thirds of that. Not from a written source.
PRACTICAL_LOADED_Q = 200.0

#: Capacitance ratio a usual single-gang broadcast variable capacitor covers once the circuit's strays and
#: trimmer are added (about 30-35 pF at the minimum against some 365-400 pF at the maximum): common practice,
#: from memory; enough for the 3.2:1 tuning range (10.3:1 in capacitance) of a 530-1700 kHz band.
USUAL_CAPACITANCE_RATIO = 12.0
#: The bare swing of such a capacitor with no strays (about 10-365 pF): common practice, from memory. Beyond
#: it no single variable capacitor tunes the section; the band is split or tuned otherwise.
MAX_CAPACITANCE_RATIO = 36.0

#: Highest --max-q and --reject taken (beyond any tuned circuit; beyond any measurement).
MAX_PRACTICAL_Q = 1e5
MAX_REJECT_DB = 300.0

#: Stage counts tabulated by :func:`q_requirements`.
SINGLE_STAGES = (1, 2, 3, 4)
DOUBLE_STAGES = (1, 2)

_REL = 1e-9  # relative tolerance for "on the band edge" / "on a channel"


@dataclass(frozen=True)
class Spur:
    """One mixer spurious response: ``m·f_LO + n·f_RF = IF``.

    Attributes
    ----------
    m, n : int
        Signed harmonic numbers of the LO and the RF.
    rf_hz : float
        RF frequency that converts to the IF.
    channel_hz : float
        Nearest channel of the band grid.
    """

    m: int
    n: int
    rf_hz: float
    channel_hz: float

    @property
    def order(self) -> int:
        """``|m| + |n|``."""
        return abs(self.m) + abs(self.n)

    def to_json(self) -> dict:
        return {"m": self.m, "n": self.n, "order": self.order,
                "rf_hz": _r(self.rf_hz), "channel_hz": _r(self.channel_hz)}


@dataclass(frozen=True)
class ChannelPlan:
    """The plan for one channel of the band."""

    tune_hz: float
    lo_hz: float
    image_hz: float
    image_channel_hz: float | None
    half_if_spur_hz: float
    spurs: tuple = ()

    def to_json(self) -> dict:
        return {
            "tune_hz": _r(self.tune_hz),
            "lo_hz": _r(self.lo_hz),
            "image_hz": _r(self.image_hz),
            "image_channel_hz": None if self.image_channel_hz is None else _r(self.image_channel_hz),
            "half_if_spur_hz": _r(self.half_if_spur_hz),
            "spurs": [s.to_json() for s in self.spurs],
        }


@dataclass(frozen=True)
class QRequirement:
    """Loaded Q per circuit for ``stages`` identical stages of ``kind`` at ``f0_hz``."""

    where: str       # "band_bottom" | "band_top" | "if"
    f0_hz: float
    kind: str        # "single" | "double"
    stages: int
    q_loaded: float
    practical: bool

    def to_json(self) -> dict:
        return {"where": self.where, "f0_hz": _r(self.f0_hz), "kind": self.kind,
                "stages": self.stages, "q_loaded": round(self.q_loaded, 2),
                "practical": self.practical}


@dataclass(frozen=True)
class QTable:
    """Required loaded Q for a rejection target, with a one-line verdict."""

    reject_db: float
    offset_hz: float
    practical_q: float
    rows: tuple

    def verdict(self) -> str:
        """One line: which configurations stay at or below ``practical_q``."""
        parts = []
        for where in ("if", "band_bottom", "band_top"):
            rows = [r for r in self.rows if r.where == where]
            if not rows:
                continue
            ok = [f"{r.stages}x{'single' if r.kind == 'single' else 'double'}" for r in rows if r.practical]
            parts.append(f"{_WHERE[where]} {format_frequency(rows[0].f0_hz)}: {', '.join(ok) if ok else 'none'}")
        return (f"practical with loaded Q <= {self.practical_q:g} (common practice for LC circuits): "
                + "; ".join(parts))

    def to_json(self) -> dict:
        return {"reject_db": self.reject_db, "offset_hz": _r(self.offset_hz),
                "practical_loaded_q": self.practical_q,
                "practical_loaded_q_source": "common practice",
                "rows": [r.to_json() for r in self.rows], "verdict": self.verdict()}


_WHERE = {"if": "IF", "band_bottom": "band bottom", "band_top": "band top"}


def capacitance_verdict(ratio: float) -> tuple:
    """(key, one line) of whether a single variable capacitor tunes a section of this capacitance ratio.

    ``usual``: within :data:`USUAL_CAPACITANCE_RATIO`; ``tight``: within the
    bare swing :data:`MAX_CAPACITANCE_RATIO` only with a low-stray circuit;
    ``beyond``: more than any single variable capacitor swings (common practice).

    >>> capacitance_verdict(4.79)[0], capacitance_verdict(20.0)[0], capacitance_verdict(276.0)[0]
    ('usual', 'tight', 'beyond')
    """
    if ratio <= USUAL_CAPACITANCE_RATIO:
        return "usual", f"a usual single-gang variable capacitor covers it (about {USUAL_CAPACITANCE_RATIO:g}:1 with strays; common practice)"
    if ratio <= MAX_CAPACITANCE_RATIO:
        return "tight", (f"beyond the usual {USUAL_CAPACITANCE_RATIO:g}:1 with strays: only a low-stray circuit "
                         f"(a bare gang swings about {MAX_CAPACITANCE_RATIO:g}:1; common practice)")
    return "beyond", (f"beyond any single variable capacitor (about {MAX_CAPACITANCE_RATIO:g}:1 at most; common practice): "
                      "split the band or tune the section otherwise")


@dataclass(frozen=True)
class FrequencyPlan:
    """LO, image and spur plan of one IF over one band (see :func:`frequency_plan`)."""

    if_hz: float
    band_hz: tuple
    spacing_hz: float
    injection: str
    channels: tuple
    q_required: QTable | None = None
    extra: dict = field(default_factory=dict, compare=False)

    @property
    def lo_range_hz(self) -> tuple:
        los = [c.lo_hz for c in self.channels]
        return (min(los), max(los))

    @property
    def image_range_hz(self) -> tuple:
        ims = [c.image_hz for c in self.channels]
        return (min(ims), max(ims))

    @property
    def lo_tuning_ratio(self) -> float:
        """Highest over lowest LO frequency: what the LO section must cover."""
        lo, hi = self.lo_range_hz
        return hi / lo

    @property
    def lo_capacitance_ratio(self) -> float:
        """Capacitance ratio of the LO section: ``(tuning ratio)²`` since f ∝ 1/sqrt(LC)."""
        return self.lo_tuning_ratio**2

    @property
    def rf_tuning_ratio(self) -> float:
        """Highest over lowest channel: what the preselector section must cover."""
        return self.channels[-1].tune_hz / self.channels[0].tune_hz

    @property
    def rf_capacitance_ratio(self) -> float:
        return self.rf_tuning_ratio**2

    def to_json(self) -> dict:
        """The plan as JSON-ready data (numbers in Hz; keys per the plan command)."""
        return {
            "if_hz": _r(self.if_hz),
            "band_hz": [_r(self.band_hz[0]), _r(self.band_hz[1])],
            "spacing_hz": _r(self.spacing_hz),
            "injection": self.injection,
            "lo_range_hz": [_r(v) for v in self.lo_range_hz],
            "image_range_hz": [_r(v) for v in self.image_range_hz],
            "lo_tuning_ratio": round(self.lo_tuning_ratio, 5),
            "lo_capacitance_ratio": round(self.lo_capacitance_ratio, 5),
            "rf_tuning_ratio": round(self.rf_tuning_ratio, 5),
            "rf_capacitance_ratio": round(self.rf_capacitance_ratio, 5),
            "lo_capacitance_verdict": capacitance_verdict(self.lo_capacitance_ratio)[0],
            "rf_capacitance_verdict": capacitance_verdict(self.rf_capacitance_ratio)[0],
            "capacitance_verdict_source": "common practice",
            "spur_relation": "m*lo_hz + n*rf_hz = if_hz, |m| <= 3, 1 <= |n| <= 3",
            "channels": [c.to_json() for c in self.channels],
            "q_required": None if self.q_required is None else self.q_required.to_json(),
        }


def _r(hz: float) -> float:
    """Round a frequency for output (1 mHz) so that JSON does not show float noise."""
    return round(float(hz), 3)


def parse_band(text, name: str = "--band") -> tuple:
    """Read a band ``"LO:HI"`` (e.g. ``"540k:1700k"``) into ``(lo_hz, hi_hz)``.

    Raises
    ------
    ParameterError
        If it is not two frequencies separated by a colon, or ``lo >= hi``.

    Examples
    --------
    >>> parse_band("540k:1.7M")
    (540000.0, 1700000.0)
    """
    if isinstance(text, (tuple, list)) and len(text) == 2:
        parts = list(text)
    else:
        parts = str(text).split(":")
    if len(parts) != 2:
        raise ParameterError(f"{name} {text!r}: write the band as LO:HI, e.g. 540k:1700k")
    lo = parse_frequency(parts[0], name)
    hi = parse_frequency(parts[1], name)
    if lo <= 0:
        raise ParameterError(f"{name} {text!r}: the low edge must be above 0 Hz")
    if lo >= hi:
        raise ParameterError(
            f"{name} {text!r}: low edge {format_frequency(lo)} is not below high edge "
            f"{format_frequency(hi)}; write LO:HI with LO < HI")
    check_range(hi, f"{name} {text!r}: high edge", high=MAX_RF_HZ, unit="Hz")
    return (lo, hi)


def channel_grid(band_hz, spacing_hz) -> tuple:
    """Channel frequencies ``lo + k·spacing`` up to ``hi`` (inclusive).

    Examples
    --------
    >>> g = channel_grid((540e3, 1700e3), 10e3)
    >>> len(g), g[0], g[-1]
    (117, 540000.0, 1700000.0)
    """
    lo, hi = band_hz
    n = int(math.floor((hi - lo) / spacing_hz * (1 + _REL) + _REL)) + 1
    return tuple(lo + k * spacing_hz for k in range(n))


def half_if_spur(tune_hz, if_hz, injection="high"):
    """The half-IF spur: ``2·f_RF - 2·f_LO = ±IF`` nearest the tuning, ``f_LO ∓ IF/2``.

    Notes
    -----
    Mixer spur charts (common practice): a signal at ``f_LO - IF/2`` (high
    side) gives a second harmonic that beats with the LO's second harmonic
    at exactly the IF.

    Examples
    --------
    >>> half_if_spur(1000e3, 455e3)   # LO 1455 kHz
    1227500.0
    """
    lo = lo_frequency(tune_hz, if_hz, injection)
    return lo - if_hz / 2 if injection == "high" else lo + if_hz / 2


def spurious_responses(tune_hz, if_hz, band_hz, spacing_hz, injection="high", max_order=3) -> tuple:
    """Mixer spurious responses ``m·f_LO + n·f_RF = IF`` that land inside the band.

    Parameters
    ----------
    tune_hz, if_hz : float
        Wanted carrier and IF, Hz.
    band_hz : (float, float)
        Band edges, Hz.
    spacing_hz : float
        Channel spacing (for the nearest channel of each spur), Hz.
    injection : {"high", "low"}
    max_order : int
        Largest ``|m|`` and ``|n|``.

    Returns
    -------
    tuple of Spur
        Sorted by RF frequency; the wanted channel and the image (the
        ``|m| = |n| = 1`` responses) are left out; one entry per RF frequency
        (the lowest order that produces it).

    Examples
    --------
    >>> s = spurious_responses(1000e3, 455e3, (540e3, 1700e3), 10e3)
    >>> [(x.m, x.n, x.rf_hz) for x in s if x.order == 4 and x.rf_hz == 1227500.0]
    [(2, -2, 1227500.0)]
    """
    lo_f = lo_frequency(tune_hz, if_hz, injection)
    image = image_frequency(tune_hz, if_hz, injection)
    lo_edge, hi_edge = band_hz
    tol = _REL * hi_edge
    found = {}
    for m in range(-max_order, max_order + 1):
        for n in range(-max_order, max_order + 1):
            if n == 0:
                continue
            rf = (if_hz - m * lo_f) / n
            if rf <= 0 or rf < lo_edge - tol or rf > hi_edge + tol:
                continue
            if abs(m) == 1 and abs(n) == 1 and (abs(rf - tune_hz) <= tol or abs(rf - image) <= tol):
                continue
            key = round(rf, 3)
            order = abs(m) + abs(n)
            if key in found and found[key][0] <= order:
                continue
            k = round((rf - lo_edge) / spacing_hz)
            found[key] = (order, Spur(m, n, rf, lo_edge + k * spacing_hz))
    return tuple(found[k][1] for k in sorted(found))


def q_requirements(reject_db, offset_hz, if_hz, band_hz, *, practical_q=PRACTICAL_LOADED_Q) -> QTable:
    """Loaded Q per circuit for a rejection target, at band bottom, band top and the IF.

    Parameters
    ----------
    reject_db : float
        Rejection wanted at ``offset_hz`` from the centre, dB (> 0).
    offset_hz : float
        Offset of the signal to reject, Hz (> 0, below the band width and the IF).
    if_hz : float
    band_hz : (float, float)
    practical_q : float
        Highest loaded Q counted as practical for LC circuits.

    Returns
    -------
    QTable
        Rows for 1–4 single-tuned and 1–2 critically coupled double-tuned stages.

    Raises
    ------
    ParameterError
        Bad rejection or offset, or a practical Q that is not above 0.

    Notes
    -----
    Exact forms of :func:`sdrx.analysis.qfactor.q_for_rejection`, each
    stage taking ``reject_db/stages``.

    Examples
    --------
    >>> t = q_requirements(20, 9e3, 455e3, (531e3, 1602e3))
    >>> round(t.rows[0].q_loaded, 1)   # one single-tuned circuit at the IF
    253.9
    """
    pq = to_float(practical_q, "--max-q")
    if not math.isfinite(pq) or pq <= 0:
        raise ParameterError(f"--max-q {practical_q!r}: the practical loaded Q must be a finite number above 0 "
                             "(e.g. 200)")
    check_range(pq, "--max-q", 0, MAX_PRACTICAL_Q, low_open=True)
    r = parse_db(reject_db, "--reject")
    if r <= 0:
        raise ParameterError(f"--reject {reject_db!r}: the rejection must be above 0 dB")
    check_range(r, "--reject", 0, MAX_REJECT_DB, low_open=True, unit="dB")
    d = parse_frequency(offset_hz, "--at")
    lo_edge, hi_edge = band_hz
    if d <= 0:
        raise ParameterError(f"--at {offset_hz!r}: the offset must be above 0 Hz")
    if d >= hi_edge - lo_edge:
        raise ParameterError(
            f"--at {format_frequency(d)}: offset is beyond the band "
            f"({format_frequency(lo_edge)}:{format_frequency(hi_edge)}, width "
            f"{format_frequency(hi_edge - lo_edge)}); give an offset below the band width")
    if d >= if_hz:
        raise ParameterError(f"--at {format_frequency(d)}: offset must be below the IF {format_frequency(if_hz)}")
    rows = []
    for where, f0 in (("if", if_hz), ("band_bottom", lo_edge), ("band_top", hi_edge)):
        for kind, counts in (("single", SINGLE_STAGES), ("double", DOUBLE_STAGES)):
            for n in counts:
                q = qfactor.q_for_rejection(f0, d, r, n, kind)
                rows.append(QRequirement(where, f0, kind, n, q, q <= pq))
    return QTable(r, d, pq, tuple(rows))


def frequency_plan(if_hz, band_hz, spacing_hz=10e3, injection="high", *, reject_db=None,
                   at_hz=None, practical_q=PRACTICAL_LOADED_Q) -> FrequencyPlan:
    """The frequency plan of one IF over one band.

    Parameters
    ----------
    if_hz : float or str
        Intermediate frequency ("455k").
    band_hz : str or (float, float)
        Band ``"LO:HI"`` or a pair of edges.
    spacing_hz : float or str
        Channel spacing (9k or 10k in the MF broadcast band).
    injection : {"high", "low"}
    reject_db, at_hz : float or str, optional
        Rejection target for the required-Q table; give both or neither.
    practical_q : float
        Practical loaded-Q limit for the verdict.

    Returns
    -------
    FrequencyPlan

    Raises
    ------
    ParameterError
        A band with its low edge above its high edge, an IF inside the band,
        low-side injection with the IF above the band bottom, a spacing
        wider than the band, ``reject_db`` without ``at_hz`` (or the
        reverse), an offset beyond the band.

    Examples
    --------
    >>> p = frequency_plan("455k", "540k:1700k", "10k")
    >>> p.lo_range_hz, p.image_range_hz, len(p.channels)
    ((995000.0, 2155000.0), (1450000.0, 2610000.0), 117)
    """
    band = parse_band(band_hz)
    f_if = parse_frequency(if_hz, "--if")
    spacing = parse_frequency(spacing_hz, "--spacing")
    if injection not in ("high", "low"):
        raise ParameterError(f"--injection {injection!r}: choose high or low")
    if f_if <= 0:
        raise ParameterError(f"--if {if_hz!r}: the IF must be above 0 Hz")
    check_range(f_if, "--if", MIN_IF_HZ, MAX_IF_HZ, unit="Hz")
    check_range(spacing, "--spacing", MIN_SPACING_HZ, MAX_SPACING_HZ, unit="Hz")
    if band[0] <= f_if <= band[1]:
        raise ParameterError(
            f"--if {format_frequency(f_if)}: inside the band {format_frequency(band[0])}:"
            f"{format_frequency(band[1])}; choose an IF below or above the band")
    if injection == "low" and f_if >= band[0]:
        raise ParameterError(
            f"--injection low: the LO f - IF would be at or below 0 Hz with --if {format_frequency(f_if)} "
            f"above the band bottom {format_frequency(band[0])}; use high or a lower IF")
    if spacing <= 0 or spacing > band[1] - band[0]:
        raise ParameterError(
            f"--spacing {spacing_hz!r}: must be above 0 and at most the band width "
            f"{format_frequency(band[1] - band[0])}")
    if (reject_db is None) != (at_hz is None):
        missing = "--at OFFSET" if at_hz is None else "--reject DB"
        given = "--reject" if at_hz is None else "--at"
        raise ParameterError(f"{given} needs {missing} as well (e.g. --reject 40 --at 10k)")
    n_channels = (band[1] - band[0]) / spacing + 1
    if n_channels > MAX_PLAN_CHANNELS:
        raise ParameterError(
            f"--spacing {format_frequency(spacing)}: gives {n_channels:.0f} channels over the band; at most "
            f"{MAX_PLAN_CHANNELS} (widen --spacing or narrow --band)")
    grid = channel_grid(band, spacing)
    tol = _REL * band[1]
    chans = []
    for f in grid:
        im = image_frequency(f, f_if, injection)
        im_ch = None
        if band[0] - tol <= im <= band[1] + tol:
            im_ch = grid[min(len(grid) - 1, max(0, round((im - band[0]) / spacing)))]
        chans.append(ChannelPlan(
            tune_hz=f,
            lo_hz=lo_frequency(f, f_if, injection),
            image_hz=im,
            image_channel_hz=im_ch,
            half_if_spur_hz=half_if_spur(f, f_if, injection),
            spurs=spurious_responses(f, f_if, band, spacing, injection),
        ))
    qt = None
    if reject_db is not None:
        qt = q_requirements(reject_db, at_hz, f_if, band, practical_q=practical_q)
    return FrequencyPlan(f_if, band, spacing, injection, tuple(chans), qt)
