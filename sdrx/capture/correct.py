"""Capture corrections: undo the recording front end's faults between the reader and the receiver.

``--correct LIST`` picks what to undo (``dc``, ``iq``, ``clock``, ``all``,
``none``); :func:`plan_corrections` estimates what is needed
(:mod:`sdrx.capture.impairments`) and :class:`CorrectedReader` wraps a reader
so that every runner (receive, report, compare, refs, a band runner) reads the
corrected capture with the same block interface.

The stage applies, per sample and in the order the faults arose backwards:

1. DC: x ← x − d;
2. I/Q: I_c = I, Q_c = (Q/g + I·sin φ)/cos φ, the inverse of
   Q_r = g·(Q·cos φ − I·sin φ) (Gram–Schmidt orthogonalisation of the Q
   branch against I: Churchill, Ogar and Thompson, IEEE Trans. AES-17, 1981);
3. clock: the samples read at positions m·(1 + ε) (band-limited, see
   :mod:`sdrx.dsp.fractional`) and, in an I/Q capture, shifted by
   +center·ε, since the LO that derives from the same crystal was center·ε
   high: y[m] = x(m·(1 + ε))·exp(j2π·center·ε·m/fs). The corrected capture
   is on the true time axis at the nominal rate and centre; it holds
   floor((N − 1)/(1 + ε)) + 1 samples.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import ParameterError
from .base import CaptureReader, DEFAULT_BLOCK

__all__ = ["CORRECTIONS", "MAX_PPM", "parse_correct", "parse_ppm", "CorrectionPlan", "plan_corrections",
           "Corrector", "CorrectedReader", "corrected_reader"]

CORRECTIONS = ("dc", "iq", "clock")
#: largest clock error accepted, ppm (a crystal is off by tens of ppm; beyond this the carriers
#: would leave their channels and the grid fit could not be trusted)
MAX_PPM = 1000.0


def parse_correct(value, option: str = "--correct") -> tuple:
    """The corrections named by ``--correct`` (comma-separated or a list), in the stage's order.

    Raises
    ------
    ParameterError
        An unknown name, or ``none``/``all`` combined with others.

    Examples
    --------
    >>> parse_correct("clock,dc"), parse_correct("all"), parse_correct(None), parse_correct(["iq"])
    (('dc', 'clock'), ('dc', 'iq', 'clock'), (), ('iq',))
    """
    if value is None:
        return ()
    items = value.split(",") if isinstance(value, str) else list(value)
    names = []
    for item in items:
        if not isinstance(item, str):
            raise ParameterError(f"{option}: {item!r} is not a name; choose from dc, iq, clock, all, none")
        name = item.strip().lower()
        if name not in CORRECTIONS + ("all", "none"):
            raise ParameterError(f"{option} {item!r}: choose from dc, iq, clock, all, none (comma-separated)")
        names.append(name)
    if len(names) > 1 and ("all" in names or "none" in names):
        raise ParameterError(f"{option} {','.join(names)}: 'all' and 'none' stand alone")
    if names == ["all"]:
        return CORRECTIONS
    return tuple(n for n in CORRECTIONS if n in names)


def parse_ppm(value, option: str = "--ppm") -> float:
    """A clock error in ppm, a finite number within ±:data:`MAX_PPM`.

    Examples
    --------
    >>> parse_ppm("-12.5")
    -12.5
    """
    try:
        ppm = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{option} {value!r}: give the clock error as a number of ppm, e.g. 60 or -12.5") from None
    if not math.isfinite(ppm) or abs(ppm) > MAX_PPM:
        raise ParameterError(f"{option} {value!r}: must be within ±{MAX_PPM:g} ppm")
    return ppm


@dataclass(frozen=True)
class CorrectionPlan:
    """What the correction stage applies, with the values it uses.

    Attributes
    ----------
    requested : tuple of str
        As asked (``--correct``).
    dc : complex or None
        DC offset subtracted (None: not applied).
    iq_gain_error_db, iq_phase_error_deg : float or None
        The Q branch's imbalance undone (None: not applied).
    clock_ppm : float or None
        Clock error undone (None: not applied).
    clock_source : str or None
        ``"estimate"`` or ``"--ppm"``.
    estimate : Impairments or None
        The estimate the values came from.
    warnings : tuple of str
        Corrections asked for but refused, and why.
    """

    requested: tuple = ()
    dc: complex | None = None
    iq_gain_error_db: float | None = None
    iq_phase_error_deg: float | None = None
    clock_ppm: float | None = None
    clock_source: str | None = None
    estimate: object = None
    warnings: tuple = field(default_factory=tuple)

    @property
    def active(self) -> bool:
        """True when the stage changes any sample."""
        return self.dc is not None or self.iq_gain_error_db is not None or self.clock_ppm is not None

    @property
    def ratio(self) -> float:
        """Input samples per output sample (1 + ε; 1 without a clock correction)."""
        return 1.0 + (self.clock_ppm or 0.0) * 1e-6

    def to_json(self) -> dict:
        """The run summary's ``corrections`` object."""
        from .impairments import mirror_rejection_db

        applied = {}
        if self.dc is not None:
            mag = abs(self.dc)
            applied["dc"] = {"i": round(self.dc.real, 8), "q": round(self.dc.imag, 8),
                             "dbfs": round(20 * math.log10(mag), 3) if mag > 0 else None}
        if self.iq_gain_error_db is not None:
            irr = mirror_rejection_db(self.iq_gain_error_db, self.iq_phase_error_deg)
            applied["iq"] = {"gain_error_db": round(self.iq_gain_error_db, 5),
                             "phase_error_deg": round(self.iq_phase_error_deg, 5),
                             "mirror_rejection_db": round(irr, 2) if math.isfinite(irr) else None}
        if self.clock_ppm is not None:
            applied["clock"] = {"ppm": round(self.clock_ppm, 4), "source": self.clock_source,
                                "model": "one crystal for the tuner LO and the ADC clock: resampled by 1 + ppm*1e-6 "
                                         "and (I/Q) shifted by +center*ppm*1e-6"}
        return {"requested": list(self.requested), "applied": applied,
                "estimate": None if self.estimate is None else self.estimate.to_json(),
                "warnings": list(self.warnings)}


def plan_corrections(reader, correct=None, *, ppm=None, spacing_hz=10e3, start_s=0.0, duration_s=None,
                     progress=None) -> CorrectionPlan:
    """Decide the corrections for a capture: parse the request, estimate what is needed.

    Parameters
    ----------
    reader : CaptureReader
        The uncorrected capture.
    correct : str, sequence of str or None
        ``--correct`` (``none`` by default).
    ppm : float, str or None
        ``--ppm``: the clock error to undo instead of the estimate.
    spacing_hz : float or str
        Channel grid of the broadcast carriers the clock estimate uses.
    start_s, duration_s
        The span of the capture the estimate uses (the excerpt being run).
    progress : callable, optional

    Returns
    -------
    CorrectionPlan

    Raises
    ------
    ParameterError
        Unknown names; ``--ppm`` without a clock correction; ``iq`` named for
        a real capture.

    Notes
    -----
    A correction is refused, with a warning, when its estimate is missing: DC
    that cannot be told from a carrier at the centre (removing it would take
    that station's carrier away), a clock error when fewer than two carriers
    agree (give ``--ppm``).
    """
    names = parse_correct(correct)
    given = None if ppm is None else parse_ppm(ppm)
    if given is not None and "clock" not in names:
        raise ParameterError("--ppm: gives the clock error that --correct clock undoes; add --correct clock (or all)")
    kind = reader.info.kind
    if kind != "iq" and "iq" in names:
        if correct == "all" or (not isinstance(correct, str) and list(correct or ()) == ["all"]):
            names = tuple(n for n in names if n != "iq")
        else:
            raise ParameterError(f"--correct iq: applies to I/Q captures; {reader.info.path} holds real samples")
    if not names:
        return CorrectionPlan(requested=names)
    estimate = None
    if "dc" in names or "iq" in names or ("clock" in names and given is None):
        from .impairments import estimate_impairments

        estimate, _ = estimate_impairments(reader, spacing_hz=spacing_hz, start_s=start_s, duration_s=duration_s,
                                           progress=progress)
    warnings = []
    values = {}
    if "dc" in names:
        if estimate.dc_separable:
            values["dc"] = estimate.dc
        else:
            warnings.append("DC correction refused: " + "; ".join(estimate.notes[:1]))
    if "iq" in names and estimate.iq_gain_error_db is not None:
        values["iq_gain_error_db"] = estimate.iq_gain_error_db
        values["iq_phase_error_deg"] = estimate.iq_phase_error_deg
    elif "iq" in names:
        warnings.append("I/Q correction refused: the band holds too little signal to estimate the imbalance")
    if "clock" in names:
        if given is not None:
            values.update(clock_ppm=given, clock_source="--ppm")
        elif estimate.clock_error_ppm is not None:
            values.update(clock_ppm=estimate.clock_error_ppm, clock_source="estimate")
        else:
            warnings.append("clock correction refused: fewer than two broadcast carriers agree on a clock error; "
                            "give it with --ppm")
    return CorrectionPlan(requested=names, estimate=estimate, warnings=tuple(warnings), **values)


class Corrector:
    """The correction stage, with explicit state: capture samples in, corrected samples out.

    Parameters
    ----------
    plan : CorrectionPlan
    kind : str
        ``"iq"`` or ``"real"``.
    fs : float
    center_hz : float or None
    first_out, first_in : int
        Absolute index of the first corrected sample wanted and of the first
        capture sample pushed.

    Notes
    -----
    DC and I/Q are memoryless; the clock stage (a
    :class:`~sdrx.dsp.fractional.FractionalResampler`) holds the input it
    still needs and the next output index. Output does not depend on the
    block sizes pushed.
    """

    def __init__(self, plan: CorrectionPlan, kind: str, fs: float, center_hz, first_out: int = 0,
                 first_in: int = 0):
        self.plan = plan
        self._iq = kind == "iq"
        self._dc = plan.dc
        self._m = None
        if plan.iq_gain_error_db is not None:
            g = 10.0 ** (plan.iq_gain_error_db / 20.0)
            ph = math.radians(plan.iq_phase_error_deg)
            self._m = (1.0 / (g * math.cos(ph)), math.tan(ph))   # Q_c = a·Q + b·I
        self._rs = None
        if plan.clock_ppm is not None:
            from ..dsp.fractional import FractionalResampler

            eps = plan.clock_ppm * 1e-6
            shift = (center_hz * eps / fs) if self._iq else 0.0
            self._rs = FractionalResampler(1.0 + eps, shift, first_out=first_out, first_in=first_in,
                                           complex_samples=self._iq)

    def _memoryless(self, x: np.ndarray) -> np.ndarray:
        if self._dc is not None:
            x = x - (self._dc if self._iq else self._dc.real)
        if self._m is not None:
            a, b = self._m
            x = x.real + 1j * (a * x.imag + b * x.real)
        return x

    def process(self, block: np.ndarray) -> np.ndarray:
        """Capture samples in; the corrected samples completed so far out."""
        x = self._memoryless(np.asarray(block))
        return x if self._rs is None else self._rs.process(x)

    def flush(self, total_out: int) -> np.ndarray:
        """End of input: the corrected samples up to absolute index ``total_out``."""
        if self._rs is None:
            return np.zeros(0, dtype=np.complex128 if self._iq else np.float64)
        return self._rs.flush(total_out)


class CorrectedReader(CaptureReader):
    """A capture reader that hands out corrected samples (same interface as any reader).

    Parameters
    ----------
    reader : CaptureReader
        The capture as recorded.
    plan : CorrectionPlan

    Notes
    -----
    ``info`` is the inner capture's, with ``samples`` counted on the corrected
    (true) time axis. An excerpt reads from the inner capture only the span it
    needs (plus the interpolator's half length either side), so an excerpt
    holds the same samples as that span of the whole corrected capture.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.capture import open_writer, open_capture
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "c.sigmf-meta"
    >>> with open_writer(p, fs=1e5, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
    ...     _ = w.write(np.full(1000, 0.5 + 0.25j, dtype=np.complex64))
    >>> r = CorrectedReader(open_capture(p), CorrectionPlan(requested=("dc",), dc=0.5 + 0.25j))
    >>> float(abs(r.read()).max())
    0.0
    """

    def __init__(self, reader, plan: CorrectionPlan):
        from ..dsp.fractional import output_count

        self.inner = reader
        self.plan = plan
        info = reader.info
        if plan.clock_ppm is not None:
            info = dataclasses.replace(info, samples=output_count(info.samples, plan.ratio))
        super().__init__(info, may_hold_nonfinite=False)

    def _iterate(self, block_size: int, first: int, count: int):
        if count <= 0:
            return
        inner = self.inner
        n_in = inner.info.samples
        fs = inner.info.fs
        if self.plan.clock_ppm is None:
            lo, hi = first, first + count
        else:
            from ..dsp.fractional import farrow_design

            k = farrow_design().half_taps
            lo = max(0, int(math.floor(first * self.plan.ratio)) - k)
            hi = min(n_in, int(math.floor((first + count - 1) * self.plan.ratio)) + k + 2)
        stage = Corrector(self.plan, self.info.kind, fs, self.info.center_hz, first_out=first, first_in=lo)
        pending, have = [], 0
        dtype = np.complex64 if self.info.kind == "iq" else np.float32
        for raw in inner.blocks(DEFAULT_BLOCK, start_s=lo / fs, duration_s=(hi - lo) / fs):
            y = stage.process(raw)
            if y.size:
                pending.append(y)
                have += y.size
            while have >= block_size:
                pending, have, out = _take(pending, block_size)
                yield out.astype(dtype)
        tail = stage.flush(first + count)
        if tail.size:
            pending.append(tail)
            have += tail.size
        if pending:
            joined = np.concatenate(pending)
            for i in range(0, joined.size, block_size):
                yield joined[i:i + block_size].astype(dtype)


def _take(parts: list, n: int):
    joined = np.concatenate(parts)
    rest = joined[n:]
    return ([rest] if rest.size else []), rest.size, joined[:n]


def corrected_reader(reader, plan: CorrectionPlan):
    """``reader`` itself when the plan changes nothing, else a :class:`CorrectedReader`."""
    return CorrectedReader(reader, plan) if plan.active else reader
