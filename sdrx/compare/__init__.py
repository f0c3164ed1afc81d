"""A/B(/X) listening comparison of receiver chains on one capture (``sdrx compare``).

Modules, in the order of the data flow: :mod:`.run` (orchestration), :mod:`.align`
(time alignment), :mod:`.loudness` (ITU-R BS.1770 matching via pyloudnorm),
:mod:`.figures` (designed and measured figures), :mod:`.truth` (the capture's
truth sidecar), :mod:`.blind` (A/B/X trials and their key), :mod:`.plot`
(selectivity PNG) and :mod:`.page` (the self-contained HTML page).
"""

from __future__ import annotations

__all__ = ["compare"]


def compare(*args, **kwargs):
    """Run :func:`sdrx.compare.run.compare` (imported on first use)."""
    from .run import compare as _compare

    return _compare(*args, **kwargs)
