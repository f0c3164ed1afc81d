"""Progress reporting without a dependency on click.

Library code takes an optional ``progress`` callable ``progress(done, total)``
(both in the same unit, e.g. samples). The command line passes one that draws
a bar on a terminal; library users pass nothing.
"""

from __future__ import annotations

import sys
import time
from typing import Callable, Optional

__all__ = ["ProgressFn", "TerminalBar", "make_progress"]

ProgressFn = Callable[[int, int], None]


class TerminalBar:
    """A one-line progress bar on stderr, redrawn at most ten times a second.

    Parameters
    ----------
    label : str
        Text before the bar.
    stream : file, optional
        Defaults to ``sys.stderr``.
    """

    def __init__(self, label: str, stream=None):
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self._last = 0.0
        self._t0 = time.monotonic()
        self._drawn = False

    def __call__(self, done: int, total: int) -> None:
        now = time.monotonic()
        if now - self._last < 0.1 and done < total:
            return
        self._last = now
        frac = 0.0 if total <= 0 else min(1.0, done / total)
        width = 30
        filled = int(round(frac * width))
        elapsed = now - self._t0
        self.stream.write(f"\r{self.label} [{'#' * filled}{'-' * (width - filled)}] {frac * 100:5.1f}% {elapsed:6.1f}s")
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        """End the line if anything was drawn."""
        if self._drawn:
            self.stream.write("\n")
            self.stream.flush()
            self._drawn = False


def make_progress(label: str, quiet: bool = False, stream=None) -> Optional[TerminalBar]:
    """A bar when the stream is a terminal and not ``quiet``; otherwise None."""
    s = stream if stream is not None else sys.stderr
    if quiet or not getattr(s, "isatty", lambda: False)():
        return None
    return TerminalBar(label, s)
