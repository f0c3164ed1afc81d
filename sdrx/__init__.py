"""sdrx: an offline superheterodyne AM receiver bench.

Public API (imports are lazy so that ``import sdrx`` stays light and never
imports click or matplotlib):

- :func:`open_capture` read a capture in blocks (``sdrx.capture``)
- :func:`synthesize` scenario TOML -> capture + truth sidecar (``sdrx.synth``)
- :func:`load_chain`, :func:`design_chain` chain spec -> design (``sdrx.chain``)
- :func:`receive` capture -> audio through a chain (``sdrx.run``)
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__", "open_capture", "synthesize", "load_chain", "design_chain", "receive"]

_LAZY = {
    "open_capture": ("sdrx.capture", "open_capture"),
    "synthesize": ("sdrx.synth", "synthesize"),
    "load_chain": ("sdrx.chain", "load_chain"),
    "design_chain": ("sdrx.chain", "design_chain"),
    "receive": ("sdrx.run", "receive"),
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        mod, attr = _LAZY[name]
        return getattr(importlib.import_module(mod), attr)
    raise AttributeError(f"module 'sdrx' has no attribute {name!r}")
