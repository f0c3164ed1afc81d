"""Phase accumulator (NCO) in 64-bit fixed point, exact for any block split.

The phase of sample ``n`` is ``(n * step) mod 2**64`` in units of 2**-64
cycles, computed from the absolute sample index with wrapping unsigned
integer arithmetic. The result does not depend on how the samples are cut
into blocks, and does not lose precision after hours of samples (a float
accumulator would drift, and ``f * n / fs`` in float64 loses the fraction
once ``f * n`` passes 2**53).
"""

from __future__ import annotations

import numpy as np

__all__ = ["phase_step", "phase_offset", "phase_cycles"]

_TWO64 = 2**64


def phase_step(freq_hz: float, fs: float) -> np.uint64:
    """Phase increment per sample for ``freq_hz`` at rate ``fs``, in 2**-64 cycles.

    Negative frequencies wrap (two's complement), as in a hardware NCO.

    Examples
    --------
    >>> int(phase_step(0.25, 1.0)) == 2**62
    True
    """
    return np.uint64(int(round((freq_hz / fs) * _TWO64)) % _TWO64)


def phase_offset(cycles: float) -> np.uint64:
    """A phase offset given in cycles (any real number), in 2**-64 cycles."""
    frac = float(cycles) % 1.0
    return np.uint64(int(round(frac * _TWO64)) % _TWO64)


def phase_cycles(start: int, count: int, step: np.uint64, offset: np.uint64 = np.uint64(0)) -> np.ndarray:
    """Phase in cycles, in [0, 1), of samples ``start .. start+count-1``.

    Parameters
    ----------
    start : int
        Absolute index of the first sample (>= 0).
    count : int
        Number of samples.
    step : numpy.uint64
        From :func:`phase_step`.
    offset : numpy.uint64
        Phase of sample 0, from :func:`phase_offset`.

    Returns
    -------
    numpy.ndarray of float64

    Notes
    -----
    phase[n] = ((n·step + offset) mod 2**64) / 2**64; the top 53 bits are kept
    so the conversion to float64 is exact.

    Examples
    --------
    >>> phase_cycles(0, 4, phase_step(0.25, 1.0)).tolist()
    [0.0, 0.25, 0.5, 0.75]
    """
    n = np.arange(start, start + count, dtype=np.uint64)
    with np.errstate(over="ignore"):
        acc = n * np.uint64(step) + np.uint64(offset)
    return (acc >> np.uint64(11)).astype(np.float64) * (2.0**-53)
