"""Chain specs: TOML (data only) -> validated, frozen dataclasses.

Every key has a default, so an empty spec is a complete chain (the same as
the ``medium`` preset). Validation errors name the key path and the allowed
values, e.g. ``if_stage[2].bandwidth: 1.2M is wider than twice the IF (910k)``.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from ..errors import ParameterError
from ..units import format_frequency, parse_db, parse_frequency

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = [
    "PreselectorSpec",
    "MixerSpec",
    "IfStageSpec",
    "AgcSpec",
    "DetectorSpec",
    "AudioSpec",
    "ChainSpec",
    "parse_spec",
    "load_chain",
    "list_presets",
    "spec_to_dict",
    "PRESET_DIR",
]

PRESET_DIR = Path(__file__).with_name("presets")

PRESELECTOR_KINDS = ("none", "tracking", "lowpass", "bandpass")
MIXER_KINDS = ("real", "quadrature")
RESPONSES = ("butterworth", "chebyshev", "elliptic", "bessel", "single_tuned", "double_tuned")
PROTOTYPE_RESPONSES = ("butterworth", "chebyshev", "elliptic", "bessel")
DETECTOR_KINDS = ("envelope", "diode", "synchronous")
INJECTIONS = ("high", "low")


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
    attack_ms: float = 5.0
    release_ms: float = 300.0
    hang_ms: float = 0.0
    max_gain_db: float = 60.0
    min_gain_db: float = -20.0


@dataclass(frozen=True)
class DetectorSpec:
    """AM detector."""

    kind: str = "envelope"
    rc_us: float = 100.0
    pll_bandwidth_hz: float = 50.0


@dataclass(frozen=True)
class AudioSpec:
    """Audio filters and output rate."""

    rate_hz: float = 48000.0
    highpass_hz: float = 80.0
    lowpass_hz: float = 4500.0
    highpass_order: int = 2
    lowpass_order: int = 4
    gain_db: float = 6.0


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


# key name in TOML -> (field name, kind)
_TOP_KEYS = {
    "name": ("name", "str"),
    "description": ("description", "str"),
    "if_frequency": ("if_hz", "freq"),
    "injection": ("injection", INJECTIONS),
    "preselector": None,
    "mixer": None,
    "if_stage": None,
    "agc": None,
    "detector": None,
    "audio": None,
}
_PRESELECTOR_KEYS = {
    "kind": ("kind", PRESELECTOR_KINDS),
    "q": ("q", "posfloat"),
    "cutoff": ("cutoff_hz", "freq"),
    "low": ("low_hz", "freq"),
    "high": ("high_hz", "freq"),
    "order": ("order", "order"),
}
_MIXER_KEYS = {
    "kind": ("kind", MIXER_KINDS),
    "gain_error_db": ("gain_error_db", "float"),
    "phase_error_deg": ("phase_error_deg", "float"),
}
_STAGE_KEYS = {
    "response": ("response", RESPONSES),
    "order": ("order", "order"),
    "bandwidth": ("bandwidth_hz", "freq"),
    "q": ("q", "posfloat"),
    "ripple_db": ("ripple_db", "posfloat"),
    "stopband_db": ("stopband_db", "posfloat"),
    "gain_db": ("gain_db", "float"),
    "agc": ("agc", "bool"),
}
_AGC_KEYS = {
    "enabled": ("enabled", "bool"),
    "reference_dbfs": ("reference_dbfs", "db"),
    "attack_ms": ("attack_ms", "posfloat"),
    "release_ms": ("release_ms", "posfloat"),
    "hang_ms": ("hang_ms", "nonneg"),
    "max_gain_db": ("max_gain_db", "db"),
    "min_gain_db": ("min_gain_db", "db"),
}
_DETECTOR_KEYS = {
    "kind": ("kind", DETECTOR_KINDS),
    "rc_us": ("rc_us", "posfloat"),
    "pll_bandwidth": ("pll_bandwidth_hz", "freq"),
}
_AUDIO_KEYS = {
    "rate": ("rate_hz", "freq"),
    "highpass": ("highpass_hz", "freq"),
    "lowpass": ("lowpass_hz", "freq"),
    "highpass_order": ("highpass_order", "order"),
    "lowpass_order": ("lowpass_order", "order"),
    "gain_db": ("gain_db", "float"),
}


def _check_keys(table: Mapping, allowed: Mapping, where: str) -> None:
    for key in table:
        if key not in allowed:
            near = difflib.get_close_matches(str(key), list(allowed), n=1)
            hint = f"; did you mean {near[0]!r}?" if near else ""
            prefix = f"{where}." if where else ""
            raise ParameterError(
                f"{prefix}{key}: unknown key{hint} (allowed: {', '.join(sorted(allowed))})"
            )


def _convert(value: Any, kind, path: str):
    if isinstance(kind, tuple):
        if not isinstance(value, str) or value not in kind:
            raise ParameterError(f"{path}: {value!r} is not one of {', '.join(kind)}")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise ParameterError(f"{path}: expected a string, got {value!r}")
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise ParameterError(f"{path}: expected true or false, got {value!r}")
        return value
    if kind == "freq":
        hz = parse_frequency(value, path)
        if hz <= 0:
            raise ParameterError(f"{path}: must be above 0 Hz, got {value!r}")
        return hz
    if kind == "order":
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 12:
            raise ParameterError(f"{path}: expected a whole number from 1 to 12, got {value!r}")
        return value
    if kind in ("float", "posfloat", "nonneg", "db"):
        if kind == "db" and isinstance(value, str):
            out = parse_db(value, path)
        elif isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ParameterError(f"{path}: expected a number, got {value!r}")
        else:
            out = float(value)
        if not math.isfinite(out):
            raise ParameterError(f"{path}: {value!r} is not finite")
        if kind == "posfloat" and out <= 0:
            raise ParameterError(f"{path}: must be above 0, got {value!r}")
        if kind == "nonneg" and out < 0:
            raise ParameterError(f"{path}: must be 0 or more, got {value!r}")
        return out
    raise AssertionError(kind)  # pragma: no cover


def _table(raw: Mapping, key: str) -> Mapping:
    t = raw.get(key, {})
    if not isinstance(t, Mapping):
        raise ParameterError(f"{key}: expected a table ([{key}]), got {t!r}")
    return t


def _build(cls, table: Mapping, keys: Mapping, where: str, base=None):
    _check_keys(table, keys, where)
    kwargs = {}
    for key, value in table.items():
        fname, kind = keys[key]
        kwargs[fname] = _convert(value, kind, f"{where}.{key}" if where else key)
    return dataclasses.replace(base if base is not None else cls(), **kwargs)


def _build_stage(table: Mapping, index: int, if_hz: float) -> IfStageSpec:
    where = f"if_stage[{index}]"
    if not isinstance(table, Mapping):
        raise ParameterError(f"{where}: expected a table ([[if_stage]]), got {table!r}")
    _check_keys(table, _STAGE_KEYS, where)
    response = _convert(table.get("response", "butterworth"), RESPONSES, f"{where}.response")
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
            fname, kind = _TOP_KEYS[key]
            top[fname] = _convert(raw[key], kind, key)
    if_hz = top.get("if_hz", ChainSpec.if_hz)
    pre = _build(PreselectorSpec, _table(raw, "preselector"), _PRESELECTOR_KEYS, "preselector")
    if pre.kind == "bandpass" and pre.low_hz >= pre.high_hz:
        raise ParameterError(
            f"preselector.low: {format_frequency(pre.low_hz)} must be below preselector.high ({format_frequency(pre.high_hz)})"
        )
    mixer = _build(MixerSpec, _table(raw, "mixer"), _MIXER_KEYS, "mixer")
    if mixer.kind == "real" and (mixer.gain_error_db or mixer.phase_error_deg):
        raise ParameterError("mixer.gain_error_db/phase_error_deg: only a quadrature mixer has imbalance (set mixer.kind = \"quadrature\")")
    if abs(mixer.phase_error_deg) >= 90:
        raise ParameterError(f"mixer.phase_error_deg: {mixer.phase_error_deg:g} must lie between -90 and 90")
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
        stages = tuple(_build_stage(t, i + 1, if_hz) for i, t in enumerate(raw_stages))
        if not any(s.agc for s in stages) and not any("agc" in t for t in raw_stages):
            stages = (dataclasses.replace(stages[0], agc=True),) + stages[1:]
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
        with open(p, "rb") as fh:
            raw = tomllib.load(fh)
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
        with open(path, "rb") as fh:
            raw = tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ParameterError(f"{path}: not valid TOML ({exc})") from None
    except UnicodeDecodeError:
        raise ParameterError(f"{path}: not a TOML text file (not UTF-8)") from None
    except OSError as exc:
        raise ParameterError(f"--chain {shown}: {exc.strerror}") from None
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
        for key, (fname, _kind) in keys.items():
            out[key] = getattr(obj, fname)
        return out

    return {
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
    }


def _stage_to_dict(stage: IfStageSpec, keys: dict) -> dict:
    """A stage's TOML keys, leaving out unset ones and the order tuned circuits do not accept."""
    out = {k: v for k, v in keys.items() if v is not None}
    if stage.response in ("single_tuned", "double_tuned"):
        out.pop("order", None)
    return out
