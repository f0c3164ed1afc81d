"""AM detectors working on the complex envelope of the IF output.

- ``envelope``: the ideal envelope detector, |u|.
- ``diode``: an ideal diode charging an RC load to the IF peaks; between
  peaks the capacitor discharges as exp(−t/RC). When the envelope falls
  faster than the RC can follow, the output follows the exponential instead:
  diagonal clipping, absent when RC ≤ sqrt(1 − m²)/(2π·fm·m)
  (diode detector with RC load: Haykin, Communication Systems, 4th ed. (Wiley, 2001), ch. 2, envelope
  detection; from memory).
- ``synchronous``: a carrier-locked (PLL) product detector, Re{u·e^{−jθ}}.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["EnvelopeDetector", "DiodeDetector", "SynchronousDetector", "make_detector", "diagonal_clipping_limit_s"]


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


class SynchronousDetector:
    """Carrier-locked product detector with a second-order PLL at a control rate.

    The loop compares the phase of the summed envelope over each control
    interval with its prediction and corrects phase and frequency
    (proportional-integral loop filter, damping 0.707).
    """

    def __init__(self, fs: float, bandwidth_hz: float = 50.0, step: int = 32):
        self.fs = fs
        self.step = step
        T = step / fs
        zeta = 0.707
        wn = 2 * math.pi * bandwidth_hz / (zeta + 1 / (4 * zeta))
        self.alpha = 2 * zeta * wn * T
        self.beta = (wn * T) ** 2
        self.theta = 0.0   # phase at the start of the current control interval (state)
        self.omega = 0.0   # rad per sample (state)
        self._acc = 0j     # rotated envelope summed over the unfinished interval
        self._acc_n = 0

    def process(self, u: np.ndarray, mag=None) -> np.ndarray:
        """In-phase component against the recovered carrier (``mag`` is not used)."""
        out = np.empty(len(u))
        step = self.step
        pos = 0
        while pos < len(u):
            take = min(step - self._acc_n, len(u) - pos)
            k = self._acc_n + np.arange(take)
            rot = u[pos:pos + take] * np.exp(-1j * (self.theta + self.omega * k))
            out[pos:pos + take] = rot.real
            self._acc += complex(np.sum(rot))
            self._acc_n += take
            pos += take
            if self._acc_n == step:
                e = math.atan2(self._acc.imag, self._acc.real)
                self.theta = (self.theta + self.omega * step + self.alpha * e) % (2 * math.pi)
                self.omega += self.beta * e / step
                self._acc, self._acc_n = 0j, 0
        return out


def make_detector(spec, fs: float):
    """Detector object for a DetectorSpec at rate fs."""
    if spec.kind == "envelope":
        return EnvelopeDetector()
    if spec.kind == "diode":
        return DiodeDetector(spec.rc_us * 1e-6, fs)
    return SynchronousDetector(fs, spec.pll_bandwidth_hz)
