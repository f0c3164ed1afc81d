"""Filter formulas from the handbooks, computed by the tests' own code (never by the filter-design calls sdrx makes).

- ``if_freq``: the real IF frequency where the low-pass to band-pass variable Ω = (f² − f0²)/(f·B) takes a
  value (the substitution s -> (s² + ω0²)/(s·B); scipy.signal.lp2bp documentation).
- ``chebyshev_att_db``: A(Ω) = 10·log10(1 + ε²·T_n(Ω)²), ε² = 10^(Ap/10) − 1 (Williams & Taylor, Electronic
  Filter Design Handbook, 4th ed. (McGraw-Hill, 2006), ch. 2; from memory), T_n(x) = cos(n·acos x) for
  |x| <= 1 and cosh(n·acosh|x|)·sign(x)^n beyond (Abramowitz & Stegun, Handbook of Mathematical Functions
  (1964), 22.3.15; from memory).
- ``elliptic_stopband_edge``: Ωs from the degree equation n = K(k)·K'(k1) / (K'(k)·K(k1)), k = 1/Ωs,
  k1 = sqrt((10^(Ap/10) − 1)/(10^(As/10) − 1)), K the complete elliptic integral of the first kind (Daniels,
  Approximation Methods for Electronic Filter Design (McGraw-Hill, 1974), elliptic-function filters; from
  memory), solved with scipy.special.ellipk (which takes the parameter m = k²).
- ``single_tuned_power``: 1/(1 + Q²(f/f0 − f0/f)²), the universal resonance curve (Terman, Radio Engineers'
  Handbook (McGraw-Hill, 1943), sec. 3; from memory); ``double_tuned_power``: 4/(4 + x⁴), x = Q(f/f0 − f0/f),
  two identical circuits at critical coupling kQ = 1 (same book, coupled circuits; from memory);
  ``butterworth_bandpass_power``: 1/(1 + Ω^(2n)) (Williams & Taylor, ch. 2; from memory).
- ``preset_response_db`` / ``preset_envelope_response``: the ``medium`` and ``wide`` presets' antenna-to-IF
  response from those formulas (complex: the Butterworth low-pass poles exp(jπ(2k + n − 1)/(2n)), the tuned
  circuits 1/(1 + jx) and 2/((1 + jx)² + 1)) and the presets' published parameters (README: presets),
  high-side LO, so an RF offset +d lands at IF − d.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import optimize, special

__all__ = ["if_freq", "chebyshev_t", "chebyshev_att_db", "elliptic_stopband_edge", "single_tuned_power",
           "double_tuned_power", "butterworth_bandpass_power", "preset_response_db"]

IF_HZ = 455e3


def if_freq(omega, bw_hz: float, f0_hz: float):
    """Real IF frequency (Hz) where Ω = (f² − f0²)/(f·B) takes ``omega`` (scalar or array)."""
    om = np.asarray(omega, dtype=float)
    f = (om * bw_hz + np.sqrt((om * bw_hz) ** 2 + 4 * f0_hz * f0_hz)) / 2
    return float(f) if f.ndim == 0 else f


def chebyshev_t(n: int, x):
    """Chebyshev polynomial of the first kind T_n(x), any real x."""
    x = np.asarray(x, dtype=float)
    inside = np.cos(n * np.arccos(np.clip(x, -1.0, 1.0)))
    outside = np.sign(x) ** n * np.cosh(n * np.arccosh(np.maximum(np.abs(x), 1.0)))
    return np.where(np.abs(x) <= 1.0, inside, outside)


def chebyshev_att_db(n: int, ripple_db: float, omega):
    """Chebyshev type I attenuation at Ω, dB (0 at the ripple peaks)."""
    eps2 = 10 ** (ripple_db / 10) - 1
    a = 10 * np.log10(1 + eps2 * chebyshev_t(n, omega) ** 2)
    return float(a) if a.ndim == 0 else a


def elliptic_stopband_edge(n: int, ripple_db: float, stop_db: float) -> float:
    """Stopband edge Ωs (ripple band edge 1) of an elliptic low-pass of order n, Ap and As."""
    k1 = math.sqrt((10 ** (ripple_db / 10) - 1) / (10 ** (stop_db / 10) - 1))
    ratio = n * special.ellipk(k1 * k1) / special.ellipk(1 - k1 * k1)
    k = optimize.brentq(lambda x: special.ellipk(x * x) / special.ellipk(1 - x * x) - ratio, 1e-9, 1 - 1e-15,
                        xtol=1e-15)
    return 1.0 / k


def single_tuned_power(f_hz, f0_hz: float, q: float):
    """|H|² of one tuned circuit of loaded Q, 1 at f0."""
    f = np.asarray(f_hz, dtype=float)
    return 1 / (1 + (q * (f / f0_hz - f0_hz / f)) ** 2)


def double_tuned_power(f_hz, f0_hz: float, q: float):
    """|H|² of two identical tuned circuits at critical coupling, 1 on the flat top."""
    f = np.asarray(f_hz, dtype=float)
    x = q * (f / f0_hz - f0_hz / f)
    return 4 / (4 + x ** 4)


def butterworth_bandpass_power(f_hz, f0_hz: float, bw_hz: float, n: int):
    """|H|² of a Butterworth low-pass of order n moved to a band-pass of −3 dB width bw about f0."""
    f = np.asarray(f_hz, dtype=float)
    omega = (f * f - f0_hz * f0_hz) / (f * bw_hz)
    return 1 / (1 + omega ** (2 * n))


def _butterworth_lowpass(n: int, omega):
    """Complex Butterworth low-pass at s = jΩ: 1/Π(s − p_k), p_k = exp(jπ(2k + n − 1)/(2n)), k = 1..n."""
    s = 1j * np.asarray(omega, dtype=float)
    h = np.ones(s.shape, complex)
    for k in range(1, n + 1):
        h = h / (s - np.exp(1j * math.pi * (2 * k + n - 1) / (2 * n)))
    return h


def _tuned(f, f0, q, double=False):
    """Complex single-tuned 1/(1 + jx), or critically coupled pair 2/((1 + jx)² + 1), x = Q(f/f0 − f0/f)."""
    x = q * (f / f0 - f0 / f)
    return 2 / ((1 + 1j * x) ** 2 + 1) if double else 1 / (1 + 1j * x)


def preset_envelope_response(preset: str, tune_hz: float, f_rf_hz, preselector: bool = True):
    """The ``medium`` or ``wide`` preset's complex response seen by the upright envelope, 1 at the tune.

    The preselector acts at RF; the high-side mixer moves RF tune + d to IF − d with the spectrum inverted,
    so the IF stages act on the envelope as conj(H_IF(IF − d)) (|u| = |conj u|). Butterworth stages are
    the low-pass poles at Ω = (f² − f0²)/(f·B) (the band-pass substitution, exact for the complex response).
    """
    f = np.asarray(f_rf_hz, dtype=float)
    f_if = IF_HZ - (f - tune_hz)
    if preset == "medium":   # tracking Q 40; Butterworth order 2, 9 kHz; single-tuned Q 60
        h = _butterworth_lowpass(2, (f_if ** 2 - IF_HZ ** 2) / (f_if * 9e3)) * _tuned(f_if, IF_HZ, 60.0)
        q_pre = 40.0
    elif preset == "wide":   # tracking Q 30; Butterworth order 3, 16 kHz; double-tuned 20 kHz wide
        h = (_butterworth_lowpass(3, (f_if ** 2 - IF_HZ ** 2) / (f_if * 16e3))
             * _tuned(f_if, IF_HZ, math.sqrt(2) * IF_HZ / 20e3, double=True))
        q_pre = 30.0
    else:
        raise ValueError(f"no formula for preset {preset!r}")
    h = np.conj(h)
    if preselector:
        h = h * _tuned(f, tune_hz, q_pre)
    return h


def preset_response_db(preset: str, tune_hz: float, f_rf_hz, preselector: bool = True):
    """Designed response of the ``medium`` or ``wide`` preset at RF f re the tune, dB, from the formulas."""
    h = preset_envelope_response(preset, tune_hz, f_rf_hz, preselector)
    h0 = preset_envelope_response(preset, tune_hz, tune_hz, preselector)
    r = 20 * np.log10(np.abs(h / h0))
    return float(r) if np.ndim(r) == 0 else r
