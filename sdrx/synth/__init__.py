"""Scenario synthesizer: deterministic test captures with a truth sidecar.

- :func:`load_scenario` scenario TOML -> validated :class:`Scenario`
- :func:`synthesize` scenario -> capture (SigMF or WAV) + ``<stem>.truth.json``
- :func:`make_program` regenerate a station's program audio from the truth
"""

from .program import ProgramSource, ProgramSpec, make_program, parse_program
from .scenario import Scenario, load_scenario, parse_scenario
from .synthesize import iter_capture, synthesize, truth_path_for

__all__ = [
    "synthesize",
    "load_scenario",
    "make_program",
    "parse_scenario",
    "parse_program",
    "iter_capture",
    "truth_path_for",
    "Scenario",
    "ProgramSpec",
    "ProgramSource",
]
