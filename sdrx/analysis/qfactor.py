"""Loaded Q of tuned circuits: resonance curves, bandwidths and the Q a rejection needs.

Exact forms throughout (no narrow-band approximation unless a function says
so). The normalised detuning of a circuit tuned to ``f0`` at frequency ``f``
is ``rho = f/f0 - f0/f``; a single-tuned circuit of loaded Q then has

    |H(f)| / H0 = 1 / sqrt(1 + (Q·rho)²)                     (universal resonance curve)

(Terman, Radio Engineers' Handbook, McGraw-Hill 1943, sec. 3; from memory)

and a pair of identical circuits at critical coupling (k·Q = 1)

    |H(f)| / H0 = 2 / sqrt(4 + (Q·rho)⁴)                     (coupled circuits, same book)

Because ``rho`` is odd under f -> f0²/f, every x-dB *width* follows exactly:
``f2 - f1 = f0·X/Q`` where ``X`` is the value of ``Q·rho`` at x dB.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError
from ..units import format_frequency

__all__ = [
    "KINDS",
    "detuning",
    "single_tuned_response",
    "single_tuned_attenuation_db",
    "double_tuned_attenuation_db",
    "stage_attenuation_db",
    "single_tuned_bandwidth",
    "double_tuned_bandwidth",
    "cascade_bandwidth",
    "shrinkage_factor",
    "double_tuned_shrinkage_factor",
    "q_for_bandwidth",
    "q_for_rejection",
    "shortcut_q",
    "preselector_image_rejection_db",
]

#: Circuit kinds understood by the solvers: one single-tuned circuit per stage,
#: or a critically coupled pair of identical circuits per stage.
KINDS = ("single", "double")


def _positive(value, name):
    v = float(value)
    if not math.isfinite(v) or v <= 0:
        raise ParameterError(f"{name}: must be a positive finite number, got {value!r}")
    return v


def _stages(n):
    if isinstance(n, bool) or int(n) != n or int(n) < 1:
        raise ParameterError(f"stages: must be a whole number >= 1, got {n!r}")
    return int(n)


def _kind(kind):
    if kind not in KINDS:
        raise ParameterError(f"kind: {kind!r} is not one of {', '.join(KINDS)}")
    return kind


def detuning(f_hz, f0_hz):
    """Normalised detuning ``rho = f/f0 - f0/f``.

    Parameters
    ----------
    f_hz : float or array_like
        Frequency, Hz (> 0).
    f0_hz : float
        Resonant frequency, Hz.

    Returns
    -------
    float or ndarray

    Notes
    -----
    rho(f0²/f) = -rho(f): the resonance curve is geometrically symmetric.

    Examples
    --------
    >>> round(float(detuning(1910e3, 1000e3)), 4)
    1.3864
    """
    f = np.asarray(f_hz, dtype=float)
    out = f / f0_hz - f0_hz / f
    return float(out) if out.ndim == 0 else out


def single_tuned_response(f_hz, f0_hz, q):
    """Complex response of a single-tuned circuit, unity at resonance.

    Parameters
    ----------
    f_hz : float or array_like
        Frequencies, Hz.
    f0_hz : float
        Resonant frequency, Hz.
    q : float
        Loaded Q.

    Returns
    -------
    complex or ndarray of complex
        ``1 / (1 + j·Q·rho)``.

    Notes
    -----
    Parallel RLC (or series RLC voltage across R) normalised to its peak;
    the magnitude is the universal resonance curve (Terman, Radio Engineers'
    Handbook, McGraw-Hill 1943, sec. 3; from memory).

    Examples
    --------
    >>> abs(single_tuned_response(455e3, 455e3, 50))
    1.0
    """
    h = 1.0 / (1.0 + 1j * q * np.asarray(detuning(f_hz, f0_hz)))
    return complex(h) if np.ndim(h) == 0 else h


def single_tuned_attenuation_db(f_hz, f0_hz, q, stages=1):
    """Attenuation (positive dB) of ``stages`` identical single-tuned circuits.

    Notes
    -----
    ``A = stages · 10·log10(1 + Q²·rho²)`` (universal resonance curve).

    Examples
    --------
    >>> round(single_tuned_attenuation_db(1910e3, 1000e3, 100), 2)
    42.84
    """
    n = _stages(stages)
    x = q * np.asarray(detuning(f_hz, f0_hz))
    out = n * 10.0 * np.log10(1.0 + x * x)
    return float(out) if np.ndim(out) == 0 else out


def double_tuned_attenuation_db(f_hz, f0_hz, q, stages=1):
    """Attenuation (positive dB) of critically coupled double-tuned stages.

    Notes
    -----
    Two identical circuits of loaded Q, coupling k = 1/Q:
    ``|H|/H0 = 2/sqrt(4 + X⁴)`` with ``X = Q·rho`` (coupled circuits: Terman,
    Radio Engineers' Handbook, McGraw-Hill 1943, sec. 3; from memory),
    so ``A = stages · 10·log10(1 + X⁴/4)``.

    Examples
    --------
    >>> round(double_tuned_attenuation_db(455e3 * 1.01, 455e3, 50), 3)
    0.952
    """
    n = _stages(stages)
    x = q * np.asarray(detuning(f_hz, f0_hz))
    out = n * 10.0 * np.log10(1.0 + x**4 / 4.0)
    return float(out) if np.ndim(out) == 0 else out


def stage_attenuation_db(f_hz, f0_hz, q, stages=1, kind="single"):
    """Attenuation of ``stages`` identical stages of the given ``kind``.

    Examples
    --------
    >>> stage_attenuation_db(455e3, 455e3, 80, 2, "double")
    0.0
    """
    if _kind(kind) == "single":
        return single_tuned_attenuation_db(f_hz, f0_hz, q, stages)
    return double_tuned_attenuation_db(f_hz, f0_hz, q, stages)


def _x_at(att_db_per_stage, kind):
    """Value of |Q·rho| at which one stage is ``att_db_per_stage`` down."""
    a = 10.0 ** (att_db_per_stage / 10.0) - 1.0
    if kind == "single":
        return math.sqrt(a)
    return math.sqrt(2.0) * a**0.25


def single_tuned_bandwidth(f0_hz, q, x_db=10 * math.log10(2)):
    """Full width at ``x_db`` down of one single-tuned circuit (exact).

    Parameters
    ----------
    f0_hz : float
        Resonant frequency, Hz.
    q : float
        Loaded Q.
    x_db : float
        Attenuation at which the width is taken, dB (default 3.01 dB, half power).

    Returns
    -------
    float
        ``(f0/Q)·sqrt(10^(x/10) - 1)``, Hz.

    Notes
    -----
    Universal resonance curve; for large x the width tends to
    ``(f0/Q)·10^(x/20)``.

    Examples
    --------
    >>> round(single_tuned_bandwidth(455e3, 50), 1)
    9100.0
    """
    return cascade_bandwidth(f0_hz, q, x_db, stages=1, kind="single")


def double_tuned_bandwidth(f0_hz, q, x_db=10 * math.log10(2)):
    """Full width at ``x_db`` of one critically coupled double-tuned stage (exact).

    Notes
    -----
    ``BW = sqrt(2)·(f0/Q)·(10^(x/10) - 1)^(1/4)``; at half power
    ``sqrt(2)·f0/Q`` (coupled circuits: Terman, Radio Engineers' Handbook,
    McGraw-Hill 1943, sec. 3; from memory).

    Examples
    --------
    >>> round(double_tuned_bandwidth(455e3, 50), 1)
    12869.3
    """
    return cascade_bandwidth(f0_hz, q, x_db, stages=1, kind="double")


def cascade_bandwidth(f0_hz, q, x_db=10 * math.log10(2), stages=1, kind="single"):
    """Full width at ``x_db`` of ``stages`` identical synchronously tuned stages.

    Parameters
    ----------
    f0_hz, q : float
        Resonant frequency (Hz) and loaded Q of every circuit.
    x_db : float
        Total attenuation at the band edges, dB (> 0).
    stages : int
        Number of identical stages (>= 1).
    kind : {"single", "double"}
        Single-tuned circuits, or critically coupled pairs.

    Returns
    -------
    float
        Width in Hz: each stage is ``x_db/stages`` down at the edges.

    Notes
    -----
    At half power this gives the shrinkage ``sqrt(2^(1/n) - 1)`` for single
    and ``(2^(1/n) - 1)^(1/4)`` for double-tuned stages (synchronous
    tuning: Terman, Electronic and Radio Engineering, 4th ed., McGraw-Hill 1955,
    tuned amplifiers; from memory).

    Examples
    --------
    >>> round(cascade_bandwidth(455e3, 50, stages=3), 1)
    4639.4
    """
    f0 = _positive(f0_hz, "f0")
    qq = _positive(q, "q")
    x = _positive(x_db, "x_db")
    n = _stages(stages)
    return f0 / qq * _x_at(x / n, _kind(kind))


def shrinkage_factor(stages):
    """Half-power bandwidth of n single-tuned stages over that of one.

    Examples
    --------
    >>> round(shrinkage_factor(3), 4)
    0.5098
    """
    n = _stages(stages)
    return math.sqrt(2.0 ** (1.0 / n) - 1.0)


def double_tuned_shrinkage_factor(stages):
    """Half-power bandwidth of n critically coupled stages over that of one.

    Examples
    --------
    >>> round(double_tuned_shrinkage_factor(2), 4)
    0.8022
    """
    n = _stages(stages)
    return (2.0 ** (1.0 / n) - 1.0) ** 0.25


def q_for_bandwidth(f0_hz, bandwidth_hz, x_db=10 * math.log10(2), stages=1, kind="single"):
    """Loaded Q per circuit giving a full width ``bandwidth_hz`` at ``x_db`` (exact).

    Examples
    --------
    >>> round(q_for_bandwidth(455e3, 18e3, 20.0), 1)   # 455·sqrt(99)/18
    251.5
    """
    f0 = _positive(f0_hz, "f0")
    bw = _positive(bandwidth_hz, "bandwidth")
    x = _positive(x_db, "x_db")
    n = _stages(stages)
    return f0 / bw * _x_at(x / n, _kind(kind))


def q_for_rejection(f0_hz, offset_hz, rejection_db, stages=1, kind="single"):
    """Loaded Q per circuit so that ``stages`` stages reject ``offset_hz`` by ``rejection_db``.

    Parameters
    ----------
    f0_hz : float
        Centre (resonant) frequency, Hz.
    offset_hz : float
        Offset of the signal to reject, Hz (0 < offset < f0).
    rejection_db : float
        Required rejection, dB (> 0).
    stages : int
        Identical stages sharing the rejection equally.
    kind : {"single", "double"}

    Returns
    -------
    float
        The larger of the Q values needed at ``f0 + offset`` and
        ``f0 - offset``; the upper side always needs more (|rho| is smaller
        there), so this is ``X / rho(f0 + offset)``.

    Raises
    ------
    ParameterError
        If the offset is not inside (0, f0) or a value is not positive.

    Notes
    -----
    Exact forms: single ``Q·rho = sqrt(10^(R/10n) - 1)``; double, critical
    coupling, ``Q·rho = sqrt(2)·(10^(R/10n) - 1)^(1/4)``.

    Examples
    --------
    >>> round(q_for_rejection(455e3, 9e3, 20.0), 1)
    253.9
    """
    f0 = _positive(f0_hz, "f0")
    d = _positive(offset_hz, "offset")
    r = _positive(rejection_db, "rejection")
    n = _stages(stages)
    if d >= f0:
        raise ParameterError(f"offset: {format_frequency(d)} must be below the centre frequency {format_frequency(f0)}")
    rho = abs(detuning(f0 + d, f0))
    return _x_at(r / n, _kind(kind)) / rho


def shortcut_q(f0_hz, offset_hz, rejection_db):
    """The large-attenuation shortcut ``Q ≈ 10^(x/20)·f0/BW_x`` with ``BW_x = 2·offset``.

    Notes
    -----
    Drops the 1 under the square root and uses the arithmetic width; compare
    with :func:`q_for_rejection` for its error.

    Examples
    --------
    >>> round(shortcut_q(455e3, 9e3, 20.0), 1)
    252.8
    """
    f0 = _positive(f0_hz, "f0")
    d = _positive(offset_hz, "offset")
    return 10.0 ** (float(rejection_db) / 20.0) * f0 / (2.0 * d)


def preselector_image_rejection_db(tune_hz, image_hz, q, stages=1):
    """Image rejection of single-tuned RF circuits tuned to the wanted carrier.

    Notes
    -----
    ``alpha = sqrt(1 + Q²·rho²)``, ``rho = f_im/f - f/f_im`` per circuit
    (Kennedy & Davis, Electronic Communication Systems, 4th ed.,
    McGraw-Hill 1999, receivers chapter; from memory).

    Examples
    --------
    >>> round(preselector_image_rejection_db(1000e3, 1910e3, 100), 1)
    42.8
    """
    return single_tuned_attenuation_db(image_hz, tune_hz, q, stages)
