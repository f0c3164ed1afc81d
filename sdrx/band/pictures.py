"""The band run's spectrogram pictures, drawn in a helper process beside the receiving.

Importing matplotlib and drawing a spectrogram take about a second of CPU,
mostly Python (so a thread of this process would only take turns with the
receiving under the GIL). :class:`PictureDrawer` starts one helper process
as the run begins; it imports matplotlib while the stations are
received and draws each capture's picture as soon as its spectrogram is
complete (the read-ahead completes it a block or so before the receiving
ends).
:class:`BandPictures` gathers each capture's spectrogram from its segments
and hands the whole of it over.

The helper runs :func:`sdrx.band.figures.spectrogram_png`, the function this
process would run, on the same arrays, so the PNG bytes are the same. If the
helper cannot start or dies, the picture is drawn here instead (same bytes).
"""

from __future__ import annotations

import contextlib
import os
import pickle
import queue
import subprocess
import sys
import threading
from pathlib import Path

import numpy as np

__all__ = ["PictureDrawer", "BandPictures", "HELPER_MIN_SAMPLES"]

# The helper costs about a second of CPU to start (interpreter, numpy, matplotlib); a run of fewer
# capture samples than this (all captures) ends about as soon as the helper is ready, so its pictures
# are drawn in this process. 5 s of a 2.4 MS/s capture: one station's receiving then takes ~0.5 s here.
HELPER_MIN_SAMPLES = 12_000_000


def _draw(kwargs: dict) -> bytes:
    from .figures import spectrogram_png

    return spectrogram_png(**kwargs)


def _warm() -> None:
    """Import matplotlib and draw a tiny picture (loads the fonts), so the first real one is quick."""
    _draw({"freqs_hz": [0.0, 1.0], "times_s": [0.0], "db": np.zeros((1, 2)), "stations": [(0.5, "x")],
           "column_s": 1.0})


def serve() -> None:
    """The helper's loop (``python -c "...; serve()"``): pickled ``(key, kwargs)`` on stdin, pickled
    ``(key, png)`` on stdout (png None: it failed), until stdin ends or stdout is gone."""
    replies = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)             # anything printed goes to stderr, not into the replies
    requests = sys.stdin.buffer
    _warm()
    while True:
        try:
            key, kwargs = pickle.load(requests)
        except EOFError:
            return
        try:
            png = _draw(kwargs)
        except Exception:     # the parent draws this one itself and so raises the error as its own
            png = None
        try:
            pickle.dump((key, png), replies, protocol=pickle.HIGHEST_PROTOCOL)
            replies.flush()
        except OSError:       # the parent is gone
            return


# the helper imports this very sdrx (its folder first unless the path holds it already)
_HELPER = ("import sys; h = {here!r}; h in sys.path or sys.path.insert(0, h); "
           "from sdrx.band.pictures import serve; serve()")


class PictureDrawer:
    """Draws spectrogram pictures (:func:`~sdrx.band.figures.spectrogram_png`) in a helper process.

    The helper is a fresh interpreter (``sys.executable -c ...``) in a session of its own, so a Ctrl-C
    at the terminal reaches this process only; it ends when its input does (:meth:`close`, or this
    process ending in any way).

    Parameters
    ----------
    helper : bool
        Start the helper process; False draws every picture here, at :meth:`png`.

    Examples
    --------
    >>> with PictureDrawer(helper=False) as d:
    ...     d.submit("a", freqs_hz=[0.0, 1e3], times_s=[0.0], db=np.zeros((1, 2)), stations=[], column_s=1.0)
    ...     d.png("a")[:4]
    b'\\x89PNG'
    """

    def __init__(self, helper: bool = True):
        self._args = {}
        self._done = {}
        self._proc = None
        self._outbox = queue.Queue()
        if helper:
            self._start()

    def _start(self) -> None:
        code = _HELPER.format(here=str(Path(__file__).resolve().parents[2]))   # the folder holding sdrx
        try:
            self._proc = subprocess.Popen([sys.executable, "-c", code], stdin=subprocess.PIPE,
                                          stdout=subprocess.PIPE, start_new_session=True)
        except OSError:       # no process to be had here: draw in this one
            return
        threading.Thread(target=self._send, args=(self._proc.stdin,), name="sdrx-pictures", daemon=True).start()

    def _send(self, pipe) -> None:
        """Writes the requests to the helper (a thread: a request never waits for the helper to be ready)."""
        try:
            while (msg := self._outbox.get()) is not None:
                pickle.dump(msg, pipe, protocol=pickle.HIGHEST_PROTOCOL)
                pipe.flush()
        except OSError:       # the helper is gone: png() draws here
            pass
        finally:
            with contextlib.suppress(OSError):
                pipe.close()

    def submit(self, key, **kwargs) -> None:
        """Ask for the picture ``spectrogram_png(**kwargs)`` under ``key``; returns at once (any thread)."""
        self._args[key] = kwargs
        if self._proc is not None:
            self._outbox.put((key, kwargs))

    def png(self, key) -> bytes:
        """The picture submitted under ``key`` (waits for the helper; draws here if it is gone)."""
        if key not in self._args:
            raise KeyError(f"no picture was submitted under {key!r}")
        while key not in self._done and self._proc is not None:
            try:
                k, png = pickle.load(self._proc.stdout)
            except (EOFError, OSError, pickle.UnpicklingError):
                self.close()
                break
            self._done[k] = png      # None: it failed there; drawn here, where its error is raised as itself
        png = self._done.pop(key, None)
        return _draw(self._args[key]) if png is None else png

    def close(self) -> None:
        """Stop the helper (at once: nothing it draws is needed after this)."""
        proc, self._proc = self._proc, None
        if proc is None:
            return
        self._outbox.put(None)
        proc.kill()
        proc.wait()
        proc.stdout.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class BandPictures:
    """Each capture's spectrogram, gathered from its segments, drawn once all of them are in.

    Parameters
    ----------
    drawer : PictureDrawer
    captures : dict
        ``capture index -> (segment count, picture arguments without db)``.
    """

    def __init__(self, drawer: PictureDrawer, captures: dict):
        self._drawer = drawer
        self._captures = captures
        self._parts = {i: {} for i in captures}
        self._lock = threading.Lock()

    def add(self, capture_index: int, segment_index: int, db: np.ndarray) -> None:
        """A segment's spectrogram columns (once per segment; a repeat is ignored). Any thread."""
        with self._lock:
            parts = self._parts[capture_index]
            if segment_index in parts:
                return
            parts[segment_index] = db
            n, kwargs = self._captures[capture_index]
            if len(parts) < n:
                return
            whole = np.concatenate([parts[s] for s in sorted(parts)], axis=0)
        self._drawer.submit(capture_index, db=whole, **kwargs)

    def png(self, capture_index: int) -> bytes:
        """The capture's picture (every segment added)."""
        return self._drawer.png(capture_index)
