"""Fading of a station: flat Rayleigh, flat Rician, and a two-path selective model.

The scattered part of a fading channel is a complex Gaussian process of unit
mean power whose spectrum has the width of the fading rate (the Doppler
spread). It is made on a slow grid (about 64 samples per 1/rate) by filtering
complex white noise, and carried to the capture's rate by linear
interpolation between grid points, evaluated from absolute sample indices, so
the gains do not depend on the block size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import signal

from ..errors import ParameterError
from ._keys import check_keys, get_choice, get_db, get_frequency, get_number, get_seconds
from .noise import ChunkedNormal

__all__ = ["FadingSpec", "parse_fading", "GaussianFading", "SteadyGain", "make_gain", "FADING_MODELS",
           "MAX_DELAY_S"]

FADING_MODELS = ("rayleigh", "rician", "two_path")
SECOND_PATH = ("rayleigh", "rician", "steady")
MAX_DELAY_S = 0.02
_GRID_PER_RATE = 64  # slow-grid samples per 1/rate
_FILTER_ORDER = 4
_WARMUP_GRID = 40 * _GRID_PER_RATE  # grid samples run before t = 0 so the process starts stationary
_GRID_CHUNK = 1024


@dataclass(frozen=True)
class FadingSpec:
    """A validated fading description.

    Attributes
    ----------
    model : str
        ``"rayleigh"``, ``"rician"`` or ``"two_path"``.
    rate_hz : float
        Fading rate: −3 dB half-width of the scattered component's spectrum
        (Doppler spread), Hz; 0 for a two-path model whose second path is steady.
    k_db : float or None
        Rician K factor (steady-to-scattered power), dB; for ``rician``, and
        for ``two_path`` whose second path is ``rician``.
    delay_s : float or None
        ``two_path``: delay of the second path after the first.
    level_db : float or None
        ``two_path``: mean power of the second path relative to the first, dB.
    second : str or None
        ``two_path``: fading of the second path (rayleigh | rician | steady);
        the first path is steady.
    """

    model: str
    rate_hz: float
    k_db: float | None = None
    delay_s: float | None = None
    level_db: float | None = None
    second: str | None = None

    def to_json(self) -> dict:
        """Plain dict for the truth sidecar (absent fields left out)."""
        return {k: v for k, v in self.__dict__.items() if v is not None}


_KEYS = {
    "rayleigh": ("model", "rate"),
    "rician": ("model", "rate", "k_db"),
    "two_path": ("model", "rate", "k_db", "delay_s", "level_db", "second"),
}


def parse_fading(table, where: str) -> FadingSpec:
    """Validate a ``[station.fading]`` table.

    Raises
    ------
    ParameterError
        Unknown model or key, bad value.

    Examples
    --------
    >>> parse_fading({"model": "rician", "rate": "0.5", "k_db": 6}, "x.toml: station 'A': fading")
    FadingSpec(model='rician', rate_hz=0.5, k_db=6.0, delay_s=None, level_db=None, second=None)
    """
    if not isinstance(table, dict):
        raise ParameterError(f"{where}: expected a table with a 'model', got {table!r}")
    model = get_choice(table, "model", where, FADING_MODELS)
    where = f"{where} ({model})"
    check_keys(table, _KEYS[model], where)
    steady_echo = model == "two_path" and table.get("second") == "steady"
    if steady_echo and "rate" not in table:
        rate = 0.0  # a steady second path: a fixed two-ray channel, nothing fades
    else:
        rate = get_frequency(table, "rate", where, positive=True)
    if not (rate == 0.0 and steady_echo) and not 1e-3 <= rate <= 100.0:
        raise ParameterError(f"{where}: rate = {table['rate']!r} must be 0.001..100 Hz")
    if model == "rayleigh":
        return FadingSpec(model, rate)
    if model == "rician":
        return FadingSpec(model, rate, k_db=get_number(table, "k_db", where, lo=-30.0, hi=40.0))
    second = get_choice(table, "second", where, SECOND_PATH, "rayleigh")
    k_db = get_number(table, "k_db", where, lo=-30.0, hi=40.0) if second == "rician" else None
    if second != "rician" and "k_db" in table:
        raise ParameterError(f"{where}: k_db applies only when second = \"rician\"")
    delay = get_seconds(table, "delay_s", where, allow_zero=False)
    if delay > MAX_DELAY_S:
        raise ParameterError(f"{where}: delay_s = {table['delay_s']!r} is above {MAX_DELAY_S * 1e3:g} ms")
    level = get_db(table, "level_db", where, -3.0)
    if level > 20.0:
        raise ParameterError(f"{where}: level_db = {table['level_db']!r} is above +20 dB")
    return FadingSpec(model, rate, k_db=k_db, delay_s=delay, level_db=level, second=second)


class SteadyGain:
    """Gain 1 at every sample (a path that does not fade)."""

    def gains(self, start: int, count: int) -> np.ndarray:
        """Complex gains of samples ``start .. start+count-1``."""
        return np.ones(count, dtype=np.complex128)


class GaussianFading:
    """Complex fading gain g[n] with E|g|² = 1: Rayleigh, or Rician with K factor.

    Parameters
    ----------
    rate_hz : float
        Fading rate (−3 dB half-width of the scattered spectrum), Hz.
    fs : float
        Rate at which gains are wanted, Hz.
    rng : numpy.random.Generator
    k_db : float, optional
        Rician K factor in dB; None for Rayleigh.

    Notes
    -----
    Scattered part s: complex white noise on a grid of rate fs/D
    (D = max(1, floor(fs / (64·rate)))) through a 4th-order Butterworth
    low-pass at ``rate``, scaled by 1/sqrt(Σh²) so E|s|² = 1, started 40/rate
    seconds before t = 0. Rician: g = sqrt(K/(K+1)) + sqrt(1/(K+1))·s, so
    E|g|² = 1 and the steady-to-scattered power ratio is K (Rician fading:
    Rappaport, Wireless Communications, 2nd ed., Prentice Hall 2002, ch. 5;
    from memory); Rayleigh: g = s, |g| Rayleigh distributed,
    |g|² exponential with mean 1. Between grid points, g is linearly
    interpolated: g[n] = s[k]·(1 − u) + s[k+1]·u, k = n // D, u = (n mod D)/D.
    Gains must be asked for in order (contiguous ranges).
    """

    def __init__(self, rate_hz: float, fs: float, rng: np.random.Generator, k_db: float | None = None):
        self.decimation = max(1, int(math.floor(fs / (_GRID_PER_RATE * rate_hz))))
        grid_fs = fs / self.decimation
        self._sos = signal.butter(_FILTER_ORDER, rate_hz, output="sos", fs=grid_fs)
        imp = np.zeros(_WARMUP_GRID * 4)
        imp[0] = 1.0
        power_gain = float(np.sum(signal.sosfilt(self._sos, imp) ** 2))
        self._scale = 1.0 / math.sqrt(2.0 * power_gain)  # complex white: E|w|² = 2 before scaling
        self._zi = np.zeros((self._sos.shape[0], 2), dtype=np.complex128)
        self._normal = ChunkedNormal(rng, 2 * _GRID_CHUNK)
        if k_db is None:
            self._los, self._sc = 0.0, 1.0
        else:
            k = 10.0 ** (k_db / 10.0)
            self._los, self._sc = math.sqrt(k / (k + 1.0)), math.sqrt(1.0 / (k + 1.0))
        self._grid = np.zeros(0, dtype=np.complex128)  # grid samples from index self._grid_start
        self._grid_start = 0
        self._made = -_WARMUP_GRID  # next grid index to generate
        self._extend(0)
        self._grid = self._grid[_WARMUP_GRID:]  # keep grid index 0 onwards
        self._grid_start = 0

    def _extend(self, upto: int) -> None:
        """Generate grid samples until index ``upto`` (inclusive) exists."""
        parts = [self._grid]
        while self._made <= upto:
            w = self._normal.take(2 * _GRID_CHUNK)
            z = (w[0::2] + 1j * w[1::2]) * self._scale
            y, self._zi = signal.sosfilt(self._sos, z, zi=self._zi)
            parts.append(y)
            self._made += _GRID_CHUNK
        self._grid = np.concatenate(parts)

    def gains(self, start: int, count: int) -> np.ndarray:
        """Complex gains of samples ``start .. start+count-1`` (ask in order)."""
        d = self.decimation
        n = np.arange(start, start + count, dtype=np.int64)
        k, rem = np.divmod(n, d)
        k_lo, k_hi = int(k[0]), int(k[-1]) + 1
        if k_hi >= self._made:
            self._extend(k_hi)
        if k_lo > self._grid_start:
            self._grid = self._grid[k_lo - self._grid_start:]
            self._grid_start = k_lo
        i = k - self._grid_start
        u = rem / d
        s = self._grid[i] * (1.0 - u) + self._grid[i + 1] * u
        return self._los + self._sc * s


def make_gain(kind: str, rate_hz: float, fs: float, rng, k_db=None):
    """A gain source for a path: ``steady``, ``rayleigh`` or ``rician``."""
    if kind == "steady":
        return SteadyGain()
    return GaussianFading(rate_hz, fs, rng, k_db if kind == "rician" else None)
