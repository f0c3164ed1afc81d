"""Noise added to a synthesized capture: a white noise floor and impulse noise.

Random numbers are drawn in fixed-size chunks (:class:`ChunkedNormal`), so the
noise does not depend on the block size the capture is written in.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._keys import check_keys, get_db, get_number

__all__ = ["ChunkedNormal", "WhiteNoise", "ImpulseSpec", "ImpulseNoise", "parse_impulse_noise",
           "noise_power", "NOISE_CHUNK"]

NOISE_CHUNK = 65536


class ChunkedNormal:
    """Standard normal numbers from a Generator, drawn ``chunk`` at a time.

    Parameters
    ----------
    rng : numpy.random.Generator
    chunk : int
        Draw size; fixed, so ``take`` sequences of any sizes give the same stream.

    Examples
    --------
    >>> a = ChunkedNormal(np.random.default_rng(1), 8)
    >>> b = ChunkedNormal(np.random.default_rng(1), 8)
    >>> x = np.concatenate([a.take(3), a.take(10)])
    >>> bool(np.array_equal(x, b.take(13)))
    True
    """

    def __init__(self, rng: np.random.Generator, chunk: int = NOISE_CHUNK):
        self._rng = rng
        self._chunk = int(chunk)
        self._buf = np.zeros(0)
        self._pos = 0

    def take(self, n: int) -> np.ndarray:
        """The next ``n`` numbers."""
        out = np.empty(n)
        filled = 0
        while filled < n:
            if self._pos == self._buf.size:
                self._buf = self._rng.standard_normal(self._chunk)
                self._pos = 0
            k = min(n - filled, self._buf.size - self._pos)
            out[filled:filled + k] = self._buf[self._pos:self._pos + k]
            self._pos += k
            filled += k
        return out


def noise_power(noise_dbfs_per_hz: float, fs: float, kind: str) -> float:
    """Mean power of the noise samples for a density given in dBFS per hertz.

    Parameters
    ----------
    noise_dbfs_per_hz : float
        Noise power in each 1 Hz of the RF band, written as the level (dBFS)
        of the carrier that would have the same power.
    fs : float
        Sample rate, Hz.
    kind : str
        ``"iq"`` (complex samples, band fs) or ``"real"`` (band fs/2).

    Returns
    -------
    float
        E|n|² (iq) or E[n²] (real), full scale = 1.

    Notes
    -----
    A carrier of amplitude A has power A² as |x|² in I/Q and A²/2 as a real
    cosine. Keeping C/N0 = level_dbfs − noise_dbfs_per_hz (dB·Hz) for both:
    iq: E|n|² = 10^(N/10)·fs; real: one-sided density 10^(N/10)/2 over fs/2,
    E[n²] = 10^(N/10)·fs/4.

    Examples
    --------
    >>> noise_power(-100.0, 1e6, "iq")
    0.0001
    >>> noise_power(-100.0, 1e6, "real")
    2.5e-05
    """
    d = 10.0 ** (noise_dbfs_per_hz / 10.0)
    return d * fs if kind == "iq" else d * fs / 4.0


class WhiteNoise:
    """White Gaussian noise floor, real or complex, for absolute sample ranges read in order.

    Parameters
    ----------
    power : float
        E|n|² (iq) or E[n²] (real).
    kind : str
        ``"iq"`` or ``"real"``.
    rng : numpy.random.Generator
    """

    def __init__(self, power: float, kind: str, rng: np.random.Generator):
        self.kind = kind
        self._normal = ChunkedNormal(rng)
        self._scale = math.sqrt(power / 2.0) if kind == "iq" else math.sqrt(power)

    def take(self, n: int) -> np.ndarray:
        """The next ``n`` noise samples (complex128 for iq: I and Q interleaved draws)."""
        if self.kind == "iq":
            z = self._normal.take(2 * n)
            return self._scale * (z[0::2] + 1j * z[1::2])
        return self._scale * self._normal.take(n)


@dataclass(frozen=True)
class ImpulseSpec:
    """Impulse noise: single-sample clicks at Poisson-random times.

    Attributes
    ----------
    rate_per_s : float
        Mean number of impulses per second.
    level_dbfs : float
        Peak amplitude of each impulse, dBFS (20·log10 of |x|).
    """

    rate_per_s: float
    level_dbfs: float

    def to_json(self) -> dict:
        """Plain dict for the truth sidecar."""
        return {"rate_per_s": self.rate_per_s, "level_dbfs": self.level_dbfs}


def parse_impulse_noise(table, where: str) -> ImpulseSpec:
    """Validate an ``[impulse_noise]`` table (``rate_per_s``, ``level_dbfs``).

    Examples
    --------
    >>> parse_impulse_noise({"rate_per_s": 3, "level_dbfs": "-20 dBFS"}, "x.toml: impulse_noise")
    ImpulseSpec(rate_per_s=3.0, level_dbfs=-20.0)
    """
    check_keys(table, ("rate_per_s", "level_dbfs"), where)
    rate = get_number(table, "rate_per_s", where, lo=0.0, hi=1e5, lo_open=True)
    level = get_db(table, "level_dbfs", where)
    if level > 0:
        from ..errors import ParameterError

        raise ParameterError(f"{where}: level_dbfs = {table['level_dbfs']!r} is above full scale (allowed: <= 0 dBFS)")
    return ImpulseSpec(rate, level)


class ImpulseNoise:
    """Impulse noise for absolute sample ranges read in order.

    Parameters
    ----------
    spec : ImpulseSpec
    fs : float
    kind : str
        ``"iq"`` (impulses of random phase) or ``"real"`` (random sign).
    rng : numpy.random.Generator

    Notes
    -----
    The time axis is cut into fixed chunks of :data:`NOISE_CHUNK` samples; each
    chunk holds Poisson(rate·chunk/fs) impulses at uniform positions, drawn
    chunk by chunk in order (a Poisson process: Papoulis & Pillai, Probability, Random
    Variables and Stochastic Processes, 4th ed., McGraw-Hill 2002; from memory).
    """

    def __init__(self, spec: ImpulseSpec, fs: float, kind: str, rng: np.random.Generator):
        self._lam = spec.rate_per_s * NOISE_CHUNK / fs
        self._amp = 10.0 ** (spec.level_dbfs / 20.0)
        self._kind = kind
        self._rng = rng
        self._chunks: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._next_chunk = 0
        self.count = 0

    def _chunk(self, j):
        while self._next_chunk <= j:
            k = int(self._rng.poisson(self._lam))
            pos = np.sort(self._rng.integers(0, NOISE_CHUNK, k))
            if self._kind == "iq":
                val = self._amp * np.exp(2j * np.pi * self._rng.random(k))
            else:
                val = self._amp * np.where(self._rng.random(k) < 0.5, -1.0, 1.0)
            self._chunks[self._next_chunk] = (pos + self._next_chunk * NOISE_CHUNK, val)
            self._next_chunk += 1
        return self._chunks[j]

    def add_to(self, out: np.ndarray, start: int) -> None:
        """Add the impulses falling in ``start .. start+len(out)-1`` to ``out`` in place."""
        end = start + out.size
        for j in range(start // NOISE_CHUNK, (end - 1) // NOISE_CHUNK + 1):
            pos, val = self._chunk(j)
            sel = (pos >= start) & (pos < end)
            np.add.at(out, pos[sel] - start, val[sel])
            self.count += int(np.count_nonzero(sel))
            if end >= (j + 1) * NOISE_CHUNK:
                self._chunks.pop(j, None)
