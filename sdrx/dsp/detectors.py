"""AM detectors working on the complex envelope of the IF output.

- ``envelope``: the ideal envelope detector, |u|.
- ``diode``: an ideal diode charging an RC load to the IF peaks; between
  peaks the capacitor discharges as exp(−t/RC). When the envelope falls
  faster than the RC can follow, the output follows the exponential instead:
  diagonal clipping, absent when RC ≤ sqrt(1 − m²)/(2π·fm·m)
  (diode detector with RC load: Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2, envelope
  detection; from memory).
- ``synchronous``: a carrier-locked (PLL) product detector, Re{u·e^{−jθ}}; with
  ``sideband`` lower or upper, only that sideband of the carrier-locked
  envelope z = u·e^{−jθ} is detected, 2·Re{F(z)}, F a complex band-pass
  passing the chosen side of the carrier (see :func:`sideband_sos`).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import signal

__all__ = ["EnvelopeDetector", "DiodeDetector", "SynchronousDetector", "make_detector", "diagonal_clipping_limit_s",
           "sideband_sos", "SIDEBAND_RIPPLE_DB", "SIDEBAND_REJECTION_DB"]

SIDEBAND_RIPPLE_DB = 0.1       # passband ripple of the sideband filter
SIDEBAND_REJECTION_DB = 60.0   # its rejection of the other sideband
LOCK_ERROR_DEG = 30.0          # an interval is in lock when the loop's phase error is within this (common practice)
LOCK_FRACTION = 0.9            # and the loop is "locked" when that many intervals (after settling) are
LOCK_SETTLE_S = 0.05           # intervals before this are left out of the lock statistics


def diagonal_clipping_limit_s(m: float, fm_hz: float) -> float:
    """Largest RC (s) free of diagonal clipping for depth m at modulating frequency fm.

    Examples
    --------
    >>> round(diagonal_clipping_limit_s(0.3, 1000.0) * 1e6, 0)   # sqrt(1 − 0.09)/(2π·1000·0.3) = 506 µs
    506.0
    """
    if m <= 0:
        return math.inf
    if m >= 1:
        return 0.0
    return math.sqrt(1 - m * m) / (2 * math.pi * fm_hz * m)


class EnvelopeDetector:
    """Ideal envelope detector (stateless)."""

    def process(self, u: np.ndarray, mag=None) -> np.ndarray:
        """|u| (``mag`` passes it when the caller has it already)."""
        return np.abs(u) if mag is None else mag


class DiodeDetector:
    """Ideal diode with an RC load: v[n] = max(|u[n]|, v[n−1]·e^{−T/RC}).

    Computed without a Python loop: with a = e^{−T/RC},
    v[n] = a^n · max_k(|u[k]|·a^{−k}), a running maximum in the log domain.

    Examples
    --------
    >>> d = DiodeDetector(rc_s=1e-3, fs=1000.0)
    >>> [round(float(v), 3) for v in d.process(np.array([1.0, 0.0, 0.0, 0.5]))]
    [1.0, 0.368, 0.135, 0.5]
    """

    def __init__(self, rc_s: float, fs: float):
        self.rc_s = rc_s
        self.fs = fs
        self.la = -1.0 / (rc_s * fs)   # log of the per-sample discharge
        self.v = 0.0                   # capacitor voltage (state)
        self._chunk = 4096             # keeps k·|la| small enough for float64 logs
        self._pos = 0                  # samples into the current chunk (state; chunks are absolute)
        self._cm = -math.inf           # running maximum of log|u[k]| − k·la in the current chunk (state)

    def process(self, u: np.ndarray, mag=None) -> np.ndarray:
        """Capacitor voltage for the envelope |u| (``mag`` passes |u| when the caller has it)."""
        if mag is None:
            mag = np.abs(u)
        n = len(mag)
        if n == 0:
            return mag
        out = np.empty(n)
        chunk = self._chunk
        pos = 0
        while pos < n:
            if self._pos == 0:
                # a new chunk starts from the capacitor voltage, decayed one step before its first sample
                self._cm = math.log(max(self.v, 1e-300)) + self.la
            take = min(chunk - self._pos, n - pos)
            m = mag[pos:pos + take]
            k = self._pos + np.arange(take)
            with np.errstate(divide="ignore"):
                b = np.log(np.maximum(m, 1e-300)) - k * self.la
            b[0] = max(b[0], self._cm)
            cm = np.maximum.accumulate(b)
            seg = np.exp(cm + k * self.la)
            out[pos:pos + take] = seg
            self._cm = float(cm[-1])
            self.v = float(seg[-1])
            self._pos = (self._pos + take) % chunk
            pos += take
        return out


def sideband_sos(fs: float, low_hz: float, high_hz: float, side: int) -> np.ndarray:
    """Complex sos passing one sideband, ``low_hz``..``high_hz`` above (side +1) or below (−1) 0 Hz.

    An elliptic low-pass of half-width (high − low)/2 and stop edge 2·low
    further out (so that its stop band begins ``low_hz`` on the other side of
    the carrier), moved to the band's centre by z → z·e^{−jω_c} (each section's
    k-th coefficients times e^{jkω_c}: the frequency-shift property of the
    z-transform; Oppenheim & Schafer, *Discrete-Time Signal Processing*).
    This is the filter method of sideband selection in the carrier-locked
    envelope (common practice in single-sideband receivers).

    Examples
    --------
    >>> sos = sideband_sos(96000.0, 80.0, 4500.0, -1)
    >>> _, h = signal.sosfreqz(sos, worN=[-1000.0, 1000.0], fs=96000.0, whole=True)
    >>> round(float(20 * np.log10(abs(h[0]))), 1), bool(20 * np.log10(abs(h[1])) < -59)
    (0.0, True)
    """
    half = 0.5 * (high_hz - low_hz)
    order, wn = signal.ellipord(half, half + 2 * low_hz, SIDEBAND_RIPPLE_DB, SIDEBAND_REJECTION_DB, fs=fs)
    sos = signal.ellip(order, SIDEBAND_RIPPLE_DB, SIDEBAND_REJECTION_DB, wn, fs=fs, output="sos").astype(complex)
    wc = side * 2 * math.pi * (0.5 * (high_hz + low_hz)) / fs
    rot = np.exp(1j * wc * np.arange(3))
    sos[:, :3] *= rot
    sos[:, 3:] *= rot
    return sos


class SynchronousDetector:
    """Carrier-locked product detector with a second-order PLL at a control rate.

    The loop compares the phase of the summed envelope over each control
    interval with its prediction and corrects phase and frequency
    (proportional-integral loop filter, damping 0.707). It starts on the
    phase of the first sample (a receiver already tuned to the carrier: no
    acquisition transient), and a single sideband's filter starts in its
    steady state for the first sample's carrier.

    Parameters
    ----------
    fs : float
        Channel rate, Hz.
    bandwidth_hz : float
        PLL noise bandwidth.
    step : int
        Samples per control interval.
    sideband : {"both", "lower", "upper"}
        The RF sideband(s) detected.
    inverted : bool
        The IF envelope is spectrally inverted (high-side LO): the RF lower
        sideband lies above the carrier in u.
    band_hz : (float, float)
        The audio band a single sideband is taken over.

    Attributes
    ----------
    lock_intervals, intervals : int
        Control intervals after the first ``LOCK_SETTLE_S`` with the phase
        error within ``LOCK_ERROR_DEG``, and all of them.

    Examples
    --------
    >>> fs = 96000.0
    >>> n = np.arange(48000)
    >>> u = 0.5 * np.exp(1j * (2 * np.pi * 3.0 * n / fs + 1.0))      # a carrier 3 Hz off, phase 1 rad
    >>> det = SynchronousDetector(fs)
    >>> y = det.process(u)
    >>> det.locked, round(det.offset_hz, 2), round(float(y[-1]), 4)
    (True, 3.0, 0.5)
    """

    def __init__(self, fs: float, bandwidth_hz: float = 50.0, step: int = 32, sideband: str = "both",
                 inverted: bool = False, band_hz=(80.0, 4500.0)):
        self.fs = fs
        self.step = step
        T = step / fs
        zeta = 0.707
        wn = 2 * math.pi * bandwidth_hz / (zeta + 1 / (4 * zeta))
        self.alpha = 2 * zeta * wn * T
        self.beta = (wn * T) ** 2
        self.theta = None  # phase at the start of the current control interval (state; set by the first sample)
        self.omega = 0.0   # rad per sample (state)
        self._acc = 0j     # rotated envelope summed over the unfinished interval
        self._acc_n = 0
        self.sign = -1.0 if inverted else 1.0   # RF offset = sign × the loop's offset in u
        self.sos = None
        if sideband != "both":
            side = -1 if (sideband == "lower") != inverted else 1
            self.sos = sideband_sos(fs, band_hz[0], band_hz[1], side)
            self.zi = None   # set on the first sample: the steady state for the carrier alone
        self._settle = int(math.ceil(LOCK_SETTLE_S * fs / step))
        self._n_int = 0                 # control intervals completed
        self.intervals = 0
        self.lock_intervals = 0
        self._omega_sum = 0.0

    def process(self, u: np.ndarray, mag=None) -> np.ndarray:
        """Detected audio: Re{z}, or 2·Re{F(z)} for one sideband (``mag`` is not used)."""
        n = len(u)
        if n and self.theta is None:
            self.theta = math.atan2(float(np.imag(u[0])), float(np.real(u[0])))
        z = np.empty(n, complex)
        step = self.step
        pos = 0
        while pos < n:
            take = min(step - self._acc_n, n - pos)
            k = self._acc_n + np.arange(take)
            rot = u[pos:pos + take] * np.exp(-1j * (self.theta + self.omega * k))
            z[pos:pos + take] = rot
            self._acc += complex(np.sum(rot))
            self._acc_n += take
            pos += take
            if self._acc_n == step:
                e = math.atan2(self._acc.imag, self._acc.real)
                self._count(e)
                self.theta = (self.theta + self.omega * step + self.alpha * e) % (2 * math.pi)
                self.omega += self.beta * e / step
                self._acc, self._acc_n = 0j, 0
        if self.sos is None or n == 0:
            return z.real
        if self.zi is None:
            # as if the carrier-locked envelope had always been its first value: no start-up step
            self.zi = signal.sosfilt_zi(self.sos) * z[0]
        zs, self.zi = signal.sosfilt(self.sos, z, zi=self.zi)
        return 2.0 * zs.real

    def _count(self, e: float) -> None:
        self._n_int += 1
        if self._n_int > self._settle:
            self.intervals += 1
            self.lock_intervals += abs(e) <= math.radians(LOCK_ERROR_DEG)
            self._omega_sum += self.omega

    @property
    def locked(self) -> bool:
        """The carrier loop held lock (``LOCK_FRACTION`` of the intervals after settling)."""
        return self.intervals > 0 and self.lock_intervals >= LOCK_FRACTION * self.intervals

    @property
    def offset_hz(self) -> float:
        """Mean carrier frequency offset from the tuning the loop followed, Hz (RF sense)."""
        if not self.intervals:
            return float("nan")
        return self.sign * self._omega_sum / self.intervals * self.fs / (2 * math.pi)


def make_detector(spec, fs: float, inverted: bool = False, audio=None):
    """Detector object for a DetectorSpec at rate fs.

    ``inverted``: the IF envelope is spectrally inverted (high-side LO), which
    decides where a synchronous detector finds the RF lower sideband;
    ``audio`` (an AudioSpec) gives the band a single sideband is taken over.
    """
    if spec.kind == "envelope":
        return EnvelopeDetector()
    if spec.kind == "diode":
        return DiodeDetector(spec.rc_us * 1e-6, fs)
    band = (80.0, 4500.0) if audio is None else (audio.highpass_hz, audio.lowpass_hz)
    return SynchronousDetector(fs, spec.pll_bandwidth_hz, sideband=spec.sideband, inverted=inverted, band_hz=band)
