"""Program material: what a station modulates onto its carrier.

A program is described by a small table (``kind`` plus its parameters); the
same description, with a sample rate and a seed, regenerates the same audio
anywhere: :func:`make_program` is what a test uses to score a receiver's
audio against what was sent (the truth sidecar holds the description, the
program rate and the seed).

Kinds
-----
tone     ``frequency``                          cos(2π f t)
tones    ``frequencies`` [, ``levels_db``]       Σ a_i cos(2π f_i t) / Σ a_i
sweep    ``start``, ``stop`` [, ``period_s``, ``law`` linear|log]   repeating chirp
noise    [``low``, ``high``]                    band-limited Gaussian noise
speech   [``bandwidth``, ``pitch``, ``syllable_rate``]   synthetic speech-like program
music    [``bandwidth``, ``tempo_bpm``]         synthetic music-like program
wav      ``path`` [, ``bandwidth``, ``loop``, ``normalize``]   the user's WAV file, resampled

Every program lies in [-1, 1] with a peak of 1 (tones at t = 0; random
programs over their first seconds, see :class:`~sdrx.synth.source.Normalised`),
so a station's modulation depth m is its peak modulation depth.
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import signal

from ..errors import ParameterError
from ..units import format_frequency
from ._keys import check_keys, get_choice, get_frequency, get_number, get_seconds
from ._nco import phase_cycles, phase_step
from .source import Normalised, ProgramSource, broadcast_sos

__all__ = [
    "ProgramSpec",
    "ProgramSource",
    "parse_program",
    "make_program",
    "PROGRAM_KINDS",
    "DEFAULT_BANDWIDTH_HZ",
    "CALIBRATION_S",
]

PROGRAM_KINDS = ("tone", "tones", "sweep", "noise", "speech", "music", "wav")
DEFAULT_BANDWIDTH_HZ = 4500.0  # ITU-R BS.639: 4.5 kHz audio -> 9 kHz emission
CALIBRATION_S = 8.0  # random programs peak at exactly 1 over their first 8 s
MAX_AUDIO_HZ = 20000.0

_KEYS = {
    "tone": ("kind", "frequency"),
    "tones": ("kind", "frequencies", "levels_db"),
    "sweep": ("kind", "start", "stop", "period_s", "law"),
    "noise": ("kind", "low", "high"),
    "speech": ("kind", "bandwidth", "pitch", "syllable_rate"),
    "music": ("kind", "bandwidth", "tempo_bpm"),
    "wav": ("kind", "path", "bandwidth", "loop", "normalize", "sha256"),
}


@dataclass(frozen=True)
class ProgramSpec:
    """A validated program description.

    Attributes
    ----------
    kind : str
        One of :data:`PROGRAM_KINDS`.
    params : tuple of (str, object)
        Every parameter, defaults filled in, in Hz / seconds / dB; sorted by name.
    """

    kind: str
    params: tuple

    def get(self, key, default=None):
        """One parameter's value."""
        return dict(self.params).get(key, default)

    @property
    def bandwidth_hz(self) -> float:
        """Highest audio frequency the program holds (Hz): half the emission width."""
        p = dict(self.params)
        if self.kind == "tone":
            return p["frequency"]
        if self.kind == "tones":
            return max(p["frequencies"])
        if self.kind == "sweep":
            return max(p["start"], p["stop"])
        if self.kind == "noise":
            return p["high"]
        return p["bandwidth"]

    def to_json(self) -> dict:
        """Plain dict (``kind`` first) that :func:`make_program` accepts back."""
        out = {"kind": self.kind}
        for k, v in self.params:
            out[k] = list(v) if isinstance(v, tuple) else v
        return out


def _audio_freq(table, key, where, default=None):
    kw = {} if default is None else {"default": default}
    f = get_frequency(table, key, where, **kw)
    if not 0 < f <= MAX_AUDIO_HZ:
        raise ParameterError(f"{where}: {key} = {table.get(key, f)!r} must be above 0 Hz and at most 20 kHz")
    return f


def parse_program(table, where: str = "program", base_dir=None) -> ProgramSpec:
    """Validate a program table (from a scenario or from a truth sidecar).

    Parameters
    ----------
    table : dict
        ``{"kind": "tone", "frequency": "1k"}`` and so on (see the module help).
    where : str
        Place of the table, for messages.
    base_dir : Path, optional
        Folder that a relative WAV ``path`` is relative to (the scenario's).

    Returns
    -------
    ProgramSpec

    Raises
    ------
    ParameterError
        Unknown kind or key, bad or missing value, missing WAV file.

    Examples
    --------
    >>> parse_program({"kind": "tone", "frequency": "1k"}).to_json()
    {'kind': 'tone', 'frequency': 1000.0}
    """
    if not isinstance(table, dict):
        raise ParameterError(f"{where}: expected a table with a 'kind', got {table!r}")
    kind = get_choice(table, "kind", where, PROGRAM_KINDS)
    where = f"{where} ({kind})"
    check_keys(table, _KEYS[kind], where)
    p = {}
    if kind == "tone":
        p["frequency"] = _audio_freq(table, "frequency", where)
    elif kind == "tones":
        freqs = table.get("frequencies")
        if not isinstance(freqs, list) or not freqs:
            raise ParameterError(f"{where}: frequencies must be a non-empty list such as [\"400\", \"1k\"], got {freqs!r}")
        p["frequencies"] = tuple(_audio_freq({"f": f}, "f", f"{where}: frequencies") for f in freqs)
        levels = table.get("levels_db", [0.0] * len(freqs))
        if not isinstance(levels, list) or len(levels) != len(freqs):
            raise ParameterError(f"{where}: levels_db must be a list of {len(freqs)} levels (one per frequency), got {levels!r}")
        p["levels_db"] = tuple(get_number({"l": v}, "l", f"{where}: levels_db", hi=0.0) for v in levels)
    elif kind == "sweep":
        p["start"] = _audio_freq(table, "start", where)
        p["stop"] = _audio_freq(table, "stop", where)
        p["period_s"] = get_seconds(table, "period_s", where, 1.0, allow_zero=False)
        p["law"] = get_choice(table, "law", where, ("linear", "log"), "linear")
    elif kind == "noise":
        p["low"] = get_frequency(table, "low", where, 100.0)
        p["high"] = _audio_freq(table, "high", where, DEFAULT_BANDWIDTH_HZ)
        if p["low"] >= p["high"]:
            raise ParameterError(f"{where}: low ({p['low']:g} Hz) must be below high ({p['high']:g} Hz)")
    elif kind == "speech":
        p["bandwidth"] = _audio_freq(table, "bandwidth", where, DEFAULT_BANDWIDTH_HZ)
        p["pitch"] = get_frequency(table, "pitch", where, 120.0)
        if not 50.0 <= p["pitch"] <= 400.0:
            raise ParameterError(f"{where}: pitch = {table['pitch']!r} must be 50..400 Hz")
        p["syllable_rate"] = get_frequency(table, "syllable_rate", where, 4.0)
        if not 1.0 <= p["syllable_rate"] <= 10.0:
            raise ParameterError(f"{where}: syllable_rate = {table['syllable_rate']!r} must be 1..10 per second")
        if p["bandwidth"] < 1000.0:
            raise ParameterError(f"{where}: bandwidth must be at least 1 kHz for speech, got {table['bandwidth']!r}")
    elif kind == "music":
        p["bandwidth"] = _audio_freq(table, "bandwidth", where, DEFAULT_BANDWIDTH_HZ)
        p["tempo_bpm"] = get_number(table, "tempo_bpm", where, 100.0, lo=30.0, hi=240.0)
        if p["bandwidth"] < 1000.0:
            raise ParameterError(f"{where}: bandwidth must be at least 1 kHz for music, got {table['bandwidth']!r}")
    elif kind == "wav":
        raw = table.get("path")
        if not isinstance(raw, str) or not raw:
            raise ParameterError(f"{where}: path must name a WAV file, got {raw!r}")
        path = Path(raw)
        if not path.is_absolute() and base_dir is not None:
            path = Path(base_dir) / path
        if not path.is_file():
            raise ParameterError(f"{where}: WAV file {raw!r} not found (looked at {path})")
        p["path"] = str(path.resolve())
        p["bandwidth"] = _audio_freq(table, "bandwidth", where, DEFAULT_BANDWIDTH_HZ)
        for key in ("loop", "normalize"):
            v = table.get(key, True)
            if not isinstance(v, bool):
                raise ParameterError(f"{where}: {key} must be true or false, got {v!r}")
            p[key] = v
        p["sha256"] = _sha256(path)
        if "sha256" in table and table["sha256"] != p["sha256"]:
            raise ParameterError(f"{where}: WAV file {raw!r} has changed since the truth was written (sha256 differs)")
    return ProgramSpec(kind, tuple(sorted(p.items())))


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def make_program(spec, fs: float, seed: int) -> ProgramSource:
    """A stateful program source for ``spec`` at rate ``fs``.

    Parameters
    ----------
    spec : dict or ProgramSpec
        A program table (as in a scenario, or ``truth["stations"][i]["program"]``).
    fs : float
        Sample rate, Hz. Random programs (noise, speech, music) depend on the
        rate: to reproduce a station of a capture use the truth's
        ``program_fs`` and ``program_seed``, then resample.
    seed : int
        Seed of the program's random generator (unused by tone, tones, sweep).

    Returns
    -------
    ProgramSource
        ``.read(n)`` returns the next n samples, float64 in [-1, 1]; the
        result does not depend on how reads are split.

    Raises
    ------
    ParameterError
        Bad spec, or a rate too low for the program's bandwidth.

    Examples
    --------
    >>> src = make_program({"kind": "tone", "frequency": 1000}, 8000.0, 0)
    >>> np.round(src.read(4), 6).tolist()
    [1.0, 0.707107, 0.0, -0.707107]
    """
    if not isinstance(spec, ProgramSpec):
        spec = parse_program(dict(spec))
    fs = float(fs)
    if not fs > 2.5 * spec.bandwidth_hz:
        raise ParameterError(
            f"program ({spec.kind}): sample rate {format_frequency(fs)} is too low for {spec.bandwidth_hz:g} Hz of audio "
            f"(needs more than {2.5 * spec.bandwidth_hz:g} Hz)"
        )
    p = dict(spec.params)
    seed = int(seed)
    if spec.kind == "tone":
        return TonesSource(fs, (p["frequency"],), (0.0,))
    if spec.kind == "tones":
        return TonesSource(fs, p["frequencies"], p["levels_db"])
    if spec.kind == "sweep":
        return SweepSource(fs, p["start"], p["stop"], p["period_s"], p["law"])
    cal = int(round(CALIBRATION_S * fs))
    if spec.kind == "noise":
        return Normalised(lambda: NoiseSource(fs, p["low"], p["high"], seed), cal)
    if spec.kind == "speech":
        from .speech import SpeechSource

        return Normalised(lambda: SpeechSource(fs, p["bandwidth"], p["pitch"], p["syllable_rate"], seed), cal)
    if spec.kind == "music":
        from .music import MusicSource

        return Normalised(lambda: MusicSource(fs, p["bandwidth"], p["tempo_bpm"], seed), cal)
    from .wavprogram import WavSource

    probe = WavSource(fs, p["path"], p["bandwidth"], p["loop"])
    if not p["normalize"]:
        return Normalised(lambda: WavSource(fs, p["path"], p["bandwidth"], p["loop"]), 0)
    return Normalised(lambda: WavSource(fs, p["path"], p["bandwidth"], p["loop"]), probe.period_samples)


class TonesSource(ProgramSource):
    """Sum of cosines, all in phase at t = 0, scaled by the sum of their amplitudes.

    Notes
    -----
    p[n] = Σ a_i cos(2π f_i n / fs) / Σ a_i, a_i = 10^(levels_db_i / 20);
    p[0] = 1, so the peak is exactly 1. Phase from a 64-bit accumulator
    (exact for any n).
    """

    def __init__(self, fs, freqs, levels_db):
        super().__init__(fs)
        amps = 10.0 ** (np.asarray(levels_db, dtype=float) / 20.0)
        self._amps = amps / amps.sum()
        self._steps = [phase_step(f, fs) for f in freqs]

    def _render(self, start, count):
        out = np.zeros(count)
        for a, step in zip(self._amps, self._steps):
            out += a * np.cos(2.0 * np.pi * phase_cycles(start, count, step))
        return out


class SweepSource(ProgramSource):
    """A repeating chirp from ``start`` to ``stop`` Hz every ``period_s``, cosine, peak 1.

    Notes
    -----
    Linear law: cycles(t) = f0·t + (f1 − f0)·t²/(2T); log law:
    cycles(t) = f0·T/ln r·(r^(t/T) − 1), r = f1/f0 (instantaneous frequency
    f0·r^(t/T)). The period is a whole number of samples N = round(T·fs)
    and each period starts where the last one ended (phase-continuous).
    """

    def __init__(self, fs, f0, f1, period_s, law):
        super().__init__(fs)
        self._n = max(2, int(round(period_s * fs)))
        self._T = self._n / fs
        self._f0, self._f1, self._law = f0, f1, law
        self._cyc_period = float(self._cycles(np.array([self._T]))[0])

    def _cycles(self, t):
        f0, f1, T = self._f0, self._f1, self._T
        if self._law == "log" and f0 != f1:
            r = f1 / f0
            return f0 * T / math.log(r) * (np.power(r, t / T) - 1.0)
        return f0 * t + (f1 - f0) * t * t / (2.0 * T)

    def _render(self, start, count):
        n = np.arange(start, start + count, dtype=np.int64)
        q, k = np.divmod(n, self._n)
        base = np.mod(q * self._cyc_period, 1.0)
        return np.cos(2.0 * np.pi * (base + self._cycles(k / self.fs)))


class NoiseSource(ProgramSource):
    """Gaussian noise band-limited to ``low``..``high`` Hz (not yet normalised).

    Notes
    -----
    White N(0, 1) samples drawn in fixed chunks from ``numpy.random.Generator``
    (PCG64, ``seed``) through :func:`~sdrx.synth.source.broadcast_sos` with
    carried state.
    """

    def __init__(self, fs, low, high, seed):
        super().__init__(fs)
        self._rng = np.random.default_rng(seed)
        self._sos = broadcast_sos(fs, low, high)
        self._zi = np.zeros((self._sos.shape[0], 2))

    def _render(self, start, count):
        x = self._rng.standard_normal(count)
        y, self._zi = signal.sosfilt(self._sos, x, zi=self._zi)
        return y

