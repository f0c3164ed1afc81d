"""Numbers as a reader reads them on the report page: kHz or MHz, µs, dB to sensible decimals.

report.json keeps SI numbers at full precision; the page prints each one
through one of these formatters (a function of the value, returning text
with its unit). Each formatter's resolution is that of the figure it prints.
"""

from __future__ import annotations

import math
from functools import partial

__all__ = ["frequency_text", "fixed_text", "as_hz", "as_offset", "as_diff_hz", "as_audio_hz", "as_db1", "as_db2",
           "as_signed_db2", "as_signed_db1", "as_q", "as_pct", "as_us", "as_hz01", "as_plain"]


def _strip(text: str) -> str:
    return text.rstrip("0").rstrip(".") if "." in text else text


def frequency_text(hz: float, resolution_hz: float = 1.0, *, signed: bool = False) -> str:
    """A frequency in Hz, kHz or MHz (whichever keeps the number below 1000), to ``resolution_hz``.

    Examples
    --------
    >>> frequency_text(600000.0)
    '600 kHz'
    >>> frequency_text(1055000.0)
    '1.055 MHz'
    >>> frequency_text(5520.3)
    '5.52 kHz'
    >>> frequency_text(-2778.04, 0.1, signed=True)
    '-2.778 kHz'
    >>> frequency_text(0.3, 0.1, signed=True)
    '+0.3 Hz'
    """
    a = abs(hz)
    unit, scale = ("MHz", 1e6) if a >= 1e6 else ("kHz", 1e3) if a >= 1e3 else ("Hz", 1.0)
    decimals = max(0, math.ceil(math.log10(scale / resolution_hz) - 1e-9))
    text = _strip(f"{hz / scale:.{decimals}f}")
    if text in ("-0", "0"):
        return "0 Hz"
    if signed and not text.startswith("-"):
        text = "+" + text
    return f"{text} {unit}"


def fixed_text(value: float, decimals: int, unit: str = "", *, signed: bool = False, scale: float = 1.0) -> str:
    """``value * scale`` to a fixed number of decimals, with an optional unit.

    Examples
    --------
    >>> fixed_text(0.000113213, 1, "µs", scale=1e6)
    '113.2 µs'
    >>> fixed_text(-0.001, 2, signed=True)
    '0.00'
    """
    text = f"{value * scale:{'+' if signed else ''}.{decimals}f}"
    if text.lstrip("+-").strip("0.") == "":
        text = text.lstrip("+-")  # no sign on a rounded zero
    return f"{text} {unit}" if unit else text


def as_plain(v) -> str:
    """A number without a trailing ``.0``, at most six significant digits."""
    return f"{v:.6g}" if isinstance(v, float) else str(v)


def as_hz(v):
    """An absolute frequency to 1 Hz."""
    return frequency_text(v, 1.0)


def as_offset(v):
    """An offset from the tune to 1 Hz, signed."""
    return frequency_text(v, 1.0, signed=True)


def as_diff_hz(v):
    """A difference of frequencies to 0.1 Hz (the rounding of report.json), signed."""
    return frequency_text(v, 0.1, signed=True)


def as_audio_hz(v):
    """An audio frequency: to 0.1 Hz below 1 kHz, to 1 Hz above."""
    return frequency_text(v, 0.1 if abs(v) < 1e3 else 1.0)


as_db1 = partial(fixed_text, decimals=1)                 #: a level or ratio in dB to 0.1 dB
as_db2 = partial(fixed_text, decimals=2)                 #: a level or ratio in dB to 0.01 dB
as_signed_db1 = partial(fixed_text, decimals=1, signed=True)  #: a difference in dB to 0.1 dB
as_signed_db2 = partial(fixed_text, decimals=2, signed=True)  #: a difference in dB to 0.01 dB
as_q = partial(fixed_text, decimals=1)                   #: a quality factor to 0.1
as_pct = partial(fixed_text, decimals=1, signed=True)    #: a percentage to 0.1 %, signed
as_us = partial(fixed_text, decimals=1, unit="µs", scale=1e6)  #: seconds as µs to 0.1 µs
as_hz01 = partial(frequency_text, resolution_hz=0.1)     #: a frequency to 0.1 Hz
