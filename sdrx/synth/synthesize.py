"""Scenario -> capture samples, block by block, and the truth sidecar.

Each station is rendered as its complex envelope times a carrier oscillator:

    iq:   x[n] = e[n] · exp(j2π (f_rf − center) n / fs)
    real: x[n] = Re{ e[n] · exp(j2π f_rf n / fs) }
    e[n] = A · (1 + m p[n]) · g1[n]  [ + A · ρ · exp(−j2π f_rf τ) · (1 + m p[n − τ·fs]) · g2[n] ]

with A = 10^(level_dbfs/20), m the modulation depth, p the program
(in [-1, 1]) made at the program rate and interpolated to fs, g the fading
gains, and the bracket only for the two-path model. This is
s(t) = A (1 + m p(t)) cos(2π f t + φ) (AM: Haykin, Communication Systems, 4th ed.,
Wiley 2001, ch. 2; from memory).
Every stage keeps explicit state and computes each sample from its absolute
index, so the samples do not depend on the block size.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import signal

from ..errors import OutputError, ParameterError
from ..fileio import check_free_space, check_output
from ..fileset import OutputSet
from ._nco import phase_cycles, phase_offset, phase_step
from .fading import make_gain
from .noise import ImpulseNoise, WhiteNoise, noise_power
from .program import make_program
from .scenario import Scenario, StationSpec, load_scenario

__all__ = ["synthesize", "iter_capture", "Interpolator", "InterpolatorDesign", "design_interpolator",
           "program_rate", "truth_path_for", "station_seeds", "BLOCK", "PROGRAM_FS_MIN"]

BLOCK = 1 << 16
PROGRAM_FS_MIN = 16000.0
_STOP_DB = 90.0
_WAV_DATATYPES = ("ri16_le", "ci16_le", "rf32_le", "cf32_le")


def program_rate(fs: float, bandwidth_hz: float) -> tuple:
    """Program rate fa = fs / L with L the largest integer keeping fa >= max(16 kHz, 3.2·bandwidth).

    Returns
    -------
    (fa, L)

    Examples
    --------
    >>> program_rate(1.6e6, 4500.0)
    (16000.0, 100)
    """
    target = max(PROGRAM_FS_MIN, 3.2 * bandwidth_hz)
    L = max(1, int(math.floor(fs / target)))
    return fs / L, L


@dataclass(frozen=True)
class InterpolatorDesign:
    """Polyphase interpolation by L from the program rate to fs (zero delay).

    Attributes
    ----------
    L : int
        Interpolation factor.
    K : int
        Half-length in program samples; each output uses 2K + 1 of them.
    table : ndarray, shape (L, 2K + 1)
        table[r, j] weights x[q − K + j] for output n = qL + r; each row sums to 1.
    """

    L: int
    K: int
    table: np.ndarray


def design_interpolator(fs: float, L: int, bandwidth_hz: float) -> InterpolatorDesign:
    """Kaiser-window low-pass (passes 0..bandwidth, stops from fa − bandwidth, 90 dB) in polyphase form.

    Notes
    -----
    Taps N ≈ (A − 7.95)/(14.36·Δf/fs) + 1 (Kaiser's formula: Oppenheim & Schafer,
    Discrete-Time Signal Processing, 3rd ed., Pearson 2010, sec. 7.5.3; from
    memory), Δf = fa − 2·bandwidth, cut-off fa/2; symmetric (odd length 2KL + 1,
    centred), so y[qL] ≈ x[q]. Each phase is normalised to a DC gain of exactly
    1, so a constant (the carrier) has no images.

    Examples
    --------
    >>> d = design_interpolator(1.6e6, 100, 4500.0)
    >>> d.table.shape, bool(np.allclose(d.table.sum(axis=1), 1.0))
    ((100, 15), True)
    """
    if L == 1:
        return InterpolatorDesign(1, 0, np.ones((1, 1)))
    fa = fs / L
    width = fa - 2.0 * bandwidth_hz
    n_taps = (_STOP_DB - 7.95) / (14.36 * width / fs) + 1.0
    K = max(2, int(math.ceil(n_taps / (2.0 * L))))
    beta = 0.1102 * (_STOP_DB - 8.7)  # Kaiser's beta for A > 50 dB
    h = signal.firwin(2 * K * L + 1, fa / 2.0, window=("kaiser", beta), fs=fs) * L
    hpad = np.concatenate((h, np.zeros(L)))
    r = np.arange(L)[:, None]
    j = np.arange(2 * K + 1)[None, :]
    table = hpad[r + L * (2 * K - j)]
    table = table / table.sum(axis=1, keepdims=True)
    return InterpolatorDesign(L, K, table)


class Interpolator:
    """Stateful interpolation of a program source to fs, by absolute output index.

    Parameters
    ----------
    design : InterpolatorDesign
    source : ProgramSource
        Read as needed; samples before time 0 are 0.

    Notes
    -----
    y[n] = Σ_j table[n mod L, j] · x[n // L − K + j], summed in a fixed order.
    State: the window of program samples still needed and how many were read.
    """

    def __init__(self, design: InterpolatorDesign, source):
        self.d = design
        self._src = source
        self._buf = np.zeros(design.K)  # program samples x[-K .. -1] = 0
        self._buf_start = -design.K
        self._read = 0  # next program index to read

    def render(self, start: int, count: int) -> np.ndarray:
        """Samples ``start .. start+count-1`` at fs (ask in order)."""
        L, K = self.d.L, self.d.K
        n = np.arange(start, start + count, dtype=np.int64)
        q, r = np.divmod(n, L)
        need_hi = int(q[-1]) + K
        if need_hi >= self._read:
            more = self._src.read(need_hi + 1 - self._read)
            self._buf = np.concatenate((self._buf, more))
            self._read = need_hi + 1
        lo = int(q[0]) - K
        if lo > self._buf_start:
            self._buf = self._buf[lo - self._buf_start:]
            self._buf_start = lo
        base = q - K - self._buf_start
        tab = self.d.table
        out = np.zeros(count)
        for j in range(2 * K + 1):
            out += tab[r, j] * self._buf[base + j]
        return out


def station_seeds(seed: int, station: StationSpec) -> dict:
    """Seeds of a station's random parts, derived from the root seed and the station's name.

    Returns
    -------
    dict
        ``program`` (int, for :func:`make_program`), ``phase``, ``fading``,
        ``second_path`` (numpy SeedSequence objects).
    """
    key = station.name_key
    ss = lambda i: np.random.SeedSequence(seed, spawn_key=(3, key, i))  # noqa: E731
    words = ss(0).generate_state(2, np.uint32)
    return {"program": int(words[0]) | (int(words[1]) << 32), "phase": ss(1), "fading": ss(2), "second_path": ss(3)}


class StationRenderer:
    """One station's samples at fs, rendered in order, with all its state."""

    def __init__(self, st: StationSpec, cap, design: InterpolatorDesign, fa: float):
        self.st = st
        seeds = station_seeds(cap.seed, st)
        self.program_seed = seeds["program"]
        if st.phase_deg is None:
            self.phase_deg = float(np.random.default_rng(seeds["phase"]).uniform(0.0, 360.0))
        else:
            self.phase_deg = float(st.phase_deg)
        self._amp = 10.0 ** (st.level_dbfs / 20.0)
        self._m = st.depth
        self._kind = cap.kind
        f = st.rf_hz - (cap.center_hz if cap.kind == "iq" else 0.0)
        self.offset_hz = f
        self._step = phase_step(f, cap.fs)
        self._phase0 = phase_offset(self.phase_deg / 360.0)
        try:
            src = make_program(st.program, fa, self.program_seed)
        except ParameterError as exc:
            raise ParameterError(f"station {st.name!r}: {exc}") from None
        self._interp = Interpolator(design, src)
        fd = st.fading
        self.delay_samples = 0
        self._second = None
        if fd is None:
            self._g1 = make_gain("steady", 1.0, cap.fs, None)
        elif fd.model in ("rayleigh", "rician"):
            self._g1 = make_gain(fd.model, fd.rate_hz, cap.fs, np.random.default_rng(seeds["fading"]), fd.k_db)
        else:
            self._g1 = make_gain("steady", 1.0, cap.fs, None)
            self._g2 = make_gain(fd.second, fd.rate_hz, cap.fs, np.random.default_rng(seeds["second_path"]), fd.k_db)
            self.delay_samples = max(1, int(round(fd.delay_s * cap.fs)))
            tau = self.delay_samples / cap.fs
            rho = 10.0 ** (fd.level_db / 20.0)
            self._second = rho * np.exp(-2j * np.pi * st.rf_hz * tau)
            self._history = np.zeros(self.delay_samples)  # p[n - D .. n - 1]

    def render(self, start: int, count: int) -> np.ndarray:
        """Samples ``start .. start+count-1`` (complex128 for iq, float64 for real)."""
        p = np.clip(self._interp.render(start, count), -1.0, 1.0)
        env = self._amp * (1.0 + self._m * p) * self._g1.gains(start, count)
        if self._second is not None:
            joined = np.concatenate((self._history, p))
            pd = joined[:count]
            self._history = joined[count:]
            env = env + self._amp * self._second * (1.0 + self._m * pd) * self._g2.gains(start, count)
        rot = np.exp(2j * np.pi * phase_cycles(start, count, self._step, self._phase0))
        x = env * rot
        return x if self._kind == "iq" else x.real


class CarrierRenderer:
    """An unmodulated carrier at fs: A·exp(j(2π·(f − center)·n/fs + φ)) (its real part in a real capture)."""

    def __init__(self, spec, cap):
        self.spec = spec
        if spec.phase_deg is None:
            ss = np.random.SeedSequence(cap.seed, spawn_key=(4, spec.name_key))
            self.phase_deg = float(np.random.default_rng(ss).uniform(0.0, 360.0))
        else:
            self.phase_deg = float(spec.phase_deg)
        self._amp = 10.0 ** (spec.level_dbfs / 20.0)
        self.offset_hz = spec.frequency_hz - (cap.center_hz if cap.kind == "iq" else 0.0)
        self._step = phase_step(self.offset_hz, cap.fs)
        self._phase0 = phase_offset(self.phase_deg / 360.0)
        self._kind = cap.kind

    def render(self, start: int, count: int) -> np.ndarray:
        """Samples ``start .. start+count-1``."""
        x = self._amp * np.exp(2j * np.pi * phase_cycles(start, count, self._step, self._phase0))
        return x if self._kind == "iq" else x.real


def _renderers(scenario: Scenario):
    cap = scenario.capture
    bw = max(st.program.bandwidth_hz for st in scenario.stations)
    fa, L = program_rate(cap.fs, bw)
    design = design_interpolator(cap.fs, L, bw)
    stations = [StationRenderer(st, cap, design, fa) for st in scenario.stations]
    return fa, design, stations


def iter_capture(scenario: Scenario, *, block_size: int = BLOCK, progress=None, _state=None):
    """The capture's samples as an iterator of blocks of ``block_size`` (the last may be shorter).

    Every generator is built (and every program file opened) before this
    returns, so a bad scenario fails before anything is written.

    Parameters
    ----------
    scenario : Scenario
    block_size : int
        Samples per block; the samples do not depend on it.
    progress : callable, optional
        ``progress(done, total)`` in samples.

    Returns
    -------
    iterator of numpy.ndarray
        complex128 (iq) or float64 (real), full scale 1.0.

    Examples
    --------
    >>> from sdrx.synth.scenario import parse_scenario
    >>> sc = parse_scenario({"capture": {"kind": "iq", "rate": "100k", "center": "1M", "seconds": 0.01},
    ...                      "station": [{"name": "A", "frequency": "1.01M", "level_dbfs": -6, "depth": 0.5}]})
    >>> x = np.concatenate(list(iter_capture(sc, block_size=333)))
    >>> x.shape, round(float(np.abs(x).max()), 3)
    ((1000,), 0.752)
    """
    block_size = int(block_size)
    if block_size < 1:
        raise ParameterError(f"block_size: must be >= 1, got {block_size}")
    cap = scenario.capture
    fa, design, stations = _renderers(scenario)
    noise = None
    if cap.noise_dbfs_per_hz is not None:
        rng = np.random.default_rng(np.random.SeedSequence(cap.seed, spawn_key=(1,)))
        noise = WhiteNoise(noise_power(cap.noise_dbfs_per_hz, cap.fs, cap.kind), cap.kind, rng)
    impulses = None
    if scenario.impulse_noise is not None:
        rng = np.random.default_rng(np.random.SeedSequence(cap.seed, spawn_key=(2,)))
        impulses = ImpulseNoise(scenario.impulse_noise, cap.fs, cap.kind, rng)
    carriers = [CarrierRenderer(c, cap) for c in scenario.carriers]
    recorder = None
    if scenario.front_end is not None:
        from .frontend import FrontEndRecorder

        recorder = FrontEndRecorder(scenario.front_end, cap.fs, cap.center_hz if cap.kind == "iq" else None,
                                    cap.samples)
    if _state is not None:
        _state.update(program_fs=fa, design=design, stations=stations, impulses=impulses, carriers=carriers)
    clean = _blocks(cap, stations + carriers, noise, impulses, block_size,
                    None if recorder is not None else progress,
                    cap.samples if recorder is None else recorder.input_needed)
    if recorder is None:
        return clean
    return _recorded(clean, recorder, block_size, progress)


def _blocks(cap, sources, noise, impulses, block_size, progress, total):
    dtype = np.complex128 if cap.kind == "iq" else np.float64
    done = 0
    while done < total:
        n = min(block_size, total - done)
        out = np.zeros(n, dtype=dtype)
        for s in sources:
            out += s.render(done, n)
        if noise is not None:
            out += noise.take(n)
        if impulses is not None:
            impulses.add_to(out, done)
        done += n
        if progress is not None:
            progress(done, total)
        yield out


def _recorded(clean, recorder, block_size, progress):
    """The perfect recording through the faulty front end, re-blocked to ``block_size``."""
    pending = []
    have = 0
    done = 0

    def emit(final):
        nonlocal pending, have, done
        while have >= block_size or (final and have):
            joined = np.concatenate(pending)
            n = min(block_size, joined.size)
            pending = [joined[n:]] if joined.size > n else []
            have = joined.size - n
            done += n
            if progress is not None:
                progress(done, recorder.total)
            yield joined[:n]

    for block in clean:
        y = recorder.process(block)
        if y.size:
            pending.append(y)
            have += y.size
        yield from emit(False)
    y = recorder.flush()
    if y.size:
        pending.append(y)
        have += y.size
    yield from emit(True)


def _over_full_scale(block) -> int:
    """Components (I, Q or real) beyond full scale: clipped by an integer datatype."""
    if np.iscomplexobj(block):
        return int(np.count_nonzero(np.abs(block.real) > 1.0) + np.count_nonzero(np.abs(block.imag) > 1.0))
    return int(np.count_nonzero(np.abs(block) > 1.0))


def _capture_name(out: Path) -> str:
    """File name a reader is pointed at: the .sigmf-meta of a SigMF pair, else the file itself."""
    if out.name.lower().endswith(".sigmf-data"):
        return out.name[: -len(".sigmf-data")] + ".sigmf-meta"
    return out.name


def truth_path_for(out) -> Path:
    """``<stem>.truth.json`` beside a capture (stem without .sigmf-meta/.sigmf-data/.wav)."""
    p = Path(out)
    name = p.name
    for suffix in (".sigmf-meta", ".sigmf-data", ".wav"):
        if name.lower().endswith(suffix):
            name = name[: -len(suffix)]
            break
    return p.with_name(name + ".truth.json")


def _truth(scenario: Scenario, out: Path, state: dict, samples: int, over: int) -> dict:
    cap = scenario.capture
    stations = []
    for r in state["stations"]:
        st = r.st
        entry = {
            "name": st.name,
            "frequency_hz": st.frequency_hz,
            "frequency_error_hz": st.frequency_error_hz,
            "carrier_hz": st.rf_hz,
            "level_dbfs": st.level_dbfs,
            "depth": st.depth,
            "phase_deg": r.phase_deg,
            "occupied_hz": list(st.occupied_hz),
            "program": st.program.to_json(),
            "program_fs": state["program_fs"],
            "program_seed": r.program_seed,
            "fading": None,
        }
        if cap.kind == "iq":
            entry["offset_hz"] = r.offset_hz
        if st.program.kind in ("tone", "tones"):
            entry["tones_hz"] = list(st.program.get("frequencies", (st.program.get("frequency"),)))
        if st.fading is not None:
            fd = st.fading.to_json()
            if st.fading.model == "two_path":
                fd["delay_samples"] = r.delay_samples
                fd["delay_s_actual"] = r.delay_samples / cap.fs
            entry["fading"] = fd
        stations.append(entry)
    _add_neighbours(stations)
    noise = None
    if cap.noise_dbfs_per_hz is not None:
        band = cap.fs if cap.kind == "iq" else cap.fs / 2.0
        noise = {
            "dbfs_per_hz": cap.noise_dbfs_per_hz,
            "dbfs_in_capture_band": cap.noise_dbfs_per_hz + 10.0 * math.log10(band),
            "dbfs_in_9khz": cap.noise_dbfs_per_hz + 10.0 * math.log10(9000.0),
            "band_hz": band,
        }
    imp = None
    if scenario.impulse_noise is not None:
        imp = dict(scenario.impulse_noise.to_json(), count=state["impulses"].count)
    return {
        "sdrx_truth": 1,
        "title": scenario.title,
        "scenario": scenario.path.name if scenario.path is not None else None,
        "capture": {
            "path": _capture_name(out),
            "kind": cap.kind,
            "rate_hz": cap.fs,
            "center_hz": cap.center_hz,
            "datatype": cap.datatype,
            "seconds": samples / cap.fs,
            "samples": samples,
            "band_hz": list(cap.band_hz),
            "seed": cap.seed,
            "over_full_scale": over,
        },
        "noise": noise,
        "impulse_noise": imp,
        "carriers": [dict({"name": c.spec.name, "frequency_hz": c.spec.frequency_hz,
                           "level_dbfs": c.spec.level_dbfs, "phase_deg": c.phase_deg},
                          **({"offset_hz": c.offset_hz} if cap.kind == "iq" else {}))
                     for c in state.get("carriers", [])],
        "front_end": None if scenario.front_end is None else scenario.front_end.to_json(cap.kind),
        "program_fs": state["program_fs"],
        "interpolator": {"L": state["design"].L, "K": state["design"].K},
        "stations": stations,
        "conventions": {
            "level_dbfs": "20*log10(carrier amplitude); iq: |x|, real: cosine peak",
            "rf": "iq: Re{x(t) exp(j2pi center t)}; real: samples at absolute frequency",
            "am": "s(t) = A (1 + m p(t)) cos(2pi f t + phase), p in [-1, 1]",
            "program": "make_program(program, program_fs, program_seed) regenerates p at program_fs; "
                       "RF sample n carries p at time n / rate_hz (no delay)",
        },
    }


#: stations within this distance of each other are listed as each other's neighbours in the truth
NEIGHBOUR_HZ = 20e3


def _add_neighbours(stations: list) -> None:
    """Each station's neighbours within :data:`NEIGHBOUR_HZ` (offset, level relative to it) and the side they
    are on: "below", "above", "both" or None, so that a one-sided adjacent station shows in the truth."""
    for st in stations:
        near = [{"name": o["name"], "offset_hz": round(o["carrier_hz"] - st["carrier_hz"], 6),
                 "level_db": o["level_dbfs"] - st["level_dbfs"]}
                for o in stations if o is not st and abs(o["carrier_hz"] - st["carrier_hz"]) <= NEIGHBOUR_HZ]
        near.sort(key=lambda n: n["offset_hz"])
        sides = {("above" if n["offset_hz"] > 0 else "below") for n in near if n["offset_hz"] != 0}
        st["neighbours"] = near
        st["adjacent_side"] = None if not sides else ("both" if len(sides) == 2 else sides.pop())


def synthesize(scenario, out, *, seconds=None, seed=None, force=False, progress=None, block_size: int = BLOCK) -> dict:
    """Write a scenario's capture to ``out`` and its truth sidecar beside it.

    Parameters
    ----------
    scenario : str, Path or Scenario
        Scenario TOML file or a loaded :class:`Scenario`.
    out : str or Path
        ``*.sigmf-meta`` (SigMF pair) or ``*.wav``.
    seconds, seed : optional
        Override the scenario's duration and seed.
    force : bool
        Replace existing outputs.
    progress : callable, optional
        ``progress(done, total)`` in samples.
    block_size : int
        Samples generated per step (memory is proportional to it; the output is not).

    Returns
    -------
    dict
        The truth (also written to ``<stem>.truth.json``).

    Raises
    ------
    ParameterError, CaptureError, OutputError
        Bad scenario or output; nothing is written.
    """
    from ..capture import open_writer

    sc = scenario if isinstance(scenario, Scenario) else load_scenario(scenario)
    sc = sc.with_overrides(seconds=seconds, seed=seed)
    cap = sc.capture
    if str(out) == "" or Path(out).name in ("", ".", ".."):
        raise OutputError(f"-o {str(out)!r}: give a capture file name (NAME.sigmf-meta or NAME.wav)")
    out = Path(out)
    where = str(sc.path) if sc.path is not None else "scenario"
    inputs = [sc.path] + [Path(st.program.get("path")) for st in sc.stations if st.program.kind == "wav"]
    inputs = [p for p in inputs if p is not None]
    if out.suffix.lower() == ".wav" and cap.datatype not in _WAV_DATATYPES:
        raise ParameterError(f"{where}: datatype {cap.datatype} cannot go into a WAV capture (-o {out}); "
                             f"use one of {', '.join(_WAV_DATATYPES)} or a .sigmf-meta output")
    truth_path = truth_path_for(out)
    check_output(truth_path, inputs=inputs, force=force, option="truth sidecar")
    from ..capture.datatypes import parse_datatype

    check_free_space(out, cap.samples * parse_datatype(cap.datatype).sample_bytes)
    state: dict = {}
    blocks = iter_capture(sc, block_size=block_size, progress=progress, _state=state)
    over = 0
    meta = {"description": f"sdrx synth: {sc.title or where}"}
    # one set: capture data, truth, then the file a reader opens (the .sigmf-meta, or the WAV)
    with OutputSet(_capture_head(out)) as outputs:
        with open_writer(out, fs=cap.fs, kind=cap.kind, datatype=cap.datatype,
                         center_hz=cap.center_hz if cap.kind == "iq" else None, force=force, inputs=inputs,
                         meta=meta, expected_samples=cap.samples, outputs=outputs) as w:
            for block in blocks:
                over += _over_full_scale(block)
                w.write(block)
        truth = _truth(sc, out, state, cap.samples, int(over))
        _write_text(outputs.add(truth_path), json.dumps(truth, indent=2) + "\n", truth_path)
    return truth


def _capture_head(out: Path) -> Path:
    """The file of a capture a reader opens: the .sigmf-meta of a SigMF pair, else the file itself."""
    return out.with_name(_capture_name(out))


def _write_text(tmp: Path, text: str, final: Path) -> None:
    try:
        tmp.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise OutputError(f"{final}: cannot write ({exc.strerror})") from None
