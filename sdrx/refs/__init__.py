"""Stored references: record a chain's audio once, verify later runs against it.

The flow is one direction::

    cases file (TOML) --load_cases--> Case ... --record_cases--> store (WAV float + manifest JSON)
                                              --verify_cases--> one result per case (+ JUnit XML,
                                                                difference WAV and spectra PNG on failure)

Modules, one topic each:

- :mod:`sdrx.refs.cases`   cases TOML -> validated :class:`Case` objects and tolerances
- :mod:`sdrx.refs.store`   the store folder: manifest, per-case atomic writes, integrity checks
- :mod:`sdrx.refs.metrics` streaming comparison figures (SNR, level change, band spectra), SINAD
- :mod:`sdrx.refs.record`  run each case and store its reference
- :mod:`sdrx.refs.verify`  rerun each case and compare with its reference
- :mod:`sdrx.refs.junit`   JUnit XML for CI systems

Imports are lazy so ``import sdrx.refs`` stays light.
"""

from __future__ import annotations

__all__ = [
    "Case",
    "Tolerance",
    "load_cases",
    "record_cases",
    "verify_cases",
    "VerifyReport",
    "CaseResult",
    "write_junit",
]

_LAZY = {
    "Case": ("sdrx.refs.cases", "Case"),
    "Tolerance": ("sdrx.refs.cases", "Tolerance"),
    "load_cases": ("sdrx.refs.cases", "load_cases"),
    "record_cases": ("sdrx.refs.record", "record_cases"),
    "verify_cases": ("sdrx.refs.verify", "verify_cases"),
    "VerifyReport": ("sdrx.refs.verify", "VerifyReport"),
    "CaseResult": ("sdrx.refs.verify", "CaseResult"),
    "write_junit": ("sdrx.refs.junit", "write_junit"),
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        mod, attr = _LAZY[name]
        return getattr(importlib.import_module(mod), attr)
    raise AttributeError(f"module 'sdrx.refs' has no attribute {name!r}")
