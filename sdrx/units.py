"""Parsing of frequencies and levels, and decibel helpers.

Frequencies are floats in Hz everywhere inside sdrx; users may write them as
numbers or as strings with a k/M/G suffix ("455k", "1.13M", "9k", "80").
"""

from __future__ import annotations

import math
import re

import numpy as np

from .errors import ParameterError

__all__ = [
    "to_float",
    "parse_frequency",
    "parse_seconds",
    "parse_db",
    "db20",
    "db10",
    "from_db20",
    "from_db10",
    "validate_fs",
    "format_frequency",
]

_SUFFIX = {"": 1.0, "k": 1e3, "K": 1e3, "m": 1e6, "M": 1e6, "g": 1e9, "G": 1e9}
_FREQ_RE = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([kKmMgG]?)\s*(?:hz|Hz|HZ)?\s*$")


def to_float(value, name: str) -> float:
    """A number (int, float, numpy scalar) as a float; an integer beyond float range is an error.

    Examples
    --------
    >>> to_float(3, "x")
    3.0
    >>> to_float(10 ** 400, "core:sample_rate")
    Traceback (most recent call last):
    ...
    sdrx.errors.ParameterError: core:sample_rate: 1000000000000000... is beyond the range of numbers (about 1.8e308)
    """
    try:
        return float(value)
    except OverflowError:
        raise ParameterError(f"{name}: {str(value)[:16]}... is beyond the range of numbers (about 1.8e308)") from None


def parse_frequency(value, name: str = "frequency", *, allow_negative: bool = False) -> float:
    """Parse a frequency given as a number or a string with a k/M/G suffix.

    Parameters
    ----------
    value : float, int or str
        ``455000``, ``"455k"``, ``"1.13M"``, ``"9 kHz"``.
    name : str
        Name of the option or key, used in the error message.
    allow_negative : bool
        Accept negative values (offsets).

    Returns
    -------
    float
        The frequency in Hz.

    Raises
    ------
    ParameterError
        If the value cannot be read as a frequency, is not finite, or is
        negative when that is not allowed.

    Examples
    --------
    >>> parse_frequency("455k")
    455000.0
    >>> parse_frequency("1.13M")
    1130000.0
    >>> parse_frequency(-9000, "offset", allow_negative=True)
    -9000.0
    """
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected a frequency such as 455k, got {value!r}")
    if isinstance(value, (int, float, np.integer, np.floating)):
        hz = to_float(value, name)
    elif isinstance(value, str):
        m = _FREQ_RE.match(value)
        if not m:
            raise ParameterError(
                f"{name}: cannot read {value!r} as a frequency (write e.g. 455000, 455k, 1.13M)"
            )
        hz = float(m.group(1)) * _SUFFIX[m.group(2)]
    else:
        raise ParameterError(f"{name}: expected a frequency such as 455k, got {value!r}")
    if not math.isfinite(hz):
        raise ParameterError(f"{name}: {value!r} is not a finite frequency")
    if hz < 0 and not allow_negative:
        raise ParameterError(f"{name}: {value!r} is negative")
    return hz


def parse_seconds(value, name: str = "seconds", *, allow_zero: bool = True) -> float:
    """Parse a duration in seconds (a number, or a string ending in s or ms).

    Examples
    --------
    >>> parse_seconds("300ms")
    0.3
    >>> parse_seconds(2)
    2.0
    """
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected seconds, got {value!r}")
    if isinstance(value, str):
        s = value.strip()
        scale = 1.0
        if s.endswith("ms"):
            s, scale = s[:-2], 1e-3
        elif s.endswith("s"):
            s = s[:-1]
        try:
            out = float(s) * scale
        except ValueError:
            raise ParameterError(f"{name}: cannot read {value!r} as seconds") from None
    elif isinstance(value, (int, float, np.integer, np.floating)):
        out = to_float(value, name)
    else:
        raise ParameterError(f"{name}: expected seconds, got {value!r}")
    if not math.isfinite(out) or out < 0 or (out == 0 and not allow_zero):
        raise ParameterError(f"{name}: {value!r} must be a {'non-negative' if allow_zero else 'positive'} number of seconds")
    return out


def parse_db(value, name: str = "level") -> float:
    """Parse a level in dB ("-30", "-30 dB", "-30 dBFS", "-30 dBc").

    Examples
    --------
    >>> parse_db("-30 dBFS")
    -30.0
    """
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected a level in dB, got {value!r}")
    if isinstance(value, str):
        s = re.sub(r"\s*(dBFS|dBc|dB)\s*$", "", value.strip(), flags=re.IGNORECASE)
        try:
            out = float(s)
        except ValueError:
            raise ParameterError(f"{name}: cannot read {value!r} as a level in dB") from None
    elif isinstance(value, (int, float, np.integer, np.floating)):
        out = to_float(value, name)
    else:
        raise ParameterError(f"{name}: expected a level in dB, got {value!r}")
    if not math.isfinite(out):
        raise ParameterError(f"{name}: {value!r} is not a finite level")
    return out


def db20(x):
    """Amplitude ratio to dB, 20·log10(|x|), with -inf for zero (no warning).

    Examples
    --------
    >>> float(db20(0.5))
    -6.020599913279624
    """
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(x))


def db10(x):
    """Power ratio to dB, 10·log10(x), with -inf for zero (no warning)."""
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(x)


def from_db20(db):
    """dB to amplitude ratio."""
    return 10.0 ** (np.asarray(db, dtype=float) / 20.0)


def from_db10(db):
    """dB to power ratio."""
    return 10.0 ** (np.asarray(db, dtype=float) / 10.0)


def validate_fs(fs, name: str = "rate") -> float:
    """Check a capture sample rate: a number from 1 kHz to 1 GHz (:mod:`sdrx.limits`), in Hz.

    Raises
    ------
    ParameterError
        If ``fs`` is not a number in that range.

    Examples
    --------
    >>> validate_fs("2.4M")
    2400000.0
    """
    from .limits import MAX_CAPTURE_RATE_HZ, MIN_CAPTURE_RATE_HZ, check_range

    hz = parse_frequency(value=fs, name=name, allow_negative=True)
    if hz <= 0:
        raise ParameterError(f"{name}: sample rate must be positive, got {fs!r}")
    return check_range(hz, name, MIN_CAPTURE_RATE_HZ, MAX_CAPTURE_RATE_HZ, unit="Hz")


def format_frequency(hz: float) -> str:
    """Short human form of a frequency.

    Examples
    --------
    >>> format_frequency(1130000.0)
    '1.13 MHz'
    >>> format_frequency(455000.0)
    '455 kHz'
    >>> format_frequency(3e9)
    '3 GHz'
    """
    a = abs(hz)
    if a >= 1e9:
        return f"{hz / 1e9:.6g} GHz"
    if a >= 1e6:
        return f"{hz / 1e6:.6g} MHz"
    if a >= 1e3:
        return f"{hz / 1e3:.6g} kHz"
    return f"{hz:.6g} Hz"
