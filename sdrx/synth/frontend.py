"""Faults of the recording front end, put into a synthesized capture: ``[front_end]``.

The synthesizer renders the band as a perfect recorder would hear it (samples
c[n] on the true time axis, centre exactly ``center``) and then records it
through a faulty one, in the order the signal meets the faults:

1. **clock** (``clock_error_ppm`` = 10⁶·ε): tuner LO and ADC clock from one
   crystal running ε fast, so the LO sits at center·(1 + ε) and sample n is
   taken at t_n = n/(fs·(1 + ε)):
   x[n] = c(n/(1 + ε))·exp(−j2π·center·ε·n/(fs·(1 + ε))) (I/Q; real captures
   have no LO and only the resampling);
2. **I/Q imbalance** (I/Q only): the Q branch with gain g = 10^(gain/20) and
   LO phase error φ, Q_r = g·(Q·cos φ − I·sin φ), I_r = I;
3. **DC offset**: a constant added after the mixer (LO leakage, converter
   offset), ``dc_offset_dbfs`` = 20·log10|d| at ``dc_phase_deg`` (I/Q) or a
   positive real constant.

The resampling is :class:`sdrx.dsp.fractional.FractionalResampler`, so the
samples do not depend on the block size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ParameterError
from ._keys import check_keys, get_db, get_number

__all__ = ["FrontEndSpec", "parse_front_end", "FrontEndRecorder", "MAX_PPM"]

_KEYS = ("dc_offset_dbfs", "dc_phase_deg", "iq_gain_error_db", "iq_phase_error_deg", "clock_error_ppm")
#: largest clock error a scenario may ask for (a crystal's error is tens of ppm)
MAX_PPM = 1000.0


@dataclass(frozen=True)
class FrontEndSpec:
    """The faults of ``[front_end]`` (each absent key: no such fault).

    Attributes
    ----------
    dc_offset_dbfs : float or None
    dc_phase_deg : float
    iq_gain_error_db, iq_phase_error_deg : float
    clock_error_ppm : float
    """

    dc_offset_dbfs: float | None = None
    dc_phase_deg: float = 0.0
    iq_gain_error_db: float = 0.0
    iq_phase_error_deg: float = 0.0
    clock_error_ppm: float = 0.0

    @property
    def dc(self) -> complex:
        """The DC offset as a complex number (0 when none)."""
        if self.dc_offset_dbfs is None:
            return 0j
        return 10.0 ** (self.dc_offset_dbfs / 20.0) * complex(math.cos(math.radians(self.dc_phase_deg)),
                                                              math.sin(math.radians(self.dc_phase_deg)))

    def to_json(self, kind: str) -> dict:
        """The truth sidecar's ``front_end`` object (with the mirror rejection the imbalance gives)."""
        from ..capture.impairments import mirror_rejection_db

        d = self.dc
        out = {"dc_offset_dbfs": self.dc_offset_dbfs, "dc_i": d.real}
        if kind == "iq":
            irr = mirror_rejection_db(self.iq_gain_error_db, self.iq_phase_error_deg)
            out.update({"dc_q": d.imag, "dc_phase_deg": self.dc_phase_deg,
                        "iq_gain_error_db": self.iq_gain_error_db, "iq_phase_error_deg": self.iq_phase_error_deg,
                        "mirror_rejection_db": irr if math.isfinite(irr) else None})
        out.update({"clock_error_ppm": self.clock_error_ppm,
                    "clock_model": "tuner LO and ADC clock from one crystal: a carrier at f reads f/(1 + ppm*1e-6)"})
        return out


def parse_front_end(table, where: str, kind: str) -> FrontEndSpec:
    """Validate a ``[front_end]`` table.

    Raises
    ------
    ParameterError
        Unknown key, a value out of range, or an I/Q fault in a real capture.

    Examples
    --------
    >>> parse_front_end({"iq_gain_error_db": 1, "iq_phase_error_deg": 3, "clock_error_ppm": 60}, "s", "iq")
    FrontEndSpec(dc_offset_dbfs=None, dc_phase_deg=0.0, iq_gain_error_db=1.0, iq_phase_error_deg=3.0, clock_error_ppm=60.0)
    """
    if not isinstance(table, dict):
        raise ParameterError(f"{where}: must be a table ([front_end]), got {type(table).__name__}")
    check_keys(table, _KEYS, where)
    if kind != "iq":
        for key in ("dc_phase_deg", "iq_gain_error_db", "iq_phase_error_deg"):
            if key in table:
                raise ParameterError(f"{where}: {key} applies to I/Q captures (kind = \"iq\")")
    dc = get_db(table, "dc_offset_dbfs", where) if "dc_offset_dbfs" in table else None
    if dc is not None and dc > -6.0:
        raise ParameterError(f"{where}: dc_offset_dbfs = {table['dc_offset_dbfs']!r} is above -6 dBFS")
    phase = get_number(table, "dc_phase_deg", where, 0.0, lo=-360.0, hi=360.0)
    gain = get_number(table, "iq_gain_error_db", where, 0.0, lo=-6.0, hi=6.0)
    iq_phase = get_number(table, "iq_phase_error_deg", where, 0.0, lo=-30.0, hi=30.0)
    ppm = get_number(table, "clock_error_ppm", where, 0.0, lo=-MAX_PPM, hi=MAX_PPM)
    return FrontEndSpec(dc, phase, gain, iq_phase, ppm)


class FrontEndRecorder:
    """Stateful stage: the perfect recorder's samples in, the faulty recorder's out.

    Parameters
    ----------
    spec : FrontEndSpec
    fs : float
    center_hz : float or None
        Centre of an I/Q capture (None for real).
    total : int
        Samples the faulty recorder records.

    Notes
    -----
    With a clock error the faulty recorder's last sample lies at
    (total − 1)/(1 + ε) on the true axis: :attr:`input_needed` samples of the
    perfect recording (a little more than ``total`` when the clock is slow).
    """

    def __init__(self, spec: FrontEndSpec, fs: float, center_hz, total: int):
        from ..dsp.fractional import FractionalResampler, farrow_design

        self.spec = spec
        self.total = int(total)
        self._iq = center_hz is not None
        eps = spec.clock_error_ppm * 1e-6
        self._rs = None
        self.input_needed = self.total
        if eps:
            shift = -(center_hz or 0.0) * eps / (fs * (1.0 + eps))
            self._rs = FractionalResampler(1.0 / (1.0 + eps), shift if self._iq else 0.0,
                                           complex_samples=self._iq)
            k = farrow_design().half_taps
            self.input_needed = int(math.ceil((self.total - 1) / (1.0 + eps))) + k + 2
        g = 10.0 ** (spec.iq_gain_error_db / 20.0)
        ph = math.radians(spec.iq_phase_error_deg)
        self._q_from_q = g * math.cos(ph)
        self._q_from_i = -g * math.sin(ph)
        self._dc = spec.dc
        self._out = 0

    def process(self, block: np.ndarray) -> np.ndarray:
        """Perfect samples in (in order); faulty samples out (as many as are complete)."""
        x = block if self._rs is None else self._rs.process(block)
        return self._finish(x)

    def flush(self) -> np.ndarray:
        """The rest of the faulty recording, up to ``total`` samples."""
        if self._rs is None:
            return np.zeros(0, dtype=np.complex128 if self._iq else np.float64)
        return self._finish(self._rs.flush(self.total))

    def _finish(self, x: np.ndarray) -> np.ndarray:
        x = x[: max(0, self.total - self._out)]
        self._out += x.size
        if self._iq:
            i, q = x.real, x.imag
            x = (i + self._dc.real) + 1j * (self._q_from_q * q + self._q_from_i * i + self._dc.imag)
        elif self._dc:
            x = x + self._dc.real
        return x
