"""Small helpers for reading scenario tables: known keys, typed values, clear messages.

Every helper takes ``where``, the place of the table in the scenario (for
example ``"coast.toml: station 'Gull Point'"``), so that each error is one
line naming the file, the station and the key.
"""

from __future__ import annotations

import difflib
import math

from ..errors import ParameterError
from ..units import parse_db, parse_frequency, parse_seconds

__all__ = ["check_keys", "get_frequency", "get_db", "get_seconds", "get_number", "get_choice", "get_int"]


def check_keys(table, allowed, where: str) -> None:
    """Refuse keys that are not in ``allowed``, suggesting the nearest one.

    Parameters
    ----------
    table : dict
        The table read from TOML.
    allowed : iterable of str
        Keys this table may hold.
    where : str
        Place of the table, for the message.

    Raises
    ------
    ParameterError
        On the first unknown key (sorted order), naming it, the nearest allowed
        key (difflib) and the allowed keys.

    Examples
    --------
    >>> check_keys({"depth": 0.3}, ["depth", "level_dbfs"], "x.toml: station 'A'")
    >>> try:
    ...     check_keys({"deph": 0.3}, ["depth", "level_dbfs"], "x.toml: station 'A'")
    ... except ParameterError as e:
    ...     print(e)
    x.toml: station 'A': unknown key 'deph'; did you mean 'depth'? (allowed: depth, level_dbfs)
    """
    if not isinstance(table, dict):
        raise ParameterError(f"{where}: expected a table, got {type(table).__name__} {table!r}")
    allowed = sorted(allowed)
    for key in sorted(table):
        if key not in allowed:
            near = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ";"
            raise ParameterError(f"{where}: unknown key '{key}'{hint} (allowed: {', '.join(allowed)})")


def _req(table, key, where, default):
    if key in table:
        return table[key], True
    if default is _MISSING:
        raise ParameterError(f"{where}: missing key '{key}'")
    return default, False


class _Missing:
    def __repr__(self):
        return "<required>"


_MISSING = _Missing()


def get_frequency(table, key, where, default=_MISSING, *, allow_negative=False, positive=False):
    """Read a frequency in Hz ("455k", "1.13M", 600000); ``default`` when absent."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    hz = parse_frequency(value, f"{where}: {key}", allow_negative=allow_negative)
    if positive and hz <= 0:
        raise ParameterError(f"{where}: {key} must be above 0 Hz, got {value!r}")
    return hz


def get_db(table, key, where, default=_MISSING):
    """Read a level in dB ("-30 dBFS", "-3 dB", -30); ``default`` when absent."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    return parse_db(value, f"{where}: {key}")


def get_seconds(table, key, where, default=_MISSING, *, allow_zero=True):
    """Read a duration in seconds ("1.2", "300ms", 2); ``default`` when absent."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    return parse_seconds(value, f"{where}: {key}", allow_zero=allow_zero)


def get_number(table, key, where, default=_MISSING, *, lo=None, hi=None, lo_open=False):
    """Read a plain finite number, optionally bounded (lo <= x <= hi, or lo < x)."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ParameterError(f"{where}: {key} must be a number, got {value!r}")
    x = float(value)
    rng = _range_text(lo, hi, lo_open)
    if not math.isfinite(x) or (lo is not None and (x < lo or (lo_open and x == lo))) or (hi is not None and x > hi):
        raise ParameterError(f"{where}: {key} = {value!r} is out of range (allowed: {rng})")
    return x


def get_int(table, key, where, default=_MISSING, *, lo=None):
    """Read an integer, optionally >= lo."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    if isinstance(value, bool) or not isinstance(value, int):
        raise ParameterError(f"{where}: {key} must be a whole number, got {value!r}")
    if lo is not None and value < lo:
        raise ParameterError(f"{where}: {key} = {value!r} must be >= {lo}")
    return int(value)


def get_choice(table, key, where, choices, default=_MISSING):
    """Read a string that must be one of ``choices``."""
    value, present = _req(table, key, where, default)
    if not present:
        return value
    if value not in choices:
        lower = {str(c).lower(): c for c in choices}
        near = difflib.get_close_matches(str(value).lower(), list(lower), n=1, cutoff=0.5)
        hint = f"; did you mean '{lower[near[0]]}'?" if near else ""
        raise ParameterError(f"{where}: {key} = {value!r} is not one of {', '.join(choices)}{hint}")
    return value


def _range_text(lo, hi, lo_open):
    if lo is not None and hi is not None:
        return f"{lo} {'<' if lo_open else '<='} x <= {hi}"
    if lo is not None:
        return f"x {'>' if lo_open else '>='} {lo}"
    if hi is not None:
        return f"x <= {hi}"
    return "any finite number"
