"""Thermal noise of the receiver's front end, added to the capture samples.

A receiver of noise figure F, fed from a matched source at the standard
temperature T0 = 290 K, delivers noise equal to that of a noiseless receiver
fed with F·k·T0 watts per hertz at its antenna (the definition of the noise
figure: total output noise over the part due to the source at T0). sdrx adds
F·k·T0 per hertz, not the receiver's own (F − 1)·k·T0: a synthesized capture
holds no thermal noise at all, so adding F·k·T0 reproduces the bench on which
a sensitivity is specified (a signal generator, itself a 290 K source,
driving the receiver), and the usual sensitivity figure
``C/N0 = P_c − (kT0 + NF)`` then holds. A capture recorded from a real
antenna already holds the antenna's noise; with a noise figure set, sdrx adds
a 290 K source's worth on top (at NF 10 dB that is 0.46 dB more than
(F − 1)·k·T0).

The noise is white and Gaussian over the capture's whole band (I/Q: fs;
real: 0 to fs/2), at the capture rate, so the fast and the exact path receive
the same noisy samples. It is drawn in chunks of :data:`CHUNK` samples on the
capture's absolute sample grid, chunk ``c`` from its own generator seeded
with ``(seed, c)`` (numpy SeedSequence), so the noise of a sample depends
only on the seed and the sample's index: any block size, and an excerpt
``--start``, get the same noise. The next chunks are drawn ahead in one
worker thread (numpy's generators release the GIL), overlapping the chain.

References: k = 1.380649e-23 J/K (exact, SI since 2019); T0 = 290 K and the
noise-factor definition, IEEE Standard Dictionary of Electrical and
Electronics Terms (IEEE Std 100), "noise factor"; Friis, "Noise figures of
radio receivers", Proc. IRE 32 (1944).
"""

from __future__ import annotations

import math

import numpy as np

from ..synth.noise import noise_power

__all__ = [
    "BOLTZMANN_J_PER_K",
    "T0_K",
    "CHUNK",
    "kt0_dbm_per_hz",
    "thermal_density_dbm_per_hz",
    "thermal_density_dbfs_per_hz",
    "ThermalNoise",
]

#: Boltzmann constant, J/K (exact in the SI since 2019).
BOLTZMANN_J_PER_K = 1.380649e-23
#: Standard reference temperature of noise figures, K (IEEE).
T0_K = 290.0
#: Samples per noise chunk (the unit the noise is seeded and drawn in).
CHUNK = 65536
_TAG = 0x7E51   # keeps these streams apart from any other use of the same seed


def kt0_dbm_per_hz() -> float:
    """k·T0 in dBm per hertz.

    Examples
    --------
    >>> round(kt0_dbm_per_hz(), 3)   # the familiar -174 dBm/Hz
    -173.975
    """
    return 10.0 * math.log10(BOLTZMANN_J_PER_K * T0_K / 1e-3)


def thermal_density_dbm_per_hz(noise_figure_db: float) -> float:
    """Noise density referred to the antenna, F·k·T0, dBm per hertz.

    Examples
    --------
    >>> round(thermal_density_dbm_per_hz(10.0), 2)
    -163.98
    """
    return kt0_dbm_per_hz() + float(noise_figure_db)


def thermal_density_dbfs_per_hz(noise_figure_db: float, full_scale_dbm: float) -> float:
    """F·k·T0 as a density in dBFS per hertz (the level of a carrier of equal power in each hertz).

    Parameters
    ----------
    noise_figure_db : float
    full_scale_dbm : float
        Antenna power of a full-scale (0 dBFS) carrier.

    Returns
    -------
    float
        ``kT0 + NF − full_scale_dbm``; C/N0 (dB·Hz) = carrier dBFS − this.

    Examples
    --------
    >>> round(thermal_density_dbfs_per_hz(10.0, -20.0), 2)
    -143.98
    """
    return thermal_density_dbm_per_hz(noise_figure_db) - float(full_scale_dbm)


class ThermalNoise:
    """White Gaussian noise for absolute sample ranges of a capture; deterministic and seeded.

    Parameters
    ----------
    density_dbfs_per_hz : float
        Noise in each hertz of the band, as the level of a carrier of equal power.
    fs : float
        Capture rate, Hz.
    kind : {"iq", "real"}
    seed : int
    prefetch : bool
        Draw the chunks following each request in a worker thread.

    Notes
    -----
    Sample power E|n|² = 10^(N/10)·fs (I/Q) or E[n²] = 10^(N/10)·fs/4 (real),
    the convention of :func:`sdrx.synth.noise.noise_power`, so that
    C/N0 = carrier dBFS − N for both kinds.

    Examples
    --------
    >>> a = ThermalNoise(-100.0, 1e6, "iq", seed=1, prefetch=False)
    >>> x = np.concatenate([a.take(0, 7), a.take(7, 70000)])
    >>> bool(np.array_equal(x, a.take(0, 70007)))
    True
    >>> round(float(np.mean(np.abs(a.take(0, 200000)) ** 2)) / 1e-4, 1)   # 10^(-10)·1e6
    1.0
    """

    def __init__(self, density_dbfs_per_hz: float, fs: float, kind: str, seed: int = 0, prefetch: bool = True):
        if kind not in ("iq", "real"):
            raise ValueError(f"kind must be 'iq' or 'real', not {kind!r}")
        self.density_dbfs_per_hz = float(density_dbfs_per_hz)
        self.kind = kind
        self.seed = int(seed)
        power = noise_power(self.density_dbfs_per_hz, fs, kind)
        self._scale = np.float32(math.sqrt(power / 2.0) if kind == "iq" else math.sqrt(power))
        self._cache: dict = {}      # chunk index -> samples (the chunks of the last request)
        self._ahead: dict = {}      # chunk index -> Future, drawn in the worker thread
        self._pool = None
        self._prefetch = bool(prefetch)

    def _draw(self, c: int) -> np.ndarray:
        rng = np.random.Generator(np.random.SFC64(np.random.SeedSequence([self.seed, _TAG, c])))
        if self.kind == "iq":
            z = rng.standard_normal(2 * CHUNK, dtype=np.float32).view(np.complex64)
        else:
            z = rng.standard_normal(CHUNK, dtype=np.float32)
        z *= self._scale
        return z

    def _chunk(self, c: int) -> np.ndarray:
        if c in self._cache:
            return self._cache[c]
        fut = self._ahead.pop(c, None)
        return fut.result() if fut is not None else self._draw(c)

    def take(self, start: int, n: int) -> np.ndarray:
        """Noise for capture samples ``start`` … ``start + n − 1`` (complex64 or float32)."""
        out = np.empty(n, np.complex64 if self.kind == "iq" else np.float32)
        if n == 0:
            return out
        c0, c1 = start // CHUNK, (start + n - 1) // CHUNK
        cache = {}
        for c in range(c0, c1 + 1):
            z = self._chunk(c)
            cache[c] = z
            a = max(start, c * CHUNK)
            b = min(start + n, (c + 1) * CHUNK)
            out[a - start:b - start] = z[a - c * CHUNK:b - c * CHUNK]
        self._cache = cache
        if self._prefetch:
            self._draw_ahead(c1 + 1, c1 - c0 + 1)
        return out

    def _draw_ahead(self, first: int, count: int) -> None:
        if self._pool is None:
            from concurrent.futures import ThreadPoolExecutor

            self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sdrx-noise")
        for c in [c for c in self._ahead if c < first - 1]:
            self._ahead.pop(c).cancel()
        for c in range(first, first + count):
            if c not in self._ahead and c not in self._cache:
                self._ahead[c] = self._pool.submit(self._draw, c)

    def add(self, block: np.ndarray, start: int) -> np.ndarray:
        """``block`` plus the noise of its samples (a new array, the block's dtype)."""
        return block + self.take(start, len(block)).astype(block.dtype, copy=False)

    def close(self) -> None:
        """Stop the worker thread; idempotent."""
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        self._ahead = {}
