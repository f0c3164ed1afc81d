"""Estimates of a recording front end's faults: DC offset, I/Q imbalance, sample-clock error.

These are properties of the recorder, not of the receiver, and are estimated
blindly from the capture itself (one streamed pass, shared with the carrier
survey: :func:`sdrx.analysis.survey.band_statistics`):

- **DC offset**: the time-domain mean of the samples. In an I/Q capture a
  station tuned at the capture's centre has its carrier at 0 Hz too. The two
  are told apart by the carrier's motion: a carrier that turns by at least
  ten cycles over the estimate (|δ|·T ≥ 10, δ its offset from 0 Hz) leaks
  less than 1/(10π) of itself into the mean. A carrier standing still at
  0 Hz, or sidebands around 0 Hz with no turning carrier, mean the DC offset
  cannot be told from the carrier: then the DC estimate is withheld.
- **I/Q gain and phase imbalance**: the observed x = K1·z + K2·conj(z) of a
  proper (circular) band z, with K1 = (1 + g·e^{−jφ})/2, K2 = (1 − g·e^{jφ})/2
  for a Q branch of gain g and LO phase error φ (Q_r = g·(Q·cos φ − I·sin φ)).
  The imbalance makes x improper: ρ = E[x²]/E[|x|²] = 2β/(1 + |β|²) with the
  mirror leakage β = K2/conj(K1), so β = ρ/(1 + sqrt(1 − |ρ|²)) and
  g·e^{jφ} = (1 − β)/(1 + β). The moments are taken over the band's spectrum,
  pair of bins by pair of bins: E[X(f)·X(−f)] = K1·K2·(P_z(f) + P_z(−f)), so
  each pair estimates ρ_f = 2·C(f)/(P(f) + P(−f)), and the pairs are
  averaged with weights (P(f) + P(−f))²/(P(f)·P(−f)), the inverse of their
  relative variance (with equal weights, i.e. Σ C over Σ P, Parseval's
  time-domain moments, two strong stations facing each other dominate
  and the error is several times larger). Left out: the centre channel (a
  station there is its own mirror), the carriers' lines and their mirrors (two
  carriers placed symmetrically about the centre are not independent over a
  finite record); the mean of each bin (DC, lines repeating every segment)
  is removed first. Sources: the moment estimator,
  F. E. Churchill, G. W. Ogar and B. J. Thompson, "The correction of I and Q
  errors in a coherent processor", IEEE Trans. Aerosp. Electron. Syst.
  AES-17 (1981) 131–137; the circularity (properness) criterion, L. Anttila,
  M. Valkama and M. Renfors, "Circularity-based I/Q imbalance compensation in
  wideband direct-conversion receivers", IEEE Trans. Veh. Technol. 57 (2008)
  2099–2113 (pages from memory).
- **Mirror rejection** from g and φ: IRR = (1 + g² + 2g·cos φ)/(1 + g² − 2g·cos φ),
  the image-rejection ratio of a quadrature mixer (B. Razavi, *RF
  Microelectronics*, image-reject receivers; from memory), equal to 1/|β|².
- **Clock error** ε (ppm = 10⁶·ε; positive: the recorder's crystal runs
  fast). An SDR usually derives its tuner LO and its ADC clock from one
  crystal, so a carrier at f reads f/(1 + ε) in the capture, wherever it
  lies in the band. Broadcast carriers sit on the channel grid within a tight
  tolerance, so each carrier's measured frequency f_i gives ε; the estimate
  is the least-squares fit of f_i·(1 + ε) = channel_i over the largest set of
  carriers that agree within :data:`CARRIER_TOLERANCE_HZ`. Each f_i comes
  from the turn of its line from one spectrum segment to the next (the
  lag-one phase: δ = angle(Σ X_{s+1}·conj X_s)/(2π) bins; S. Kay, "A fast
  and accurate single frequency estimator", IEEE Trans. ASSP 37 (1989)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Impairments", "estimate_impairments", "estimate_from_statistics", "CARRIER_TOLERANCE_HZ",
           "mirror_rejection_db", "imbalance_from_leakage"]

#: Largest departure of a broadcast carrier from its channel that the clock fit accepts, Hz:
#: the AM carrier-frequency departure limit of 47 CFR §73.1545(a), ±20 Hz; the ITU Radio
#: Regulations, Appendix 2, set 10 Hz for MF broadcasting transmitters (from memory), inside it.
CARRIER_TOLERANCE_HZ = 20.0
#: fewest carriers that must agree before a clock error is given
MIN_CLOCK_CARRIERS = 2
#: a carrier that turns this many cycles over the estimate leaks < 1/(10π) of itself into the mean
DC_RESOLVED_CYCLES = 10.0
_GUARD = 8            # bins left out either side of a line for the I/Q moments
_LOBE = 2             # Hann main lobe half-width, bins
_LINE_DB = 20.0       # a bin this far above its neighbourhood median is a line
_CENTRE_DB = 3.0      # mean excess over the noise floor that means sidebands around 0 Hz


def mirror_rejection_db(gain_db: float, phase_deg: float) -> float:
    """Mirror (image) rejection of an I/Q pair with a gain and phase imbalance, dB.

    Notes
    -----
    IRR = 10·log10[(1 + g² + 2g·cos φ)/(1 + g² − 2g·cos φ)], g = 10^(gain_db/20):
    the image-rejection ratio of a quadrature mixer (Razavi, *RF
    Microelectronics*, image-reject receivers; from memory).

    Examples
    --------
    >>> round(mirror_rejection_db(1.0, 3.0), 2)
    24.0
    >>> mirror_rejection_db(0.0, 0.0)
    inf
    """
    g = 10.0 ** (gain_db / 20.0)
    c = math.cos(math.radians(phase_deg))
    den = 1.0 + g * g - 2.0 * g * c
    if den <= 0.0:
        return math.inf
    return 10.0 * math.log10((1.0 + g * g + 2.0 * g * c) / den)


def imbalance_from_leakage(beta: complex) -> tuple:
    """(gain error dB, phase error deg) of the Q branch from the mirror leakage β = K2/conj(K1).

    Examples
    --------
    >>> g, p = imbalance_from_leakage(0j)
    >>> (g, p)
    (0.0, 0.0)
    """
    u = (1.0 - beta) / (1.0 + beta)
    return 20.0 * math.log10(abs(u)), math.degrees(math.atan2(u.imag, u.real))


@dataclass(frozen=True)
class Impairments:
    """The front end's faults estimated from a capture.

    Attributes
    ----------
    kind : str
        ``"iq"`` or ``"real"`` (real captures have no I/Q entries).
    start_s, seconds : float
        The span the estimate used.
    dc : complex
        DC offset (I + jQ, or the real mean), full scale 1.
    dc_separable : bool
        False when a station's carrier at the centre cannot be told from the DC.
    iq_gain_error_db, iq_phase_error_deg, mirror_rejection_db : float or None
    clock_error_ppm : float or None
        None when fewer than two carriers agree.
    clock_carriers : int
    clock_uncertainty_ppm : float or None
        Standard error of the fit (three carriers or more).
    notes : tuple of str
    """

    kind: str
    start_s: float
    seconds: float
    dc: complex
    dc_separable: bool
    iq_gain_error_db: float | None = None
    iq_phase_error_deg: float | None = None
    mirror_rejection_db: float | None = None
    clock_error_ppm: float | None = None
    clock_carriers: int = 0
    clock_uncertainty_ppm: float | None = None
    notes: tuple = field(default_factory=tuple)

    @property
    def dc_offset_dbfs(self):
        """20·log10|DC| when the DC can be told apart (None otherwise, or for digital zero)."""
        if not self.dc_separable or abs(self.dc) == 0.0:
            return None
        return 20.0 * math.log10(abs(self.dc))

    def to_json(self) -> dict:
        """The ``impairments`` object of ``sdrx info --json`` (I/Q entries only for I/Q captures)."""
        r = lambda v, n=3: None if v is None else (round(float(v), n) if math.isfinite(v) else None)  # noqa: E731
        out = {"dc_offset_dbfs": r(self.dc_offset_dbfs, 2)}
        if self.kind == "iq":
            out.update({"iq_gain_error_db": r(self.iq_gain_error_db, 4),
                        "iq_phase_error_deg": r(self.iq_phase_error_deg, 4),
                        "mirror_rejection_db": r(self.mirror_rejection_db, 2)})
        out.update({"clock_error_ppm": r(self.clock_error_ppm, 3), "clock_carriers": int(self.clock_carriers),
                    "clock_uncertainty_ppm": r(self.clock_uncertainty_ppm, 3),
                    "carrier_tolerance_hz": CARRIER_TOLERANCE_HZ,
                    "dc_i": round(float(self.dc.real), 7),
                    "dc_q": round(float(self.dc.imag), 7) if self.kind == "iq" else None,
                    "dc_separable": bool(self.dc_separable),
                    "start_s": round(float(self.start_s), 6), "seconds": round(float(self.seconds), 6),
                    "notes": list(self.notes)})
        if self.kind != "iq":
            del out["dc_q"]
        return out

    def hints(self) -> list:
        """One line per fault worth correcting, with the option that corrects it."""
        lines = []
        dc = self.dc_offset_dbfs
        if dc is not None and dc > -90.0:
            lines.append(f"DC offset {dc:.1f} dBFS: --correct dc removes it")
        elif not self.dc_separable:
            lines.append("DC offset: not told apart from the carrier at the centre; --correct dc leaves it")
        irr = self.mirror_rejection_db
        if irr is not None and irr < 60.0:
            lines.append(f"I/Q imbalance {self.iq_gain_error_db:+.2f} dB, {self.iq_phase_error_deg:+.2f} deg: "
                         f"every station has a mirror {irr:.1f} dB down about the centre; --correct iq")
        if self.clock_error_ppm is not None and abs(self.clock_error_ppm) >= 1.0:
            lines.append(f"clock error {self.clock_error_ppm:+.2f} ppm ({self.clock_carriers} carriers): carriers "
                         f"read {-self.clock_error_ppm:+.0f} Hz per MHz off; --correct clock (or --ppm)")
        return lines


def estimate_impairments(reader, *, spacing_hz=10e3, start_s=0.0, duration_s=None, progress=None):
    """Estimate the front end's faults from a capture excerpt (one streamed pass).

    Parameters
    ----------
    reader : CaptureReader
    spacing_hz : float or str
        The broadcast channel grid (9k or 10k at MF) that the clock estimate uses.
    start_s, duration_s
        The excerpt.
    progress : callable, optional

    Returns
    -------
    (Impairments, Survey)
        The estimates and the carrier survey of the same pass.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from sdrx.capture import open_writer, open_capture
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "d.sigmf-meta"
    >>> x = 0.01 * np.exp(0.3j) + 1e-3 * np.exp(2j * np.pi * 0.1 * np.arange(400_000))
    >>> with open_writer(p, fs=200e3, kind="iq", datatype="cf32_le", center_hz=1e6) as w:
    ...     _ = w.write(x.astype(np.complex64))
    >>> imp, _ = estimate_impairments(open_capture(p))
    >>> round(imp.dc_offset_dbfs, 2)
    -40.0
    """
    from ..analysis.survey import band_statistics, survey_statistics
    from ..units import parse_frequency

    spacing = parse_frequency(spacing_hz, "--spacing")
    band = band_statistics(reader, spacing_hz=spacing, start_s=start_s, duration_s=duration_s,
                           progress=progress)
    found = survey_statistics(band, spacing)
    return estimate_from_statistics(band, found), found


def estimate_from_statistics(band, found) -> Impairments:
    """The estimates from statistics and a survey already made (see :func:`estimate_impairments`)."""
    from ..analysis.survey import noise_floor

    noise = noise_floor(band)
    notes = []
    iq = (None, None, None)
    beta = None
    if band.kind == "iq":
        beta = _leakage(band, found, noise)
        if beta is not None:
            g_db, p_deg = imbalance_from_leakage(beta)
            iq = (g_db, p_deg, mirror_rejection_db(g_db, p_deg))
    separable = True
    if band.kind == "iq":
        separable, note = _dc_separable(band, found, noise)
        if note:
            notes.append(note)
    ppm, n_used, se = _clock(band, found, iq[2])
    if ppm is None:
        notes.append(f"clock: fewer than {MIN_CLOCK_CARRIERS} carriers on the {found.spacing_hz / 1e3:g} kHz grid "
                     f"agree within {CARRIER_TOLERANCE_HZ:g} Hz")
    return Impairments(kind=band.kind, start_s=band.first / band.fs, seconds=band.seconds, dc=complex(band.dc),
                       dc_separable=separable, iq_gain_error_db=iq[0], iq_phase_error_deg=iq[1],
                       mirror_rejection_db=iq[2], clock_error_ppm=ppm, clock_carriers=n_used,
                       clock_uncertainty_ppm=se, notes=tuple(notes))


# --- I/Q imbalance ---------------------------------------------------------------------

def _line_bins(band, found) -> np.ndarray:
    """Bins holding a line: the survey's carriers and any bin far above its neighbourhood."""
    from scipy.ndimage import median_filter

    p = band.power
    lines = p > median_filter(p, size=33, mode="nearest") * 10.0 ** (_LINE_DB / 10.0)
    for c in found.carriers:
        lines[_bin_of(band, c.freq_hz + c.offset_hz)] = True
    return lines


def _bin_of(band, freq_hz: float) -> int:
    return int(np.clip(round((freq_hz - band.freqs[0]) / band.rbw_hz), 0, band.freqs.size - 1))


def _leakage(band, found, noise):
    n = band.nfft
    mirror = (n - np.arange(n)) % n
    excluded = np.abs(band.freqs - band.center_hz) < found.spacing_hz / 2.0
    excluded[0] = True                                    # −fs/2 is its own mirror
    lines = _line_bins(band, found)
    grow = np.convolve(lines.astype(float), np.ones(2 * _GUARD + 1), mode="same") > 0
    excluded |= grow | grow[mirror]
    p = np.clip(band.power - np.abs(band.mean) ** 2, 0.0, None)
    c = band.complementary - band.mean * band.mean[mirror]
    pair = p + p[mirror]
    keep = ~excluded & (pair > 0.0)
    if not keep.any():
        return None
    # each pair of bins (f, −f) estimates ρ on its own, ρ_f = 2·C(f)/(P(f) + P(−f)), with a
    # relative variance that goes as P(f)·P(−f)/(P(f) + P(−f))²: weigh each by its inverse
    # (a strong station facing noise tells the most; two equal stations facing each other the least)
    rho_f = 2.0 * c[keep] / pair[keep]
    prod = p[keep] * p[mirror][keep]
    w = np.minimum(pair[keep] ** 2 / np.maximum(prod, pair[keep] ** 2 * 1e-6), 1e6)
    rho = complex(np.sum(w * rho_f) / np.sum(w))
    r = abs(rho)
    if not r < 1.0:
        return None
    return rho / (1.0 + math.sqrt(1.0 - r * r))


# --- DC -----------------------------------------------------------------------------------

def _dc_separable(band, found, noise):
    """Can the DC offset be told from a carrier at the centre? (bool, note or None)."""
    from scipy.ndimage import median_filter

    p_res = np.clip(band.power - np.abs(band.mean) ** 2, 0.0, None)
    near = np.flatnonzero(np.abs(band.freqs - band.center_hz) <= found.spacing_hz / 4.0)
    i0 = _bin_of(band, band.center_hz)
    k = int(near[np.argmax(p_res[near])])
    line = float(np.sum(p_res[max(0, k - _LOBE):k + _LOBE + 1]))
    local = float(median_filter(p_res, size=33, mode="nearest")[k])
    if p_res[k] > noise * 10.0 ** (found.threshold_db / 10.0) and p_res[k] > local * 10.0 ** (_LINE_DB / 10.0):
        # a line turning near 0 Hz: how far from 0 Hz (its turn between segments, its mean removed)
        lag = band.lag1[k] - abs(band.mean[k]) ** 2
        delta_hz = band.freqs[k] - band.center_hz + math.atan2(lag.imag, lag.real) / (2 * math.pi) * band.rbw_hz
        cycles = abs(delta_hz) * band.seconds
        if cycles >= DC_RESOLVED_CYCLES:
            return True, None
        return False, (f"a carrier {delta_hz:+.2f} Hz from the centre ({20 * math.log10(math.sqrt(line)):.1f} dBFS) "
                       f"turns only {cycles:.1f} cycles in {band.seconds:.3g} s: it cannot be told from the DC "
                       "offset, so the DC estimate is withheld")
    side = near[np.abs(near - i0) > _LOBE]
    if side.size and float(np.mean(p_res[side])) > noise * 10.0 ** (_CENTRE_DB / 10.0):
        return False, ("sidebands around the centre with no carrier turning there: a station's carrier sits at "
                       "0 Hz, where it cannot be told from the DC offset, so the DC estimate is withheld")
    return True, None


# --- clock ----------------------------------------------------------------------------------

def _clock(band, found, irr_db):
    """(ppm, carriers used, standard error ppm) of the sample-clock error, or (None, 0, None)."""
    rows = []
    dc_bin = _bin_of(band, band.center_hz) if band.kind == "iq" else None
    for c in found.carriers:
        k = _bin_of(band, c.freq_hz + c.offset_hz)
        if dc_bin is not None and abs(k - dc_bin) <= _LOBE + 1:
            continue          # the DC line shares its bins
        if irr_db is not None and _mirror_nearby(band, found, c, k, irr_db):
            continue          # a stronger carrier's mirror shares its bins
        lag = band.lag1[k]
        if lag == 0:
            continue
        f_meas = band.freqs[k] + math.atan2(lag.imag, lag.real) / (2 * math.pi) * band.rbw_hz
        rows.append((c.freq_hz, f_meas))
    if len(rows) < MIN_CLOCK_CARRIERS:
        return None, 0, None
    grid = np.array([r[0] for r in rows])
    meas = np.array([r[1] for r in rows])
    # the largest set of carriers that one clock error puts on their channels
    best = None
    for eps in grid / meas - 1.0:
        ok = np.abs(meas * (1.0 + eps) - grid) <= CARRIER_TOLERANCE_HZ
        if best is None or ok.sum() > best.sum():
            best = ok
    for _ in range(3):
        if best.sum() < MIN_CLOCK_CARRIERS:
            return None, 0, None
        f, g = meas[best], grid[best]
        eps = float(np.sum(f * (g - f)) / np.sum(f * f))
        ok = np.abs(meas * (1.0 + eps) - grid) <= CARRIER_TOLERANCE_HZ
        if np.array_equal(ok, best):
            break
        best = ok
    n = int(best.sum())
    se = None
    if n >= 3:
        f, g = meas[best], grid[best]
        resid = f * (1.0 + eps) - g
        se = float(math.sqrt(np.sum(resid ** 2) / (n - 1)) / math.sqrt(np.sum(f * f)) * 1e6)
    return eps * 1e6, n, se


def _mirror_nearby(band, found, carrier, k, irr_db) -> bool:
    """True when another carrier's mirror, at its level less the mirror rejection, lies within the
    main lobe of this carrier's bin and no more than 30 dB under it."""
    n = band.nfft
    for other in found.carriers:
        if other is carrier:
            continue
        km = (n - _bin_of(band, other.freq_hz + other.offset_hz)) % n
        if abs(km - k) <= 2 * _LOBE and other.level_dbfs - irr_db > carrier.level_dbfs - 30.0:
            return True
    return False
