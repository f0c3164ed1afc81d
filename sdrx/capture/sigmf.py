"""SigMF recordings: a ``.sigmf-meta`` JSON file beside a ``.sigmf-data`` sample file.

Read: ``global.core:datatype``, ``global.core:sample_rate``,
``captures[0].core:frequency`` (the centre of an I/Q recording) and
``captures[0].core:header_bytes`` (bytes to skip). Write: the fields the SigMF
1.0.0 specification requires (``global`` with ``core:datatype`` and
``core:version``; ``captures`` whose segments have ``core:sample_start``;
``annotations``), plus sample rate, frequency, description, recorder and a
SHA-512 of the data.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

from ..errors import CaptureError, ParameterError
from ..limits import MAX_CAPTURE_RATE_HZ, MIN_CAPTURE_RATE_HZ
from ..units import format_frequency
from .datatypes import parse_datatype
from .meta import CaptureInfo
from .raw import BinaryReader, binary_sample_count

__all__ = ["SIGMF_VERSION", "sigmf_pair", "is_sigmf_path", "open_sigmf", "meta_fields", "build_meta"]

SIGMF_VERSION = "1.0.0"
META_SUFFIX = ".sigmf-meta"
#: largest metadata file read (annotations of a long recording stay far below this)
MAX_META_BYTES = 64 << 20
DATA_SUFFIX = ".sigmf-data"


def is_sigmf_path(path) -> bool:
    """True when a path names either file of a SigMF pair."""
    name = Path(path).name.lower()
    return name.endswith(META_SUFFIX) or name.endswith(DATA_SUFFIX)


def sigmf_pair(path) -> tuple:
    """(meta path, data path) of the recording one of whose files is named.

    Examples
    --------
    >>> [p.name for p in sigmf_pair("rec/coast.sigmf-data")]
    ['coast.sigmf-meta', 'coast.sigmf-data']
    """
    p = Path(path)
    stem = p.name[: -len(META_SUFFIX)]  # both suffixes have the same length
    return p.with_name(stem + META_SUFFIX), p.with_name(stem + DATA_SUFFIX)


def _number(value, key: str, meta_path: Path) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise CaptureError(f"{meta_path}: {key} must be a number, got {str(value)[:40]!r}")
    try:
        x = float(value)
    except OverflowError:
        raise CaptureError(f"{meta_path}: {key} = {str(value)[:16]}... is beyond the range of numbers") from None
    if not math.isfinite(x):
        raise CaptureError(f"{meta_path}: {key} must be a finite number, got {value!r}")
    return x


def _dataset(glob: dict, meta_path: Path) -> Path:
    """The data file named by ``core:dataset``: a plain file name beside the metadata."""
    name = glob["core:dataset"]
    if not isinstance(name, str) or not name or name in (".", "..") or "/" in name or "\\" in name \
            or "\0" in name:
        raise CaptureError(f"{meta_path}: core:dataset {str(name)[:60]!r} must be a plain file name beside the "
                           "metadata (no folders)")
    return meta_path.with_name(name)


def _check_extent(doc: dict, n: int, meta_path: Path, data_path: Path) -> None:
    """Capture segments and annotations must lie inside the data: else the data was cut short."""
    for where, items, count_key in (("captures", doc.get("captures") or [], None),
                                    ("annotations", doc.get("annotations") or [], "core:sample_count")):
        if not isinstance(items, list):
            raise CaptureError(f"{meta_path}: {where} must be a list of objects")
        for i, item in enumerate(items):
            if not isinstance(item, dict):
                raise CaptureError(f"{meta_path}: {where}[{i}] must be an object")
            start = item.get("core:sample_start", 0)
            length = item.get(count_key, 0) if count_key else 0
            if isinstance(start, bool) or not isinstance(start, int) or start < 0 \
                    or isinstance(length, bool) or not isinstance(length, int) or length < 0:
                raise CaptureError(f"{meta_path}: {where}[{i}]: core:sample_start (and core:sample_count) must be "
                                   "whole numbers >= 0")
            end = start + length
            if start > n or end > n:
                raise CaptureError(f"{meta_path}: {where}[{i}] reaches sample {max(start, end)}, but {data_path.name} "
                                   f"holds {n} samples (cut short?)")


def _load(meta_path: Path) -> dict:
    try:
        if meta_path.stat().st_size > MAX_META_BYTES:
            raise CaptureError(f"{meta_path}: {meta_path.stat().st_size} bytes of metadata; at most "
                               f"{MAX_META_BYTES >> 20} MiB are read")
        text = meta_path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise CaptureError(f"{meta_path}: no such file (the metadata of a SigMF recording)") from None
    except UnicodeDecodeError:
        raise CaptureError(f"{meta_path}: SigMF metadata is not UTF-8 JSON text") from None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise CaptureError(
            f"{meta_path}: SigMF metadata is not valid JSON ({exc.msg.removesuffix(' at')} at line {exc.lineno} "
            f"column {exc.colno})"
        ) from None
    except RecursionError:
        raise CaptureError(f"{meta_path}: SigMF metadata is nested too deeply to read") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("global"), dict):
        raise CaptureError(f"{meta_path}: SigMF metadata lacks its 'global' object")
    return doc


def open_sigmf(path, *, center_hz=None) -> BinaryReader:
    """Reader of a SigMF recording; either file of the pair may be named.

    Parameters
    ----------
    path : str or Path
        The ``.sigmf-meta`` or the ``.sigmf-data`` file.
    center_hz : float or None
        Fills in a missing ``core:frequency`` of an I/Q recording; it may not
        contradict one that is present.

    Returns
    -------
    BinaryReader
        Its ``info.path`` is the ``.sigmf-meta`` file.

    Raises
    ------
    CaptureError
        Missing file; metadata not JSON; no or bad ``core:sample_rate`` or
        ``core:datatype``; more than one channel; I/Q without a centre; data
        size not a whole number of samples.
    """
    meta_path, data_path = sigmf_pair(path)
    doc = _load(meta_path)
    glob = doc["global"]
    if "core:dataset" in glob:
        data_path = _dataset(glob, meta_path)
    dt, fs, center, header = meta_fields(doc, meta_path, center_hz)
    n = binary_sample_count(data_path, dt, header)
    _check_extent(doc, n, meta_path, data_path)
    info = CaptureInfo(path=meta_path, data_path=data_path, fs=fs, center_hz=center, kind=dt.kind,
                       datatype=dt.name, samples=n)
    return BinaryReader(info, dt, header, sha512=_sha512(glob, meta_path), meta_path=meta_path)


def meta_fields(doc: dict, meta_path, center_hz=None) -> tuple:
    """Datatype, sample rate, centre and header bytes of a SigMF metadata document.

    Parameters
    ----------
    doc : dict
        The parsed metadata (with its ``global`` object).
    meta_path : Path or str
        Where it came from (for the messages).
    center_hz : float or None
        As in :func:`open_sigmf`.

    Returns
    -------
    (Datatype, float, float or None, int)

    Raises
    ------
    CaptureError, ParameterError
        As in :func:`open_sigmf`.
    """
    glob = doc["global"]
    if "core:datatype" not in glob:
        raise CaptureError(f"{meta_path}: global lacks core:datatype (the sample format, e.g. ci16_le)")
    try:
        dt = parse_datatype(glob["core:datatype"], f"{meta_path}: core:datatype")
    except ParameterError as exc:
        raise CaptureError(str(exc)) from None
    if "core:sample_rate" not in glob:
        raise CaptureError(f"{meta_path}: global lacks core:sample_rate (the sample rate in Hz)")
    fs = _number(glob["core:sample_rate"], "core:sample_rate", meta_path)
    if fs <= 0:
        raise CaptureError(f"{meta_path}: core:sample_rate must be positive, got {glob['core:sample_rate']!r}")
    if not MIN_CAPTURE_RATE_HZ <= fs <= MAX_CAPTURE_RATE_HZ:
        raise CaptureError(f"{meta_path}: core:sample_rate {fs:g} Hz is outside {format_frequency(MIN_CAPTURE_RATE_HZ)} "
                           f"to {format_frequency(MAX_CAPTURE_RATE_HZ)}")
    channels = glob.get("core:num_channels", 1)
    if channels != 1:
        raise CaptureError(f"{meta_path}: core:num_channels is {str(channels)[:20]}; sdrx reads single-channel "
                           "recordings")
    captures = doc.get("captures") or [{}]
    if not isinstance(captures, list) or not all(isinstance(c, dict) for c in captures):
        raise CaptureError(f"{meta_path}: captures must be a list of objects")
    first = captures[0]
    header = first.get("core:header_bytes", 0)
    if isinstance(header, bool) or not isinstance(header, int) or header < 0:
        raise CaptureError(f"{meta_path}: captures[0].core:header_bytes must be a whole number >= 0")
    if any(c.get("core:header_bytes") for c in captures[1:]):
        raise CaptureError(f"{meta_path}: header bytes inside later capture segments are not supported")
    freq = first.get("core:frequency")
    if freq is not None:
        freq = _number(freq, "captures[0].core:frequency", meta_path)
    if dt.is_complex:
        if freq is None:
            if center_hz is None:
                raise CaptureError(
                    f"{meta_path}: I/Q recording without captures[0].core:frequency; pass its centre with --center HZ"
                )
            freq = float(center_hz)
        elif center_hz is not None and abs(float(center_hz) - freq) > 1e-6 * max(1.0, abs(freq)):
            raise ParameterError(
                f"--center {center_hz:g}: contradicts core:frequency {freq:g} in {meta_path}"
            )
        center = freq
    else:
        if center_hz is not None:
            raise ParameterError(f"--center: applies to I/Q captures; {meta_path} holds real samples ({dt.name})")
        center = None
    return dt, fs, center, header


def _sha512(glob: dict, meta_path: Path):
    """The data file's SHA-512 from ``core:sha512`` (128 hex digits), or None when absent."""
    value = glob.get("core:sha512")
    if value is None:
        return None
    if not isinstance(value, str) or not re.fullmatch(r"[0-9a-fA-F]{128}", value):
        raise CaptureError(f"{meta_path}: core:sha512 {str(value)[:40]!r} is not a SHA-512 digest (128 hex digits)")
    return value.lower()


def build_meta(*, datatype: str, fs: float, center_hz=None, description=None, author=None,
               datetime=None, sha512=None, annotations=(), extra_global=None, recorder=None) -> dict:
    """The SigMF metadata document of a single-capture recording.

    Returns
    -------
    dict
        ``{"global": {...}, "captures": [{...}], "annotations": [...]}`` with
        keys in a fixed order (so the JSON text is deterministic).

    Notes
    -----
    SigMF 1.0.0: ``global`` requires ``core:datatype`` and ``core:version``;
    each capture segment requires ``core:sample_start``; annotations require
    ``core:sample_start`` and are sorted by it.

    Examples
    --------
    >>> m = build_meta(datatype="ci16_le", fs=2.4e6, center_hz=1.1e6)
    >>> m["global"]["core:version"], m["captures"][0]["core:frequency"]
    ('1.0.0', 1100000.0)
    """
    from .. import __version__

    glob = {"core:datatype": datatype, "core:version": SIGMF_VERSION, "core:sample_rate": float(fs),
            "core:num_channels": 1}
    if description is not None:
        glob["core:description"] = str(description)
    if author is not None:
        glob["core:author"] = str(author)
    glob["core:recorder"] = recorder if recorder is not None else f"sdrx {__version__}"
    if sha512 is not None:
        glob["core:sha512"] = sha512
    for key, value in (extra_global or {}).items():
        if key in glob:
            raise ParameterError(f"meta.global: key {key!r} is set by the writer")
        glob[key] = value
    cap = {"core:sample_start": 0}
    if center_hz is not None:
        cap["core:frequency"] = float(center_hz)
    if datetime is not None:
        cap["core:datetime"] = str(datetime)
    anns = []
    for i, a in enumerate(annotations):
        if not isinstance(a, dict) or "core:sample_start" not in a:
            raise ParameterError(f"meta.annotations[{i}]: each annotation needs core:sample_start")
        anns.append(dict(a))
    anns.sort(key=lambda a: a["core:sample_start"])
    return {"global": glob, "captures": [cap], "annotations": anns}
