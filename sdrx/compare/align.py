"""Time alignment of several receiver outputs of the same excerpt.

Different IF filters delay the audio by different amounts (group delay), so an
instant A/B switch would jump in time unless the outputs are aligned first.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy import signal

from ..errors import ParameterError

__all__ = ["Alignment", "estimate_lag", "align"]


def estimate_lag(x, ref, max_lag: int, centre: int = 0) -> int:
    """Integer lag (samples) by which ``x`` trails ``ref``: ``x[n] ≈ ref[n − lag]``.

    Parameters
    ----------
    x, ref : array_like
        Mono signals at the same rate (their means are removed first).
    max_lag : int
        Largest distance from ``centre`` searched, samples.
    centre : int
        Lag the search is centred on (an expected lag, e.g. from the designs).

    Returns
    -------
    int
        The lag in ``[centre - max_lag, centre + max_lag]`` at the peak of the cross-correlation.

    Notes
    -----
    ``r[k] = Σ_n x[n + k] · ref[n]`` computed by FFT (scipy.signal.correlate);
    the lag is ``argmax_k r[k]`` over ``|k| ≤ max_lag``. The sign is taken as is:
    an envelope detector does not invert the audio.

    Examples
    --------
    >>> import numpy as np
    >>> ref = np.random.default_rng(1).standard_normal(4000)
    >>> estimate_lag(np.concatenate([np.zeros(7), ref[:-7]]), ref, 50)
    7
    """
    a = np.asarray(x, dtype=np.float64)
    b = np.asarray(ref, dtype=np.float64)
    a = a - a.mean()
    b = b - b.mean()
    r = signal.correlate(a, b, mode="full", method="fft")
    lags = signal.correlation_lags(a.size, b.size, mode="full")
    keep = np.abs(lags - centre) <= max_lag
    return int(lags[keep][np.argmax(r[keep])])


@dataclass(frozen=True)
class Alignment:
    """Lags found by :func:`align` and the common excerpt they leave.

    Attributes
    ----------
    lags : tuple of int
        Samples by which each output trails the first (the first's is 0).
    starts : tuple of int
        Index in each output where its aligned excerpt starts.
    length : int
        Samples in every aligned excerpt.
    """

    lags: tuple
    starts: tuple
    length: int

    def cut(self, i: int, x) -> np.ndarray:
        """The aligned excerpt of output ``i``."""
        s = self.starts[i]
        return np.asarray(x)[s:s + self.length]


def align(signals: Sequence, fs: float, *, max_lag_s: float = 0.05, expected_s: Sequence | None = None,
          window_s: float = 0.25e-3) -> Alignment:
    """Align outputs to the first one by the peak of their cross-correlation.

    Parameters
    ----------
    signals : sequence of array_like
        Mono outputs of the same excerpt, same rate and length.
    fs : float
        Sample rate, Hz.
    max_lag_s : float
        Largest delay difference searched without ``expected_s``, seconds (50 ms
        is far more than the group delay of any IF filter of a few kHz bandwidth).
    expected_s : sequence of float, optional
        Expected delay of each output (e.g. the chain's designed group delay);
        then the peak is searched only within ``window_s`` of the expected
        difference. This keeps a periodic programme (a test tone) from locking
        onto a lag one period away.
    window_s : float
        Half-width of that search, seconds (0.25 ms: less than half the period
        of a 1 kHz tone).

    Returns
    -------
    Alignment
        Every output is cut to the common span, so that ``alignment.cut(i, x_i)[n]``
        corresponds to the same instant of the programme for every ``i``.

    Raises
    ------
    ParameterError
        If the lags would leave nothing of the excerpt.

    Notes
    -----
    With lags d_i (d_0 = 0) the cut starts at ``s_i = d_i − min_j d_j`` and has
    length ``N − (max_j d_j − min_j d_j)``; then ``x_i[s_i + n] ≈ x_0[s_0 + n]``.
    Alignment is to the nearest sample (residual ≤ half a sample).

    Examples
    --------
    >>> import numpy as np
    >>> ref = np.random.default_rng(2).standard_normal(4800)
    >>> late = np.concatenate([np.zeros(12), ref[:-12]])
    >>> al = align([ref, late], 48000.0)
    >>> al.lags, al.starts, al.length
    ((0, 12), (0, 12), 4788)
    """
    arrays = [np.asarray(s, dtype=np.float64) for s in signals]
    n = min(a.size for a in arrays)
    if expected_s is None:
        centres = [0] * len(arrays)
        max_lag = max(0, int(round(max_lag_s * fs)))
    else:
        centres = [int(round((e - expected_s[0]) * fs)) for e in expected_s]
        max_lag = max(1, int(round(window_s * fs)))
    max_lag = min(max_lag, n // 4)
    lags = [0] + [estimate_lag(a[:n], arrays[0][:n], max_lag, c) for a, c in zip(arrays[1:], centres[1:])]
    lo, hi = min(lags), max(lags)
    length = n - (hi - lo)
    if length <= 0:
        raise ParameterError(f"alignment: lags {lags} leave no common excerpt of {n} samples")
    starts = tuple(d - lo for d in lags)
    return Alignment(tuple(lags), starts, int(length))
