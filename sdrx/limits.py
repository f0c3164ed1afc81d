"""Bounds on every size a user can ask for, in one place; each error names its limit.

sdrx refuses what cannot be meant before it starts (a capture rate of 10^300
Hz, a million IF stages, an IF sample rate that needs 41 GiB), so that every
run stays within bounded memory and time. The figures below are sdrx's own
choices: generous for the receivers it models (LF to UHF AM, IFs from a few
kHz to tens of MHz), tight enough that the arrays they imply fit in a few
hundred MB. Changing one is a design decision: say why in the commit.

:func:`check_range` is the one way a bound is checked, so that every message
reads the same: ``NAME: VALUE is outside LOW to HIGH (why)``.
"""

from __future__ import annotations

import math

from .errors import ParameterError

__all__ = [
    "MAX_RF_HZ",
    "MIN_IF_HZ",
    "MAX_IF_HZ",
    "MIN_CAPTURE_RATE_HZ",
    "MAX_CAPTURE_RATE_HZ",
    "MAX_IF_RATE_HZ",
    "MAX_IF_RATE_RATIO",
    "MIN_SPACING_HZ",
    "MAX_SPACING_HZ",
    "MAX_PLAN_CHANNELS",
    "MIN_POINTS",
    "MAX_POINTS",
    "MAX_IF_STAGES",
    "MAX_TOTAL_ORDER",
    "MAX_SURVEY_BINS",
    "MAX_CAPTURE_SAMPLES",
    "MAX_FLOAT_SAMPLE",
    "MAX_PREROLL_S",
    "check_range",
    "format_value",
]

#: highest RF frequency sdrx takes (tune, centre, band edges, preselector corners): the top of UHF
#: airband AM with margin
MAX_RF_HZ = 3e9
#: intermediate frequency range (chain specs, ``plan --if``); the receiver also needs 2·IF at least the channel
#: rate (the image and the IF's mirror lie 2·IF away and must stay outside the channel)
MIN_IF_HZ = 50e3
MAX_IF_HZ = 50e6
#: capture sample rates a reader accepts
MIN_CAPTURE_RATE_HZ = 1e3
MAX_CAPTURE_RATE_HZ = 1e9
#: exact path: IF sample rate, absolute and as a multiple of the capture rate (each capture block
#: becomes that many times more IF samples, held in memory while it is mixed and filtered)
MAX_IF_RATE_HZ = 1e9
MAX_IF_RATE_RATIO = 64
#: channel spacing (info, report, compare, plan)
MIN_SPACING_HZ = 100.0
MAX_SPACING_HZ = 1e6
#: ``plan``: channels in one band (each gets its own spur search)
MAX_PLAN_CHANNELS = 20000
#: ``report --points``: test carriers across ±3 spacings (each is a short receiver run)
MIN_POINTS = 7
MAX_POINTS = 301
#: IF stages in a chain, and their prototype orders summed (each order is a pole pair at the IF)
MAX_IF_STAGES = 16
MAX_TOTAL_ORDER = 48
#: ``info``: largest spectrum (FFT length) of the carrier survey
MAX_SURVEY_BINS = 1 << 22
#: samples a capture may hold (2^40: 12.7 days at 1 MS/s)
MAX_CAPTURE_SAMPLES = 1 << 40
#: the receiver's pre-roll (its steady-state start) at most this long: it is a whole number of samples at the
#: capture, channel, IF and audio rates, and rates in an awkward ratio push that common grid out to hours
#: (the pre-roll's own need is under 0.2 s for every preset; the history is held in memory)
MAX_PREROLL_S = 2.0
#: largest magnitude of a float sample (full scale is 1.0; +120 dBFS cannot be meant)
MAX_FLOAT_SAMPLE = 1e6


def format_value(x: float, unit: str = "") -> str:
    """A bound or value for a message: frequencies in Hz/kHz/MHz/GHz, other units after the number.

    Examples
    --------
    >>> format_value(50e6, "Hz"), format_value(16), format_value(0.5, "s")
    ('50 MHz', '16', '0.5 s')
    """
    if unit == "Hz":
        from .units import format_frequency

        return format_frequency(x)
    text = f"{x:g}"
    return f"{text} {unit}" if unit else text


def check_range(value: float, name: str, low=None, high=None, *, unit: str = "", low_open: bool = False,
                why: str = "") -> float:
    """Check ``low <= value <= high`` (``low < value`` with ``low_open``); return ``value``.

    Parameters
    ----------
    value : float
    name : str
        The option or key path, first in the message.
    low, high : float or None
        The bounds (None: unbounded on that side).
    unit : str
        Unit for the message ("Hz" prints kHz/MHz).
    low_open : bool
        Exclude ``low`` itself.
    why : str
        What the limit protects, appended to the message.

    Raises
    ------
    ParameterError
        ``NAME: VALUE is outside LOW to HIGH`` (or ``must be above LOW`` /
        ``must be at most HIGH``), naming the limit.

    Examples
    --------
    >>> check_range(3.0, "order", 1, 12)
    3.0
    >>> check_range(1e30, "if_frequency", MIN_IF_HZ, MAX_IF_HZ, unit="Hz")
    Traceback (most recent call last):
    ...
    sdrx.errors.ParameterError: if_frequency: 1e+30 Hz is outside 50 kHz to 50 MHz
    """
    v = float(value)
    bad = not math.isfinite(v)
    bad = bad or (low is not None and (v < low or (low_open and v == low)))
    bad = bad or (high is not None and v > high)
    if not bad:
        return v
    shown = f"{v:g} {unit}".strip() if unit else f"{v:g}"
    if low is not None and high is not None:
        rng = f"is outside {format_value(low, unit)} to {format_value(high, unit)}"
        if low_open:
            rng = f"must be above {format_value(low, unit)} and at most {format_value(high, unit)}"
    elif low is not None:
        rng = f"must be {'above' if low_open else 'at least'} {format_value(low, unit)}"
    else:
        rng = f"must be at most {format_value(high, unit)}"
    tail = f" ({why})" if why else ""
    raise ParameterError(f"{name}: {shown} {rng}{tail}")
