"""A chain spec written back as TOML: every key with its value, to start one's own chain from a preset."""

from __future__ import annotations

import json
import math

from .spec import load_chain, spec_to_dict

__all__ = ["spec_to_toml"]

_TOP = ("name", "description", "if_frequency", "injection")
_TABLES = ("preselector", "mixer", "agc", "detector", "audio", "blanker", "notch", "frontend")


def _value(v) -> str:
    """One TOML value: booleans, integers, floats (inf, nan), strings and arrays of them (TOML 1.0)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)   # a JSON string is a TOML basic string
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    raise TypeError(f"no TOML form for {v!r}")


def _table(header: str, keys: dict) -> list:
    return ["", header] + [f"{k} = {_value(v)}" for k, v in keys.items() if v is not None]


def spec_to_toml(spec) -> str:
    """The resolved chain spec as a TOML document that loads back to the same spec.

    Parameters
    ----------
    spec : str, Path, mapping or ChainSpec
        Anything :func:`sdrx.chain.load_chain` takes (a preset name, a file...).

    Returns
    -------
    str
        TOML text, every default written out.

    Examples
    --------
    >>> import dataclasses
    >>> from sdrx.tomlfile import tomllib
    >>> from sdrx.chain.spec import parse_spec
    >>> want = load_chain("medium")
    >>> back = parse_spec(tomllib.loads(spec_to_toml("medium")))
    >>> dataclasses.replace(back, source=want.source) == want
    True
    """
    spec = load_chain(spec)
    d = spec_to_dict(spec)
    lines = [f"# chain {spec.name!s}: every key written out (sdrx receive --show-chain); edit and pass it as "
             "--chain FILE.toml"]
    lines += [f"{k} = {_value(d[k])}" for k in _TOP]
    for name in ("preselector", "mixer"):
        lines += _table(f"[{name}]", d[name])
    for stage in d["if_stage"]:
        lines += _table("[[if_stage]]", stage)
    for name in _TABLES[2:]:
        if name in d:
            lines += _table(f"[{name}]", d[name])
    return "\n".join(lines) + "\n"
