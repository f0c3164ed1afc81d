"""What a band run receives: the station list and the chain of each station, from the options.

``--stations all`` (the carriers the survey finds, optionally above
``--min-level``) or ``--stations 600k,880k,...``; ``--chain SPEC`` for every
station and ``--chain F=SPEC`` for one station (repeatable; the last plain
``--chain`` is the default, ``medium`` when none is given).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Optional, Sequence

from ..errors import ParameterError
from ..units import format_frequency, parse_frequency

__all__ = ["ChainChoice", "parse_stations", "parse_chains"]


def parse_stations(text) -> Optional[list]:
    """``"all"`` -> None; ``"600k,880k"`` -> sorted frequencies in Hz.

    Raises
    ------
    ParameterError
        An unreadable frequency, an empty list or a frequency given twice.

    Examples
    --------
    >>> parse_stations("all"), parse_stations("880k, 600k")
    (None, [600000.0, 880000.0])
    """
    if text is None or str(text).strip().lower() == "all":
        return None
    items = [s.strip() for s in str(text).split(",") if s.strip()]
    if not items:
        raise ParameterError(f"--stations {text!r}: give 'all' or frequencies such as 600k,880k")
    freqs = [parse_frequency(s, "--stations") for s in items]
    for i, f in enumerate(freqs):
        if f <= 0:
            raise ParameterError(f"--stations {items[i]}: a station's frequency must be above 0 Hz")
        if f in freqs[:i]:
            raise ParameterError(f"--stations: {format_frequency(f)} is given twice")
    return sorted(freqs)


@dataclass(frozen=True)
class ChainChoice:
    """The default chain (preset name or TOML path) and per-station choices {tune_hz: spec}."""

    default: str
    per_station: tuple    # ((tune_hz, spec), ...) in frequency order

    def spec_for(self, tune_hz: float) -> str:
        for f, spec in self.per_station:
            if f == tune_hz:
                return spec
        return self.default

    @property
    def specs(self) -> list:
        """Every distinct spec named, the default first."""
        out = [self.default]
        for _, s in self.per_station:
            if s not in out:
                out.append(s)
        return out


def parse_chains(args: Sequence[str]) -> ChainChoice:
    """``--chain`` values: ``SPEC`` (every station) or ``F=SPEC`` (the station at F).

    An argument naming an existing file is a spec even if it holds ``=``.

    Raises
    ------
    ParameterError
        Two plain specs, a station given two specs, ``F=`` without a spec.

    Examples
    --------
    >>> c = parse_chains(["narrow", "1130k=wide"])
    >>> c.spec_for(1130e3), c.spec_for(600e3), c.specs
    ('wide', 'narrow', ['narrow', 'wide'])
    """
    default = None
    per = {}
    for arg in args or ():
        arg = str(arg)
        if "=" in arg and not Path(arg).is_file():
            f_text, spec = arg.split("=", 1)
            if not spec.strip():
                raise ParameterError(f"--chain {arg}: write F=SPEC, e.g. 1130k=narrow")
            f = parse_frequency(f_text.strip(), "--chain")
            if f in per:
                raise ParameterError(f"--chain {arg}: {format_frequency(f)} already has the chain {per[f]}")
            per[f] = spec.strip()
        else:
            if default is not None:
                raise ParameterError(f"--chain {arg}: one chain for every station is given already ({default}); "
                                     "name a station's own chain as F=SPEC")
            default = arg
    return ChainChoice(default or "medium", tuple(sorted(per.items())))
