"""Loudness matching of several outputs per ITU-R BS.1770 (measured with pyloudnorm).

The louder of two otherwise equal sounds is heard as the better one, so a fair
comparison plays every output at the same integrated loudness. Gains are chosen
so that no output is clipped: all are brought to the loudest level that *every*
output can reach with its sample peak at or below ``peak_dbfs``.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..errors import ParameterError
from ..units import db20

__all__ = ["MIN_SECONDS", "LoudnessMatch", "integrated_loudness", "match_loudness", "apply_gain"]

#: shortest signal pyloudnorm can measure (one 400 ms gating block), with margin
MIN_SECONDS = 0.5


def integrated_loudness(x, fs: float, *, name: str = "audio") -> float:
    """Integrated loudness of a mono signal in LUFS (ITU-R BS.1770 via pyloudnorm).

    Parameters
    ----------
    x : array_like
        Mono audio, full scale 1.0.
    fs : float
        Sample rate, Hz.
    name : str
        What the signal is, for the error message.

    Returns
    -------
    float
        Loudness in LUFS; ``-inf`` when every block is below the absolute gate.

    Raises
    ------
    ParameterError
        If the signal is shorter than :data:`MIN_SECONDS`.

    Notes
    -----
    K-weighting, 400 ms blocks with 75 % overlap, absolute gate −70 LUFS and
    relative gate −10 LU (ITU-R BS.1770-4). The measurement is pyloudnorm's; it
    is not re-implemented here. Its ``"DeMan"`` filter class is used: at 48 kHz
    it gives the K-weighting coefficients BS.1770-4 tabulates (its default
    class normalises the second stage's gain differently and reads a 0 dBFS
    997 Hz sine 0.04 LU low, −3.05 instead of −3.01 LKFS).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(96000) / 48000.0
    >>> abs(integrated_loudness(np.sin(2 * np.pi * 997 * t), 48000.0) - (-3.01)) < 0.005  # BS.1770: -3.01 LKFS
    True
    """
    import pyloudnorm

    a = np.asarray(x, dtype=np.float64)
    if a.ndim != 1:
        raise ParameterError(f"{name}: expected mono audio, got an array of shape {a.shape}")
    if a.size < MIN_SECONDS * fs:
        raise ParameterError(
            f"{name}: {a.size / fs:.3g} s of audio is too short to measure loudness (at least {MIN_SECONDS} s)"
        )
    with np.errstate(divide="ignore"):
        return float(pyloudnorm.Meter(fs, filter_class="DeMan").integrated_loudness(a))


@dataclass(frozen=True)
class LoudnessMatch:
    """Result of :func:`match_loudness` (one entry per signal, in order).

    Attributes
    ----------
    target_lufs : float
        Common integrated loudness after the gains.
    before_lufs, peak_dbfs, gain_db : tuple of float
        Loudness and sample peak as given, and the gain to apply.
    limiting : int
        Index of the signal whose peak set the target.
    peak_limit_dbfs : float
        Highest sample peak allowed after the gain.
    """

    target_lufs: float
    before_lufs: tuple
    peak_dbfs: tuple
    gain_db: tuple
    limiting: int
    peak_limit_dbfs: float


def match_loudness(signals: Sequence, fs: float, *, peak_limit_dbfs: float = -1.0,
                   names: Sequence[str] | None = None) -> LoudnessMatch:
    """Gains that bring every signal to one integrated loudness without clipping any.

    Parameters
    ----------
    signals : sequence of array_like
        Mono signals at the same rate, full scale 1.0.
    fs : float
        Sample rate, Hz.
    peak_limit_dbfs : float
        Highest sample peak any signal may have after its gain (default −1 dBFS).
    names : sequence of str, optional
        Names for error messages.

    Returns
    -------
    LoudnessMatch

    Raises
    ------
    ParameterError
        If a signal is too short or silent (below the −70 LUFS absolute gate).

    Notes
    -----
    With L_i the integrated loudness (ITU-R BS.1770, pyloudnorm) and P_i the
    sample peak in dBFS of signal i, the target is
    ``T = min_i (L_i + peak_limit_dbfs − P_i)`` and the gain is ``g_i = T − L_i``:
    each signal could reach ``L_i + peak_limit_dbfs − P_i`` before its peak hits
    the limit, so the quietest of those reachable levels is reachable by all.
    Loudness scales exactly with gain (BS.1770 is a mean square measure with
    relative gating), so every output lands on T.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(48000) / 48000.0
    >>> m = match_loudness([0.5 * np.sin(2 * np.pi * 1e3 * t), 0.1 * np.sin(2 * np.pi * 1e3 * t)], 48000.0)
    >>> [round(g, 2) for g in m.gain_db]
    [5.02, 19.0]
    """
    if names is None:
        names = [f"signal {i + 1}" for i in range(len(signals))]
    before, peaks = [], []
    for x, name in zip(signals, names):
        a = np.asarray(x, dtype=np.float64)
        lufs = integrated_loudness(a, fs, name=name)
        if not np.isfinite(lufs):
            raise ParameterError(f"{name}: output is silent (below the -70 LUFS gate); check --tune and the excerpt")
        before.append(lufs)
        peaks.append(float(db20(np.max(np.abs(a)))))
    reachable = [lu + peak_limit_dbfs - pk for lu, pk in zip(before, peaks)]
    limiting = int(np.argmin(reachable))
    target = float(reachable[limiting])
    gains = tuple(target - lu for lu in before)
    return LoudnessMatch(target, tuple(before), tuple(peaks), gains, limiting, float(peak_limit_dbfs))


def apply_gain(x, gain_db: float) -> np.ndarray:
    """Return ``x · 10^(gain_db/20)`` as float64.

    Examples
    --------
    >>> apply_gain([0.1, -0.2], 20.0)
    array([ 1., -2.])
    """
    return np.asarray(x, dtype=np.float64) * (10.0 ** (gain_db / 20.0))
