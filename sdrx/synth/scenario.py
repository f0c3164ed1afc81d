"""Scenario files: TOML -> validated, frozen description of a test capture.

A scenario names the capture (``[capture]``), any number of stations
(``[[station]]``, each with a ``[station.program]`` and optionally a
``[station.fading]``) and optionally ``[impulse_noise]``. Every error is one
line naming the file, the station and the key.

Example
-------
::

    title = "two stations"
    [capture]
    kind = "iq"                 # "iq" (complex baseband about center) | "real" (0 .. rate/2)
    rate = "1.6M"               # sample rate
    center = "1M"               # iq only
    datatype = "ci16_le"        # SigMF name
    seconds = 1.0
    noise_dbfs_per_hz = -125    # noise floor density (see sdrx.synth.noise.noise_power); absent = none
    seed = 1

    [[station]]
    name = "Harbour Light"
    frequency = "600k"
    level_dbfs = -30            # carrier level: 20·log10(carrier amplitude)
    depth = 0.3                 # modulation depth m, 0..1 (peak)
    frequency_error = "+12"     # Hz, added to frequency
    [station.program]
    kind = "tone"
    frequency = "1k"
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass
from pathlib import Path

from ..errors import CaptureError, ParameterError
from ..tomlfile import read_toml
from ..units import format_frequency, parse_seconds
from ._keys import check_keys, get_choice, get_db, get_frequency, get_int, get_number, get_seconds
from .fading import FadingSpec, parse_fading
from .frontend import FrontEndSpec, parse_front_end
from .noise import ImpulseSpec, parse_impulse_noise
from .program import ProgramSpec, parse_program

__all__ = ["CaptureSpec", "StationSpec", "CarrierSpec", "Scenario", "load_scenario", "parse_scenario", "DATATYPES"]

DATATYPES = {
    "iq": ("ci16_le", "cf32_le", "ci8", "cu8"),
    "real": ("ri16_le", "rf32_le", "ri8", "ru8"),
}
_TOP_KEYS = ("title", "capture", "station", "carrier", "impulse_noise", "front_end")
_CARRIER_KEYS = ("name", "frequency", "level_dbfs", "phase_deg")
_CAPTURE_KEYS = ("kind", "rate", "center", "datatype", "seconds", "noise_dbfs_per_hz", "seed")
_STATION_KEYS = ("name", "frequency", "level_dbfs", "depth", "frequency_error", "phase_deg", "program", "fading")
MAX_SECONDS = 24 * 3600.0


@dataclass(frozen=True)
class CaptureSpec:
    """The capture a scenario produces.

    Attributes
    ----------
    kind : str
        ``"iq"`` or ``"real"``.
    fs : float
        Sample rate, Hz.
    center_hz : float or None
        Centre frequency (iq); None for real captures.
    datatype : str
        SigMF datatype name.
    seconds : float
        Duration.
    noise_dbfs_per_hz : float or None
        Noise floor density; None for no added noise.
    seed : int
        Root seed.
    """

    kind: str
    fs: float
    center_hz: float | None
    datatype: str
    seconds: float
    noise_dbfs_per_hz: float | None
    seed: int

    @property
    def samples(self) -> int:
        """Number of samples, round(seconds·fs)."""
        return int(round(self.seconds * self.fs))

    @property
    def band_hz(self) -> tuple:
        """(lo, hi) RF band held by the capture, Hz."""
        if self.kind == "real":
            return (0.0, self.fs / 2.0)
        return (self.center_hz - self.fs / 2.0, self.center_hz + self.fs / 2.0)


@dataclass(frozen=True)
class StationSpec:
    """One AM station.

    Attributes
    ----------
    name : str
    frequency_hz : float
        Nominal carrier frequency.
    level_dbfs : float
        Carrier level, 20·log10(A).
    depth : float
        Modulation depth m (peak), 0..1.
    frequency_error_hz : float
        Offset of the real carrier from ``frequency_hz``.
    phase_deg : float or None
        Carrier phase at t = 0; None: drawn from the station's seed.
    program : ProgramSpec
    fading : FadingSpec or None
    """

    name: str
    frequency_hz: float
    level_dbfs: float
    depth: float
    frequency_error_hz: float
    phase_deg: float | None
    program: ProgramSpec
    fading: FadingSpec | None

    @property
    def rf_hz(self) -> float:
        """Actual carrier frequency: nominal + error."""
        return self.frequency_hz + self.frequency_error_hz

    @property
    def occupied_hz(self) -> tuple:
        """(lo, hi) RF band the station occupies: carrier ± (audio bandwidth + fading rate)."""
        half = self.program.bandwidth_hz + (self.fading.rate_hz if self.fading else 0.0)
        return (self.rf_hz - half, self.rf_hz + half)

    @property
    def name_key(self) -> int:
        """Integer derived from the name, used in the station's seed (order of stations does not matter)."""
        return int.from_bytes(hashlib.sha256(self.name.encode("utf-8")).digest()[:8], "little")


@dataclass(frozen=True)
class CarrierSpec:
    """An unmodulated carrier (a heterodyne source, a beacon, a station's bare carrier).

    Attributes
    ----------
    name : str
    frequency_hz : float
        RF frequency (anywhere in the band, on the channel grid or off it).
    level_dbfs : float
        20·log10 of its amplitude.
    phase_deg : float or None
        Phase at t = 0; None: drawn from the seed and the name.
    """

    name: str
    frequency_hz: float
    level_dbfs: float
    phase_deg: float | None

    @property
    def name_key(self) -> int:
        """Integer derived from the name (for its seed)."""
        return int.from_bytes(hashlib.sha256(("carrier:" + self.name).encode("utf-8")).digest()[:8], "little")


@dataclass(frozen=True)
class Scenario:
    """A validated scenario.

    Attributes
    ----------
    path : Path or None
        The TOML file it came from.
    title : str
    capture : CaptureSpec
    stations : tuple of StationSpec
    impulse_noise : ImpulseSpec or None
    carriers : tuple of CarrierSpec
        Unmodulated carriers (``[[carrier]]``).
    front_end : FrontEndSpec or None
        Faults of the recorder (``[front_end]``).
    """

    path: Path | None
    title: str
    capture: CaptureSpec
    stations: tuple
    impulse_noise: ImpulseSpec | None
    carriers: tuple = ()
    front_end: FrontEndSpec | None = None

    def with_overrides(self, *, seconds=None, seed=None) -> "Scenario":
        """The same scenario with another duration and/or seed (``--seconds``, ``--seed``)."""
        cap = self.capture
        if seconds is not None:
            s = parse_seconds(seconds, "--seconds", allow_zero=False)
            _check_samples(s, cap.fs, "--seconds")
            cap = dataclasses.replace(cap, seconds=s)
        if seed is not None:
            if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
                raise ParameterError(f"--seed: must be a whole number >= 0, got {seed!r}")
            cap = dataclasses.replace(cap, seed=int(seed))
        return dataclasses.replace(self, capture=cap)


def load_scenario(path) -> Scenario:
    """Read and validate a scenario TOML file.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    Scenario

    Raises
    ------
    CaptureError
        The file is missing or unreadable.
    ParameterError
        Not TOML, unknown key (with the nearest known one), bad value, a
        station outside the capture's band, a modulation depth above 1 ...

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "s.toml"
    >>> _ = p.write_text('[capture]\\nkind = "real"\\nrate = "200k"\\nseconds = 0.1\\n'
    ...                  '[[station]]\\nname = "A"\\nfrequency = "50k"\\nlevel_dbfs = -20\\ndepth = 0.5\\n')
    >>> sc = load_scenario(p)
    >>> sc.stations[0].program.to_json()
    {'kind': 'tone', 'frequency': 1000.0}
    """
    p = Path(path)
    if not p.exists():
        raise CaptureError(f"{p}: scenario file not found")
    if p.is_dir():
        raise CaptureError(f"{p}: is a folder, expected a scenario TOML file")
    data = read_toml(p)
    return parse_scenario(data, name=str(p), base_dir=p.parent, path=p)


def _check_samples(seconds, fs, where):
    if seconds > MAX_SECONDS:
        raise ParameterError(f"{where}: {seconds:g} s is longer than {MAX_SECONDS:g} s")
    if int(round(seconds * fs)) < 1:
        raise ParameterError(f"{where}: {seconds:g} s holds no sample at {format_frequency(fs)}")


def parse_scenario(data: dict, *, name: str = "scenario", base_dir=None, path=None) -> Scenario:
    """Validate a scenario already read from TOML (a dict). See :func:`load_scenario`."""
    check_keys(data, _TOP_KEYS, name)
    title = data.get("title", "")
    if not isinstance(title, str):
        raise ParameterError(f"{name}: title must be a string, got {title!r}")
    if "capture" not in data:
        raise ParameterError(f"{name}: missing [capture] table")
    capture = _parse_capture(data["capture"], f"{name}: [capture]")
    stations_raw = data.get("station", [])
    if isinstance(stations_raw, dict) or not isinstance(stations_raw, list):
        raise ParameterError(f"{name}: station must be an array of tables ([[station]]), got {type(stations_raw).__name__}")
    if not stations_raw:
        raise ParameterError(f"{name}: no [[station]] given (at least one is needed)")
    stations = []
    seen = set()
    for i, table in enumerate(stations_raw, start=1):
        label = table.get("name") if isinstance(table, dict) else None
        where = f"{name}: station {label!r}" if isinstance(label, str) and label else f"{name}: station #{i}"
        st = _parse_station(table, where, i, capture, base_dir)
        if st.name in seen:
            raise ParameterError(f"{where}: name {st.name!r} is used by another station (names must differ)")
        seen.add(st.name)
        stations.append(st)
    carriers = _parse_carriers(data.get("carrier", []), name, capture, seen)
    impulse = None
    if "impulse_noise" in data:
        impulse = parse_impulse_noise(data["impulse_noise"], f"{name}: [impulse_noise]")
    front_end = None
    if "front_end" in data:
        front_end = parse_front_end(data["front_end"], f"{name}: [front_end]", capture.kind)
    return Scenario(Path(path) if path is not None else None, title, capture, tuple(stations), impulse,
                    carriers, front_end)


def _parse_carriers(raw, name, capture: CaptureSpec, seen: set) -> tuple:
    if isinstance(raw, dict) or not isinstance(raw, list):
        raise ParameterError(f"{name}: carrier must be an array of tables ([[carrier]]), got {type(raw).__name__}")
    out = []
    for i, table in enumerate(raw, start=1):
        label = table.get("name") if isinstance(table, dict) else None
        where = f"{name}: carrier {label!r}" if isinstance(label, str) and label else f"{name}: carrier #{i}"
        if not isinstance(table, dict):
            raise ParameterError(f"{where}: must be a table, got {type(table).__name__}")
        check_keys(table, _CARRIER_KEYS, where)
        cname = table.get("name", f"carrier {i}")
        if not isinstance(cname, str) or not cname.strip():
            raise ParameterError(f"{where}: name must be a non-empty string, got {cname!r}")
        if cname in seen:
            raise ParameterError(f"{where}: name {cname!r} is used by another station or carrier (names must differ)")
        seen.add(cname)
        freq = get_frequency(table, "frequency", where, positive=True)
        level = get_db(table, "level_dbfs", where)
        if level > 0.0:
            raise ParameterError(f"{where}: level_dbfs = {table['level_dbfs']!r} is above full scale (allowed: <= 0 dBFS)")
        phase = get_number(table, "phase_deg", where, None) if "phase_deg" in table else None
        lo, hi = capture.band_hz
        if not lo < freq < hi:
            raise ParameterError(f"{where}: frequency {format_frequency(freq)} is outside the capture band "
                                 f"{format_frequency(lo)} .. {format_frequency(hi)}")
        out.append(CarrierSpec(cname, freq, level, phase))
    return tuple(out)


def _parse_capture(table, where) -> CaptureSpec:
    check_keys(table, _CAPTURE_KEYS, where)
    kind = get_choice(table, "kind", where, ("iq", "real"))
    fs = get_frequency(table, "rate", where, positive=True)
    if kind == "iq":
        if "center" not in table:
            raise ParameterError(f"{where}: an iq capture needs 'center' (its centre frequency, e.g. \"1M\")")
        center = get_frequency(table, "center", where)
        if center - fs / 2.0 < 0:
            raise ParameterError(
                f"{where}: center {format_frequency(center)} with rate {format_frequency(fs)} reaches below 0 Hz")
    else:
        if "center" in table:
            raise ParameterError(f"{where}: 'center' applies only to kind = \"iq\" (real samples hold 0 .. rate/2)")
        center = None
    datatype = get_choice(table, "datatype", where, DATATYPES[kind], DATATYPES[kind][0])
    seconds = get_seconds(table, "seconds", where, allow_zero=False)
    _check_samples(seconds, fs, f"{where}: seconds")
    noise = None
    if "noise_dbfs_per_hz" in table:
        value = table["noise_dbfs_per_hz"]
        if isinstance(value, str):  # accept "-125", "-125 dBFS", "-125 dBFS/Hz"
            value = value.strip()
            value = value[:-3] if value.lower().endswith("/hz") else value
        noise = get_db({"noise_dbfs_per_hz": value}, "noise_dbfs_per_hz", where)
    if noise is not None and noise > -30.0:
        raise ParameterError(f"{where}: noise_dbfs_per_hz = {table['noise_dbfs_per_hz']!r} is above -30 dBFS/Hz")
    seed = get_int(table, "seed", where, 0, lo=0)
    return CaptureSpec(kind, fs, center, datatype, seconds, noise, seed)


def _parse_station(table, where, index, capture: CaptureSpec, base_dir) -> StationSpec:
    check_keys(table, _STATION_KEYS, where)
    name = table.get("name", f"station {index}")
    if not isinstance(name, str) or not name.strip():
        raise ParameterError(f"{where}: name must be a non-empty string, got {name!r}")
    freq = get_frequency(table, "frequency", where, positive=True)
    level = get_db(table, "level_dbfs", where)
    if level > 0.0:
        raise ParameterError(f"{where}: level_dbfs = {table['level_dbfs']!r} is above full scale (allowed: <= 0 dBFS)")
    depth = get_number(table, "depth", where, 0.3)  # 30 % modulation: common bench practice
    if not 0.0 <= depth <= 1.0:
        raise ParameterError(f"{where}: depth = {table['depth']!r} must be 0..1 (modulation depth m; above 1 is overmodulation)")
    ferr = get_frequency(table, "frequency_error", where, 0.0, allow_negative=True)
    phase = get_number(table, "phase_deg", where, None) if "phase_deg" in table else None
    program = parse_program(table.get("program", {"kind": "tone", "frequency": 1000.0}), f"{where}: program", base_dir)
    fading = parse_fading(table["fading"], f"{where}: fading") if "fading" in table else None
    st = StationSpec(name, freq, level, depth, ferr, phase, program, fading)
    lo, hi = capture.band_hz
    olo, ohi = st.occupied_hz
    if not (lo < olo and ohi < hi):
        raise ParameterError(
            f"{where}: occupies {format_frequency(olo)} .. {format_frequency(ohi)} (carrier {format_frequency(st.rf_hz)} "
            f"± {format_frequency(ohi - st.rf_hz)}), outside the capture band {format_frequency(lo)} .. {format_frequency(hi)}"
        )
    return st

