"""Chain specs: TOML (data only) -> validated, frozen dataclasses.

Every key has a default, so an empty spec is a complete chain (the same as
the ``medium`` preset). Validation errors name the key path and the allowed
values, e.g. ``if_stage[2].bandwidth: 1.2M is wider than twice the IF (910k)``.
"""

from __future__ import annotations

import dataclasses
import math
import difflib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from ..errors import ParameterError
from ..limits import MAX_IF_HZ, MAX_IF_STAGES, MAX_RF_HZ, MAX_TOTAL_ORDER, MIN_IF_HZ, check_range
from ..tomlfile import read_toml
from ..units import format_frequency, parse_db, parse_frequency, to_float


__all__ = [
    "PreselectorSpec",
    "MixerSpec",
    "IfStageSpec",
    "AgcSpec",
    "DetectorSpec",
    "AudioSpec",
    "FrontendSpec",
    "BlankerSpec",
    "NotchSpec",
    "ChainSpec",
    "parse_spec",
    "load_chain",
    "list_presets",
    "spec_to_dict",
    "PRESET_DIR",
    "parse_full_scale_dbm",
    "full_scale_override",
    "check_noise_figure_db",
    "FULL_SCALE_DBM_RANGE",
    "NOISE_FIGURE_DB_RANGE",
    "Key",
    "MAX_TOTAL_GAIN_DB",
]

PRESET_DIR = Path(__file__).with_name("presets")

PRESELECTOR_KINDS = ("none", "tracking", "lowpass", "bandpass")
MIXER_KINDS = ("real", "quadrature")
RESPONSES = ("butterworth", "chebyshev", "elliptic", "bessel", "single_tuned", "double_tuned")
PROTOTYPE_RESPONSES = ("butterworth", "chebyshev", "elliptic", "bessel")
DETECTOR_KINDS = ("envelope", "diode", "synchronous")
INJECTIONS = ("high", "low")
SIDEBANDS = ("both", "lower", "upper")


@dataclass(frozen=True)
class PreselectorSpec:
    """RF selectivity ahead of the mixer (sets image rejection)."""

    kind: str = "tracking"
    q: float = 40.0
    cutoff_hz: float = 1.8e6
    low_hz: float = 520e3
    high_hz: float = 1.72e6
    order: int = 2


@dataclass(frozen=True)
class MixerSpec:
    """Real multiplier or quadrature (image-reject) mixer with imbalance."""

    kind: str = "real"
    gain_error_db: float = 0.0
    phase_error_deg: float = 0.0


@dataclass(frozen=True)
class IfStageSpec:
    """One IF stage, in signal order."""

    response: str = "butterworth"
    order: int = 2
    bandwidth_hz: float | None = 9e3
    q: float | None = None
    ripple_db: float = 0.5
    stopband_db: float = 60.0
    gain_db: float = 30.0
    agc: bool = False


@dataclass(frozen=True)
class AgcSpec:
    """Feedback AGC from the detector's carrier level to the marked stage(s)."""

    enabled: bool = True
    reference_dbfs: float = -12.0
    carrier_filter_ms: float = 10.0
    attack_ms: float = 20.0
    release_ms: float = 30.0
    hang_ms: float = 0.0
    max_gain_db: float = 60.0
    min_gain_db: float = -20.0


@dataclass(frozen=True)
class DetectorSpec:
    """AM detector."""

    kind: str = "envelope"
    rc_us: float = 100.0
    pll_bandwidth_hz: float = 50.0
    sideband: str = "both"


@dataclass(frozen=True)
class AudioSpec:
    """Audio filters and output rate."""

    rate_hz: float = 48000.0
    highpass_hz: float = 80.0
    lowpass_hz: float = 4500.0
    highpass_order: int = 2
    lowpass_order: int = 4
    gain_db: float = 6.0


@dataclass(frozen=True)
class FrontendSpec:
    """The front end's absolute scale and noise (both optional).

    ``full_scale_dbm``: antenna power, dBm, of a carrier at full scale
    (0 dBFS). ``noise_figure_db``: the receiver's noise figure referred to
    the antenna; when set, the chain adds the thermal noise F·kT0·B of a
    matched source at T0 = 290 K seen through that noise figure
    (:mod:`sdrx.dsp.thermal`). ``seed`` picks the noise sequence.
    """

    full_scale_dbm: float | None = None
    noise_figure_db: float | None = None
    seed: int = 0


#: Accepted range of ``frontend.full_scale_dbm`` and ``--full-scale-dbm``, dBm.
FULL_SCALE_DBM_RANGE = (-150.0, 60.0)
#: Accepted range of ``frontend.noise_figure_db``, dB (0 dB: a noiseless receiver).
NOISE_FIGURE_DB_RANGE = (0.0, 60.0)


def full_scale_override(value):
    """The ``--full-scale-dbm`` option: None when not given, else its value checked by :func:`parse_full_scale_dbm`.

    Examples
    --------
    >>> full_scale_override(None), full_scale_override("-10")
    (None, -10.0)
    """
    return None if value is None else parse_full_scale_dbm(value, "--full-scale-dbm")


def parse_full_scale_dbm(value, name: str = "--full-scale-dbm") -> float:
    """A full-scale power in dBm: a number or a string such as ``"-10 dBm"``, within range.

    Raises
    ------
    ParameterError
        Not a number, not finite, or outside :data:`FULL_SCALE_DBM_RANGE`.

    Examples
    --------
    >>> parse_full_scale_dbm("-10 dBm"), parse_full_scale_dbm(5)
    (-10.0, 5.0)
    """
    if isinstance(value, str):
        text = value.strip()
        if text.lower().endswith("dbm"):
            text = text[:-3]
        try:
            out = float(text)
        except ValueError:
            raise ParameterError(f"{name}: cannot read {value!r} as a power in dBm") from None
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ParameterError(f"{name}: expected a power in dBm, got {value!r}")
    else:
        out = float(value)
    lo, hi = FULL_SCALE_DBM_RANGE
    if not math.isfinite(out) or not lo <= out <= hi:
        raise ParameterError(f"{name}: {value!r} must be a power from {lo:g} to {hi:g} dBm")
    return out


def check_noise_figure_db(value: float, name: str = "--noise-figure") -> float:
    """A noise figure in dB within :data:`NOISE_FIGURE_DB_RANGE`.

    Raises
    ------
    ParameterError
        Outside the range.

    Examples
    --------
    >>> check_noise_figure_db(7.0)
    7.0
    """
    lo, hi = NOISE_FIGURE_DB_RANGE
    if not lo <= value <= hi:
        raise ParameterError(f"{name}: {value:g} must lie from {lo:g} to {hi:g} dB")
    return float(value)


@dataclass(frozen=True)
class BlankerSpec:
    """Noise blanker on the wideband signal, ahead of the IF filters (off by default)."""

    enabled: bool = False
    threshold_db: float = 15.0   # a pulse stands this far above the running level (median |x|²)
    width_us: float = 10.0       # blanked around each pulse sample, centred
    level_ms: float = 1.0        # the running level's segments


@dataclass(frozen=True)
class NotchSpec:
    """Heterodyne notch in the audio after the detector (off unless auto or frequencies)."""

    auto: bool = False
    frequencies_hz: tuple = ()
    width_hz: float = 40.0       # −3 dB width of each notch
    threshold_db: float = 20.0   # auto: a tone stands this far above the spectrum around it
    steady_s: float = 2.0        # auto: and holds its frequency (and a smooth level) this long
    max_tones: int = 8           # auto: most tones notched at once

    @property
    def enabled(self) -> bool:
        return self.auto or bool(self.frequencies_hz)


def _default_stages():
    return (
        IfStageSpec(response="butterworth", order=2, bandwidth_hz=9e3, gain_db=30.0, agc=True),
        IfStageSpec(response="single_tuned", order=1, bandwidth_hz=None, q=60.0, gain_db=20.0, agc=False),
    )


@dataclass(frozen=True)
class ChainSpec:
    """A whole receiver chain, as the user specified it (defaults filled in)."""

    name: str = "medium"
    description: str = ""
    if_hz: float = 455e3
    injection: str = "high"
    preselector: PreselectorSpec = field(default_factory=PreselectorSpec)
    mixer: MixerSpec = field(default_factory=MixerSpec)
    if_stages: tuple = field(default_factory=_default_stages)
    agc: AgcSpec = field(default_factory=AgcSpec)
    detector: DetectorSpec = field(default_factory=DetectorSpec)
    audio: AudioSpec = field(default_factory=AudioSpec)
    source: str = "<defaults>"
    frontend: FrontendSpec = field(default_factory=FrontendSpec)
    blanker: BlankerSpec = field(default_factory=BlankerSpec)
    notch: NotchSpec = field(default_factory=NotchSpec)


@dataclass(frozen=True)
class Key:
    """One key of a spec table: the dataclass field it fills, how its value is read, and its bounds.

    Parameters
    ----------
    field : str
        Field of the spec dataclass.
    kind : str or tuple
        ``"str"``, ``"bool"``, ``"freq"`` (Hz, "455k" allowed), ``"int"``,
        ``"float"``, ``"db"`` (a number or "-30 dB"), or a tuple of the
        allowed strings.
    low, high : float, optional
        Bounds (inclusive unless ``low_open``/``high_open``); every number
        sdrx accepts has both, named in the error.
    unit : str
        Unit for the message ("Hz" prints kHz/MHz).
    why : str
        What the bound protects, for the message (optional).

    Notes
    -----
    To add a key: one line in its section's table below (and the field on
    the dataclass). Checks that involve two keys (``min_gain_db`` below
    ``max_gain_db``) go in :func:`parse_spec` after the table is read.
    """

    field: str
    kind: Any
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    unit: str = ""
    why: str = ""


_ORDER = dict(kind="int", low=1, high=12)

# key name in TOML -> Key; one table per section
_TOP_KEYS = {
    "name": Key("name", "str"),
    "description": Key("description", "str"),
    "if_frequency": Key("if_hz", "freq", MIN_IF_HZ, MAX_IF_HZ, unit="Hz"),
    "injection": Key("injection", INJECTIONS),
    "preselector": None,
    "mixer": None,
    "if_stage": None,
    "agc": None,
    "detector": None,
    "audio": None,
    "frontend": None,
    "blanker": None,
    "notch": None,
}
_PRESELECTOR_KEYS = {
    "kind": Key("kind", PRESELECTOR_KINDS),
    "q": Key("q", "float", 0.5, 1000, low_open=True, why="loaded Q of one tuned circuit"),
    "cutoff": Key("cutoff_hz", "freq", 1e3, MAX_RF_HZ, unit="Hz"),
    "low": Key("low_hz", "freq", 1e3, MAX_RF_HZ, unit="Hz"),
    "high": Key("high_hz", "freq", 1e3, MAX_RF_HZ, unit="Hz"),
    "order": Key("order", **_ORDER),
}
_MIXER_KEYS = {
    "kind": Key("kind", MIXER_KINDS),
    "gain_error_db": Key("gain_error_db", "float", -20, 20),
    "phase_error_deg": Key("phase_error_deg", "float", -90, 90, low_open=True, high_open=True),
}
_STAGE_KEYS = {
    "response": Key("response", RESPONSES),
    "order": Key("order", **_ORDER),
    "bandwidth": Key("bandwidth_hz", "freq", 10, MAX_IF_HZ, unit="Hz"),
    "q": Key("q", "float", 0.5, 10000, low_open=True, why="loaded Q of a tuned circuit"),
    "ripple_db": Key("ripple_db", "float", 0.01, 10, why="a smaller ripple puts poles on the axis"),
    "stopband_db": Key("stopband_db", "float", 3, 150),
    "gain_db": Key("gain_db", "float", -60, 100),
    "agc": Key("agc", "bool"),
}
_AGC_KEYS = {
    "enabled": Key("enabled", "bool"),
    "reference_dbfs": Key("reference_dbfs", "db", -80, 0, why="carrier level at the detector"),
    "carrier_filter_ms": Key("carrier_filter_ms", "float", 0, 1000, why="the AGC filter's time constant"),
    "attack_ms": Key("attack_ms", "float", 0.1, 10000),
    "release_ms": Key("release_ms", "float", 1, 100000),
    "hang_ms": Key("hang_ms", "float", 0, 60000),
    "max_gain_db": Key("max_gain_db", "db", -100, 120),
    "min_gain_db": Key("min_gain_db", "db", -100, 120),
}
_DETECTOR_KEYS = {
    "kind": Key("kind", DETECTOR_KINDS),
    "rc_us": Key("rc_us", "float", 0.1, 100000),
    "pll_bandwidth": Key("pll_bandwidth_hz", "freq", 0.1, 5000, unit="Hz"),
    "sideband": Key("sideband", SIDEBANDS),
}
_AUDIO_KEYS = {
    "rate": Key("rate_hz", "freq", 8000, 192000, unit="Hz"),
    "highpass": Key("highpass_hz", "freq", 1, 96000, unit="Hz"),
    "lowpass": Key("lowpass_hz", "freq", 1, 96000, unit="Hz"),
    "highpass_order": Key("highpass_order", **_ORDER),
    "lowpass_order": Key("lowpass_order", **_ORDER),
    "gain_db": Key("gain_db", "float", -60, 60),
}
#: the stage gains summed (fixed and AGC-controlled): beyond this the arithmetic, not the chain, decides
MAX_TOTAL_GAIN_DB = 200.0

def _seed(value: Any, path: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value < 2 ** 63:
        raise ParameterError(f"{path}: expected a whole number from 0 to 2^63 - 1, got {value!r}")
    return value


_FRONTEND_KEYS = {
    "full_scale_dbm": Key("full_scale_dbm", parse_full_scale_dbm),
    "noise_figure_db": Key("noise_figure_db", "db", *NOISE_FIGURE_DB_RANGE),
    "seed": Key("seed", _seed),
}


_BLANKER_KEYS = {
    "enabled": Key("enabled", "bool"),
    "threshold_db": Key("threshold_db", "float", 3, 60, unit="dB"),
    "width_us": Key("width_us", "float", 0.1, 1000, unit="us"),
    "level_ms": Key("level_ms", "float", 0.05, 100, unit="ms"),
}


def _frequency_list(value: Any, path: str) -> tuple:
    if not isinstance(value, list):
        raise ParameterError(f"{path}: expected a list of frequencies such as [\"1.5k\", 3000], got {value!r}")
    if len(value) > 64:
        raise ParameterError(f"{path}: {len(value)} frequencies; at most 64")
    out = []
    for i, v in enumerate(value):
        hz = parse_frequency(v, f"{path}[{i}]")
        if hz <= 0:
            raise ParameterError(f"{path}[{i}]: must be above 0 Hz, got {v!r}")
        out.append(hz)
    return tuple(out)


_NOTCH_KEYS = {
    "auto": Key("auto", "bool"),
    "frequencies": Key("frequencies_hz", _frequency_list),
    "width": Key("width_hz", "freq", 1, 500, unit="Hz"),
    "threshold_db": Key("threshold_db", "float", 6, 60, unit="dB"),
    "steady_s": Key("steady_s", "float", 0.2, 30, unit="s"),
    "max_tones": Key("max_tones", "int", 1, 16),
}


def _check_notch(notch: NotchSpec, audio: AudioSpec) -> None:
    for i, f in enumerate(notch.frequencies_hz):
        if f >= audio.rate_hz / 2:
            raise ParameterError(
                f"notch.frequencies[{i}]: {format_frequency(f)} must be below half the audio rate ({format_frequency(audio.rate_hz / 2)})"
            )


def _check_keys(table: Mapping, allowed: Mapping, where: str) -> None:
    for key in table:
        if key not in allowed:
            near = difflib.get_close_matches(str(key), list(allowed), n=1)
            hint = f"; did you mean {near[0]!r}?" if near else ""
            prefix = f"{where}." if where else ""
            raise ParameterError(
                f"{prefix}{key}: unknown key{hint} (allowed: {', '.join(sorted(allowed))})"
            )


def _convert(value: Any, key: Key, path: str):
    """Read one value as its :class:`Key` says, and check its bounds (a callable kind reads and
    checks the value itself: ``kind(value, path)``)."""
    kind = key.kind
    if callable(kind):
        return kind(value, path)
    if isinstance(kind, tuple):
        if not isinstance(value, str) or value not in kind:
            raise ParameterError(f"{path}: {value!r} is not one of {', '.join(kind)}")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise ParameterError(f"{path}: expected a string, got {value!r}")
        allowed = "\n\t" if key.field == "description" else ""
        bad = [c for c in value if not c.isprintable() and c not in allowed]
        if bad:
            raise ParameterError(f"{path}: holds the control character {bad[0]!r}; write printable text")
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise ParameterError(f"{path}: expected true or false, got {value!r}")
        return value
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int) or not key.low <= value <= key.high:
            raise ParameterError(f"{path}: expected a whole number from {key.low:g} to {key.high:g}, got {value!r}")
        return value
    if kind == "freq":
        out = parse_frequency(value, path)
        if out <= 0:
            raise ParameterError(f"{path}: must be above 0 Hz, got {value!r}")
    elif kind == "db" and isinstance(value, str):
        out = parse_db(value, path)
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise ParameterError(f"{path}: expected a number, got {value!r}")
    else:
        out = to_float(value, path)
    if key.high_open and out == key.high:
        raise ParameterError(f"{path}: {out:g} must be below {key.high:g}")
    return check_range(out, path, key.low, key.high, unit=key.unit, low_open=key.low_open, why=key.why)


def _table(raw: Mapping, key: str) -> Mapping:
    t = raw.get(key, {})
    if not isinstance(t, Mapping):
        raise ParameterError(f"{key}: expected a table ([{key}]), got {t!r}")
    return t


def _build(cls, table: Mapping, keys: Mapping, where: str, base=None):
    _check_keys(table, keys, where)
    kwargs = {}
    for key, value in table.items():
        k = keys[key]
        kwargs[k.field] = _convert(value, k, f"{where}.{key}" if where else key)
    return dataclasses.replace(base if base is not None else cls(), **kwargs)


def _build_stage(table: Mapping, index: int, if_hz: float) -> IfStageSpec:
    where = f"if_stage[{index}]"
    if not isinstance(table, Mapping):
        raise ParameterError(f"{where}: expected a table ([[if_stage]]), got {table!r}")
    _check_keys(table, _STAGE_KEYS, where)
    response = _convert(table.get("response", "butterworth"), _STAGE_KEYS["response"], f"{where}.response")
    if response in ("single_tuned", "double_tuned"):
        if "bandwidth" in table and "q" in table:
            raise ParameterError(f"{where}: give either q or bandwidth for {response}, not both")
        base = IfStageSpec(response=response, order=1, bandwidth_hz=None, q=60.0, gain_db=20.0)
        if "bandwidth" in table:
            base = dataclasses.replace(base, q=None)
        if "order" in table:
            raise ParameterError(f"{where}.order: {response} has no prototype order; use more [[if_stage]] tables")
    else:
        if "q" in table:
            raise ParameterError(f"{where}.q: {response} takes bandwidth, not q (q is for single_tuned/double_tuned)")
        base = IfStageSpec(response=response)
    stage = _build(IfStageSpec, table, _STAGE_KEYS, where, base)
    if stage.bandwidth_hz is not None and stage.bandwidth_hz >= 2 * if_hz:
        raise ParameterError(
            f"{where}.bandwidth: {format_frequency(stage.bandwidth_hz)} is wider than twice the IF "
            f"({format_frequency(2 * if_hz)})"
        )
    if stage.q is not None and stage.q <= 0.5:
        raise ParameterError(f"{where}.q: {stage.q:g} is too low for a tuned circuit (needs q > 0.5)")
    if response == "elliptic" and stage.stopband_db <= stage.ripple_db:
        raise ParameterError(f"{where}.stopband_db: {stage.stopband_db:g} must exceed ripple_db ({stage.ripple_db:g})")
    return stage


def _stage_order(st: IfStageSpec) -> int:
    """Pole pairs a stage puts at the IF: its prototype order (2 for a double-tuned pair)."""
    return {"single_tuned": 1, "double_tuned": 2}.get(st.response, st.order)


def _check_stage_totals(stages) -> None:
    total = sum(_stage_order(st) for st in stages)
    if total > MAX_TOTAL_ORDER:
        raise ParameterError(f"if_stage: the stages' orders add up to {total}; at most {MAX_TOTAL_ORDER} "
                             "(pole pairs at the IF) are supported")
    gain = sum(st.gain_db for st in stages)
    if abs(gain) > MAX_TOTAL_GAIN_DB:
        raise ParameterError(f"if_stage: the stage gains add up to {gain:g} dB; at most {MAX_TOTAL_GAIN_DB:g} dB "
                             "either way")


def parse_spec(raw: Mapping, source: str = "<spec>", default_name: str | None = None) -> ChainSpec:
    """Validate a chain spec given as a mapping (a parsed TOML document).

    Parameters
    ----------
    raw : mapping
        Keys as in the chain spec format (``if_frequency``, ``[preselector]``,
        ``[[if_stage]]`` ...). Missing keys take their defaults.
    source : str
        Where the spec came from, kept on the result for messages.
    default_name : str, optional
        Name used when the spec has no ``name`` key.

    Returns
    -------
    ChainSpec

    Raises
    ------
    ParameterError
        Naming the key path and the allowed values.

    Examples
    --------
    >>> spec = parse_spec({"if_frequency": "450k", "if_stage": [{"response": "single_tuned", "q": 50}]})
    >>> spec.if_hz, spec.if_stages[0].q, spec.if_stages[0].agc
    (450000.0, 50.0, True)
    """
    if not isinstance(raw, Mapping):
        raise ParameterError(f"{source}: a chain spec must be a table of keys, got {type(raw).__name__}")
    _check_keys(raw, _TOP_KEYS, "")
    top = {}
    for key in ("name", "description", "if_frequency", "injection"):
        if key in raw:
            k = _TOP_KEYS[key]
            top[k.field] = _convert(raw[key], k, key)
    if_hz = top.get("if_hz", ChainSpec.if_hz)
    pre = _build(PreselectorSpec, _table(raw, "preselector"), _PRESELECTOR_KEYS, "preselector")
    if pre.kind == "bandpass" and pre.low_hz >= pre.high_hz:
        raise ParameterError(
            f"preselector.low: {format_frequency(pre.low_hz)} must be below preselector.high ({format_frequency(pre.high_hz)})"
        )
    mixer = _build(MixerSpec, _table(raw, "mixer"), _MIXER_KEYS, "mixer")
    if mixer.kind == "real" and (mixer.gain_error_db or mixer.phase_error_deg):
        raise ParameterError("mixer.gain_error_db/phase_error_deg: only a quadrature mixer has imbalance (set mixer.kind = \"quadrature\")")
    raw_stages = raw.get("if_stage", None)
    if raw_stages is None:
        stages = _default_stages()
        if "if_frequency" in raw:
            for i, st in enumerate(stages):
                if st.bandwidth_hz is not None and st.bandwidth_hz >= 2 * if_hz:
                    raise ParameterError(f"if_stage[{i + 1}].bandwidth: default {format_frequency(st.bandwidth_hz)} is wider than twice the IF")
    else:
        if not isinstance(raw_stages, list) or not raw_stages:
            raise ParameterError("if_stage: expected one or more [[if_stage]] tables")
        if len(raw_stages) > MAX_IF_STAGES:
            raise ParameterError(f"if_stage: {len(raw_stages)} stages; at most {MAX_IF_STAGES} are supported")
        stages = tuple(_build_stage(t, i + 1, if_hz) for i, t in enumerate(raw_stages))
        if not any(s.agc for s in stages) and not any("agc" in t for t in raw_stages):
            stages = (dataclasses.replace(stages[0], agc=True),) + stages[1:]
    _check_stage_totals(stages)
    agc = _build(AgcSpec, _table(raw, "agc"), _AGC_KEYS, "agc")
    if agc.min_gain_db > agc.max_gain_db:
        raise ParameterError(
            f"agc.min_gain_db: {agc.min_gain_db:g} is above agc.max_gain_db ({agc.max_gain_db:g})"
        )
    if agc.enabled and not any(s.agc for s in stages):
        raise ParameterError("agc.enabled: no [[if_stage]] has agc = true; mark the stage the AGC controls")
    detector = _build(DetectorSpec, _table(raw, "detector"), _DETECTOR_KEYS, "detector")
    audio = _build(AudioSpec, _table(raw, "audio"), _AUDIO_KEYS, "audio")
    if audio.highpass_hz >= audio.lowpass_hz:
        raise ParameterError(
            f"audio.highpass: {format_frequency(audio.highpass_hz)} must be below audio.lowpass ({format_frequency(audio.lowpass_hz)})"
        )
    if audio.lowpass_hz >= audio.rate_hz / 2:
        raise ParameterError(
            f"audio.lowpass: {format_frequency(audio.lowpass_hz)} must be below half the audio rate ({format_frequency(audio.rate_hz / 2)})"
        )
    if not 8000 <= audio.rate_hz <= 192000 or audio.rate_hz != int(audio.rate_hz):
        raise ParameterError(f"audio.rate: {audio.rate_hz:g} must be a whole number of Hz from 8000 to 192000")
    frontend = _build(FrontendSpec, _table(raw, "frontend"), _FRONTEND_KEYS, "frontend")
    if detector.sideband != "both" and detector.kind != "synchronous":
        raise ParameterError(
            f"detector.sideband: {detector.sideband!r} needs kind = \"synchronous\" (kind is {detector.kind!r})"
        )
    blanker = _build(BlankerSpec, _table(raw, "blanker"), _BLANKER_KEYS, "blanker")
    notch = _build(NotchSpec, _table(raw, "notch"), _NOTCH_KEYS, "notch")
    _check_notch(notch, audio)
    name = top.get("name", default_name or "custom")
    return ChainSpec(
        name=name,
        description=top.get("description", ""),
        if_hz=if_hz,
        injection=top.get("injection", "high"),
        preselector=pre,
        mixer=mixer,
        if_stages=tuple(stages),
        agc=agc,
        detector=detector,
        audio=audio,
        source=source,
        frontend=frontend,
        blanker=blanker,
        notch=notch,
    )


def list_presets() -> list[tuple[str, str]]:
    """Shipped presets as (name, one-line description), sorted by name.

    Examples
    --------
    >>> [name for name, _ in list_presets()]
    ['medium', 'narrow', 'wide']
    """
    out = []
    for p in sorted(PRESET_DIR.glob("*.toml")):
        raw = read_toml(p)
        out.append((p.stem, str(raw.get("description", raw.get("name", p.stem)))))
    return out


def load_chain(spec) -> ChainSpec:
    """Load a chain spec from a preset name, a TOML path, a mapping or a ChainSpec.

    Parameters
    ----------
    spec : str, Path, mapping or ChainSpec
        A preset name (see :func:`list_presets`), a path to a TOML file, a
        parsed mapping, or an already validated spec.

    Returns
    -------
    ChainSpec

    Raises
    ------
    ParameterError
        Unknown preset (listing the presets), unreadable TOML, invalid keys.

    Examples
    --------
    >>> load_chain("narrow").if_stages[0].response
    'elliptic'
    """
    if isinstance(spec, ChainSpec):
        return spec
    if isinstance(spec, Mapping):
        return parse_spec(spec, "<mapping>")
    text = str(spec)
    shown = text if len(text) <= 80 else text[:77] + "..."
    path = Path(text)
    try:
        named_file = path.suffix.lower() == ".toml" or path.exists()
        if not named_file:
            preset = PRESET_DIR / f"{text}.toml"
            if not preset.is_file():
                names = ", ".join(n for n, _ in list_presets())
                raise ParameterError(f"--chain {shown}: no such preset or file (presets: {names})")
            path = preset
            default_name = text
        else:
            default_name = path.stem
        if not path.is_file():
            raise ParameterError(f"{shown}: chain spec file not found")
    except OSError as exc:
        raise ParameterError(f"--chain {shown}: {exc.strerror}") from None
    raw = read_toml(path)
    try:
        return parse_spec(raw, str(path), default_name=default_name)
    except ParameterError as exc:
        raise ParameterError(f"{path}: {exc}") from None


def spec_to_dict(spec: ChainSpec) -> dict:
    """The resolved spec (every default filled in) as TOML-style keys, for manifests.

    Examples
    --------
    >>> d = spec_to_dict(load_chain("medium"))
    >>> d["if_frequency"], d["if_stage"][0]["response"]
    (455000.0, 'butterworth')
    """
    def inv(obj, keys):
        out = {}
        for key, k in keys.items():
            out[key] = getattr(obj, k.field)
        return out

    out = {
        "name": spec.name,
        "description": spec.description,
        "if_frequency": spec.if_hz,
        "injection": spec.injection,
        "preselector": inv(spec.preselector, _PRESELECTOR_KEYS),
        "mixer": inv(spec.mixer, _MIXER_KEYS),
        "if_stage": [_stage_to_dict(s, inv(s, _STAGE_KEYS)) for s in spec.if_stages],
        "agc": inv(spec.agc, _AGC_KEYS),
        "detector": inv(spec.detector, _DETECTOR_KEYS),
        "audio": inv(spec.audio, _AUDIO_KEYS),
        "blanker": inv(spec.blanker, _BLANKER_KEYS),
        "notch": {**inv(spec.notch, _NOTCH_KEYS), "frequencies": list(spec.notch.frequencies_hz)},
    }
    # [frontend] only when the spec sets it (its keys are optional; absent = no absolute scale, no noise)
    if spec.frontend != FrontendSpec():
        out["frontend"] = {k: v for k, v in inv(spec.frontend, _FRONTEND_KEYS).items() if v is not None}
    return out


def _stage_to_dict(stage: IfStageSpec, keys: dict) -> dict:
    """A stage's TOML keys, leaving out unset ones and the order tuned circuits do not accept."""
    out = {k: v for k, v in keys.items() if v is not None}
    if stage.response in ("single_tuned", "double_tuned"):
        out.pop("order", None)
    return out
