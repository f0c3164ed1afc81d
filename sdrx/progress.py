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
    """A one-line progress bar on stderr with the time elapsed and left, redrawn at most ten times a second.

    The time left assumes the rest goes at the mean rate so far: elapsed · (1 − f)/f
    after a fraction f; it shows ``--:--`` until 1 % is done.

    Parameters
    ----------
    label : str
        Text before the bar.
    stream : file, optional
        Defaults to ``sys.stderr``.
    clock : callable, optional
        Seconds from a monotonic clock (default :func:`time.monotonic`).

    Examples
    --------
    >>> import io
    >>> t = iter([0.0, 0.0, 10.0, 40.0])
    >>> out = io.StringIO()
    >>> bar = TerminalBar("receive", out, clock=lambda: next(t))
    >>> bar(0, 100); bar(25, 100); bar(100, 100)
    >>> [line.split("] ")[1] for line in out.getvalue().split(chr(13))[1:]]
    ['  0.0%    0:00 elapsed,   --:-- left', ' 25.0%    0:10 elapsed,    0:30 left', '100.0%    0:40 elapsed,    0:00 left']
    """

    def __init__(self, label: str, stream=None, clock=None):
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self._clock = clock if clock is not None else time.monotonic
        self._last = -float("inf")
        self._t0 = self._clock()
        self._drawn = False

    def __call__(self, done: int, total: int) -> None:
        now = self._clock()
        if now - self._last < 0.1 and done < total:
            return
        self._last = now
        frac = 0.0 if total <= 0 else min(1.0, done / total)
        width = 30
        filled = int(round(frac * width))
        elapsed = now - self._t0
        left = _clock_text(elapsed * (1.0 - frac) / frac) if frac >= 0.01 else "--:--"
        self.stream.write(f"\r{self.label} [{'#' * filled}{'-' * (width - filled)}] {frac * 100:5.1f}% "
                          f"{_clock_text(elapsed):>7s} elapsed, {left:>7s} left")
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        """End the line if anything was drawn."""
        if self._drawn:
            self.stream.write("\n")
            self.stream.flush()
            self._drawn = False


def _clock_text(seconds: float) -> str:
    """Seconds as m:ss, or h:mm:ss from an hour.

    Examples
    --------
    >>> _clock_text(75.4), _clock_text(3725)
    ('1:15', '1:02:05')
    """
    s = int(round(max(0.0, seconds)))
    h, rem = divmod(s, 3600)
    m, sec = divmod(rem, 60)
    return f"{h}:{m:02d}:{sec:02d}" if h else f"{m}:{sec:02d}"


def make_progress(label: str, quiet: bool = False, stream=None) -> Optional[TerminalBar]:
    """A bar when the stream is a terminal and not ``quiet``; otherwise None."""
    s = stream if stream is not None else sys.stderr
    if quiet or not getattr(s, "isatty", lambda: False)():
        return None
    return TerminalBar(label, s)
