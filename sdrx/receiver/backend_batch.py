"""The back ends of many stations of one chain, one array operation per stage over all of them.

:func:`process_together` takes a list of :class:`~sdrx.receiver.backend.Backend`
objects and their IF outputs and returns each one's audio, as each
``Backend.process`` would. Back ends that share one design and stand at the
same point of their runs (the AGC's control grid, the level meter's windows,
the resampler's phase: :func:`alike_key`) run as one: their inputs stacked
into a stations × samples array, the AGC by
:func:`sdrx.dsp.agc_batch.process_together`, the level meter's window sums
as row sums, the audio filters as one 2-D ``sosfilt`` (each row its own
state), the resampler row by row. Each stage is the same recursion on each
row as on one station, so each station's audio is the same samples to float
rounding (tested against the station alone). Back ends that are not alike
(a chain of their own, the AGC still held at its start, the auto notch or a
stateful detector on) run one at a time.
"""

from __future__ import annotations

import numpy as np
from scipy import signal

from ..dsp.agc_batch import alike_key as agc_key, process_together as agc_together
from ..dsp.detectors import EnvelopeDetector
from .backend import feed_meters

__all__ = ["alike_key", "process_together"]


def alike_key(backend, n: int) -> tuple | None:
    """Back ends with equal keys (for an input of ``n`` samples) run together; None: this one runs alone."""
    ak = agc_key(backend.agc)
    if ak is None or n == 0 or backend.notch is not None or type(backend.detector) is not EnvelopeDetector:
        return None
    m, rs = backend.meter, backend.resampler
    return (id(backend.design), n, ak, backend.sos_audio.tobytes(), backend.audio_gain, backend._skip,
            backend._n_seen, m.n, m.nd, m._cnt, m._dcnt, rs.up, rs.down, rs._n_in, rs._m)


def process_together(backends, us) -> list:
    """Each back end's audio for its IF output ``us[i]``, as ``backends[i].process(us[i])``.

    Parameters
    ----------
    backends : list of Backend
    us : list of ndarray
        Their IF outputs (complex envelopes, ungained).

    Returns
    -------
    list of ndarray
        Audio per back end.
    """
    out = [None] * len(backends)
    alike: dict = {}
    for i, (b, u) in enumerate(zip(backends, us)):
        key = alike_key(b, len(u))
        if key is None:
            out[i] = b.process(u)
        else:
            alike.setdefault(key, []).append(i)
    for members in alike.values():
        if len(members) == 1:
            i = members[0]
            out[i] = backends[i].process(us[i])
            continue
        audio = _alike([backends[i] for i in members], np.stack([us[i] for i in members]))
        for i, a in zip(members, audio):
            out[i] = a
    return out


def _alike(backends, u: np.ndarray) -> list:
    """``Backend.process`` on each row of ``u``, for back ends with equal :func:`alike_key`."""
    first = backends[0]
    mag = np.abs(u)
    n = u.shape[1]
    for b in backends:
        b._n_seen += n
    ug = agc_together([b.agc for b in backends], u, mag)
    env = np.abs(ug)
    j = min(first._skip, n)
    for b in backends:
        b._skip -= j
    if n > j:
        feed_meters([b.meter for b in backends], mag[:, j:], env[:, j:])
    zi = np.stack([b.zi_audio for b in backends], axis=1)         # (sections, stations, 2)
    a, zf = signal.sosfilt(first.sos_audio, env, axis=-1, zi=zi)  # the envelope detector's output is |ug|
    out = []
    for k, b in enumerate(backends):
        b.zi_audio = zf[:, k, :].copy()
        out.append(b.resampler.process(a[k] * b.audio_gain))
    return out
