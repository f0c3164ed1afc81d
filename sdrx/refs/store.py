"""The reference store: a folder made by sdrx holding one float WAV per case and a manifest.

Layout::

    STORE/
      sdrx-refs.json     the manifest; its presence marks the folder as a store
      <case>.<hash>.wav  the reference audio of each case (WAV, 32-bit float); <hash> is
                         the first 12 hex digits of the file's SHA-256

The manifest is JSON (keys sorted, two-space indent, no NaN)::

    {"format": "sdrx-refs", "format_version": 1,
     "cases": {"<case>": {"case": {...}, "chain": {...}, "capture": {...},
                          "versions": {...}, "audio": {...}, "metrics": {...}}}}

- ``case``: the case as run (paths as written in the cases file, tolerance).
- ``chain``: ``{"name", "spec"}`` the resolved chain spec, defaults filled in.
- ``capture``: ``{"sha256", "meta_sha256", "info"}`` content hashes of the
  capture's data file and (SigMF) metadata file, and its metadata.
- ``versions``: ``{"sdrx", "numpy", "scipy", "python"}`` at recording time.
- ``audio``: ``{"file", "sha256", "fs", "channels", "samples"}`` of the reference WAV.
- ``metrics``: level (dBFS), the output's occupied bandwidth (Hz, 99 % of its
  power), the chain's audio bandwidth (Hz, :mod:`sdrx.analysis.audio_response`),
  octave band levels, SINAD (null without a single-tone truth sidecar).

Writes are atomic per case, one :class:`sdrx.fileset.OutputSet`: the new WAV
is written under a temporary name and renamed to its content-addressed name
(so it never replaces the WAV the manifest still points at), then the whole
manifest is renamed into place, and only then is the case's previous WAV
removed. An interruption at any point leaves a manifest that is whole and
points at WAVs that exist and match it (a commit interrupted between the
renames is finished by the next record into the store). A reader checks each WAV against the size and SHA-256
in the manifest, so a truncated or corrupted reference is found before any
comparison.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
from pathlib import Path
from typing import Optional

from ..errors import CaptureError, OutputError, ParameterError
from ..fileio import check_free_space
from ..fileset import OutputSet, clean_folder, is_own_temporary, recover

__all__ = [
    "MANIFEST_NAME",
    "FORMAT",
    "FORMAT_VERSION",
    "REQUIRED_FIELDS",
    "Store",
    "file_sha256",
    "versions",
    "clean_json",
]

MANIFEST_NAME = "sdrx-refs.json"
FORMAT = "sdrx-refs"
FORMAT_VERSION = 1

#: entry field -> keys each must hold
REQUIRED_FIELDS = {
    "case": ("name", "capture", "tune_hz", "chain", "start_s", "duration_s", "path", "tolerance"),
    "chain": ("name", "spec"),
    "capture": ("sha256", "meta_sha256", "info"),
    "versions": ("sdrx", "numpy", "scipy"),
    "audio": ("file", "sha256", "fs", "channels", "samples", "bytes"),
    "metrics": ("level_dbfs", "sinad_db"),
}


def file_sha256(path, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file's bytes, read in chunks (bounded memory).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "x"; _ = p.write_bytes(b"abc")
    >>> file_sha256(p)[:16]
    'ba7816bf8f01cfea'
    """
    h = hashlib.sha256()
    with open(path, "rb") as f:
        while True:
            b = f.read(chunk)
            if not b:
                break
            h.update(b)
    return h.hexdigest()


def versions() -> dict:
    """Versions that can change an output: sdrx, numpy, scipy, Python."""
    import platform

    import numpy
    import scipy

    from .. import __version__

    return {"sdrx": __version__, "numpy": numpy.__version__, "scipy": scipy.__version__,
            "python": platform.python_version()}


def clean_json(obj):
    """Make an object JSON-safe: tuples to lists, Paths to str, non-finite floats to None.

    Examples
    --------
    >>> clean_json({"a": (1.0, float("inf")), "b": None})
    {'a': [1.0, None], 'b': None}
    """
    if isinstance(obj, dict):
        return {str(k): clean_json(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [clean_json(v) for v in obj]
    if isinstance(obj, Path):
        return str(obj)
    if isinstance(obj, bool) or obj is None or isinstance(obj, (str, int)):
        return obj
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    try:
        import numpy as np

        if isinstance(obj, np.generic):
            return clean_json(obj.item())
        if isinstance(obj, np.ndarray):
            return clean_json(obj.tolist())
    except ImportError:  # pragma: no cover
        pass
    if hasattr(obj, "to_json"):
        return clean_json(obj.to_json())
    return str(obj)


def _dump(manifest: dict) -> str:
    return json.dumps(clean_json(manifest), indent=2, sort_keys=True, allow_nan=False, ensure_ascii=False) + "\n"


class Store:
    """A reference store folder.

    Use :meth:`open` to read an existing store (verify) and :meth:`for_record`
    to record into a new or existing one. Nothing is written until
    :meth:`write_case`.

    Parameters
    ----------
    path : Path
        The store folder.
    manifest : dict
        The loaded manifest (or a fresh empty one).
    exists : bool
        Whether the manifest file exists on disk.
    """

    def __init__(self, path: Path, manifest: dict, exists: bool):
        self.path = Path(path)
        self.manifest = manifest
        self.exists = exists

    # -- opening ---------------------------------------------------------
    @property
    def manifest_path(self) -> Path:
        """The manifest file."""
        return self.path / MANIFEST_NAME

    @classmethod
    def _read_manifest(cls, path: Path) -> dict:
        mp = path / MANIFEST_NAME
        try:
            text = mp.read_text(encoding="utf-8")
            data = json.loads(text)
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise ParameterError(f"--store {path}: manifest {mp} is not valid JSON ({exc}); "
                                 "re-record the store with sdrx refs record --update") from None
        if not isinstance(data, dict) or data.get("format") != FORMAT:
            raise ParameterError(f"--store {path}: {mp} is not an sdrx reference manifest "
                                 f"(expected \"format\": \"{FORMAT}\")")
        if data.get("format_version") != FORMAT_VERSION:
            raise ParameterError(f"--store {path}: manifest format_version {data.get('format_version')!r} "
                                 f"is not supported; expected {FORMAT_VERSION}")
        if not isinstance(data.get("cases"), dict):
            raise ParameterError(f"--store {path}: manifest {mp} is missing field 'cases'")
        return data

    @classmethod
    def open(cls, path) -> "Store":
        """Open an existing store for reading.

        Raises
        ------
        ParameterError
            If the folder does not exist, is not a folder, or holds no sdrx
            manifest (it was not made by ``sdrx refs record``).
        """
        p = Path(path)
        if not p.exists():
            raise ParameterError(f"--store {p}: no such folder; record references into it first with sdrx refs record")
        if not p.is_dir():
            raise ParameterError(f"--store {p}: is not a folder")
        if not (p / MANIFEST_NAME).is_file():
            raise ParameterError(f"--store {p}: not an sdrx reference store (no {MANIFEST_NAME}); "
                                 "make one with sdrx refs record")
        return cls(p, cls._read_manifest(p), True)

    @classmethod
    def for_record(cls, path) -> "Store":
        """Open a store to record into: an existing store, an empty folder, or a new folder.

        Raises
        ------
        ParameterError
            If the path is a file, or a folder with other files in it but no
            sdrx manifest (recording there would mix references with
            unrelated files), or its parent folder does not exist.
        """
        p = Path(path)
        if p.exists() and not p.is_dir():
            raise ParameterError(f"--store {p}: is a file, expected a folder")
        if p.is_dir():
            recover(p / MANIFEST_NAME)    # finish a record that was killed between its renames
            clean_folder(p)               # and remove what records killed earlier left
            if (p / MANIFEST_NAME).is_file():
                return cls(p, cls._read_manifest(p), True)
            if any(not is_own_temporary(q.name) for q in p.iterdir()):
                raise ParameterError(f"--store {p}: folder is not empty and is not an sdrx reference store "
                                     f"(no {MANIFEST_NAME}); choose an empty or new folder")
        else:
            parent = p.parent if str(p.parent) else Path(".")
            if not parent.is_dir():
                raise ParameterError(f"--store {p}: parent folder {parent} does not exist")
        return cls(p, {"format": FORMAT, "format_version": FORMAT_VERSION, "cases": {}}, False)

    # -- reading ---------------------------------------------------------
    def names(self) -> list:
        """Names of the cases held, sorted."""
        return sorted(self.manifest["cases"])

    def has(self, name: str) -> bool:
        """Whether a reference for ``name`` is recorded."""
        return name in self.manifest["cases"]

    def entry(self, name: str) -> dict:
        """The validated manifest entry of a case.

        Raises
        ------
        ParameterError
            If the case has no reference here, or its entry misses a field.
        """
        if name not in self.manifest["cases"]:
            raise ParameterError(f"--store {self.path}: no reference for case {name!r}; "
                                 f"record it with sdrx refs record --case {name}")
        e = self.manifest["cases"][name]
        where = f"manifest {self.manifest_path}: case {name!r}"
        if not isinstance(e, dict):
            raise ParameterError(f"{where}: entry is not a JSON object")
        for key, subkeys in REQUIRED_FIELDS.items():
            if key not in e:
                raise ParameterError(f"{where}: missing field {key!r}; re-record with sdrx refs record --update")
            if not isinstance(e[key], dict):
                raise ParameterError(f"{where}: field {key!r} is not a JSON object")
            for sk in subkeys:
                if sk not in e[key]:
                    raise ParameterError(f"{where}: missing field '{key}.{sk}'; re-record with sdrx refs record --update")
        return e

    def audio_path(self, name: str) -> Path:
        """Path of a case's reference WAV, checked to lie inside the store folder.

        Raises
        ------
        ParameterError
            If the manifest names a file outside the store (``../`` or absolute).
        """
        e = self.entry(name)
        rel = e["audio"]["file"]
        where = f"manifest {self.manifest_path}: case {name!r}"
        if not isinstance(rel, str) or not rel:
            raise ParameterError(f"{where}: audio.file {rel!r} is not a file name")
        return self.inside(rel, where)

    def inside(self, rel: str, where: str) -> Path:
        """Resolve ``rel`` against the store folder, refusing paths that escape it."""
        root = self.path.resolve()
        target = (self.path / rel).resolve()
        if Path(rel).is_absolute() or ".." in Path(rel).parts or root not in target.parents:
            raise ParameterError(f"{where}: path {rel!r} escapes the store folder {self.path}")
        return self.path / rel

    def check_audio(self, name: str) -> Path:
        """Check a reference WAV against the manifest (size, SHA-256, header).

        Returns
        -------
        Path
            The WAV path.

        Raises
        ------
        CaptureError
            If the file is missing, truncated, corrupted, or its header does not
            match the manifest.
        """
        import soundfile as sf

        p = self.audio_path(name)
        a = self.entry(name)["audio"]
        if not p.is_file():
            raise CaptureError(f"reference {p}: no such file (case {name!r}); re-record with sdrx refs record --update")
        size = p.stat().st_size
        if size != a["bytes"]:
            raise CaptureError(f"reference {p}: {size} bytes, manifest says {a['bytes']} (truncated or replaced); "
                               "re-record with sdrx refs record --update")
        if file_sha256(p) != a["sha256"]:
            raise CaptureError(f"reference {p}: content does not match its SHA-256 in the manifest (corrupted); "
                               "re-record with sdrx refs record --update")
        try:
            info = sf.info(str(p))
        except (RuntimeError, sf.LibsndfileError) as exc:
            raise CaptureError(f"reference {p}: not a readable WAV file ({exc})") from None
        if info.frames != a["samples"] or float(info.samplerate) != float(a["fs"]) or info.channels != a["channels"]:
            raise CaptureError(f"reference {p}: header says {info.frames} samples at {info.samplerate} Hz, "
                               f"{info.channels} channel(s); manifest says {a['samples']} at {a['fs']} Hz, "
                               f"{a['channels']}")
        return p

    # -- writing ---------------------------------------------------------
    def write_case(self, name: str, entry: dict, audio_src) -> Path:
        """Store a case: its WAV in atomically under a content-addressed name, then the manifest.

        Parameters
        ----------
        name : str
            Case name (already checked to be a safe file name).
        entry : dict
            Manifest entry; its ``audio`` field is filled in here.
        audio_src : Path
            The WAV to store (left in place).

        Returns
        -------
        Path
            The stored WAV.
        """
        import soundfile as sf

        if not self.path.is_dir():
            try:
                self.path.mkdir()
            except OSError as exc:
                raise OutputError(f"--store {self.path}: cannot create folder ({exc.strerror})") from None
        digest = file_sha256(audio_src)
        rel = f"{name}.{digest[:12]}.wav"
        dest = self.inside(rel, f"case {name!r}")
        check_free_space(dest, os.path.getsize(audio_src), option="--store")
        # one set: the WAV under its content-addressed name (it never replaces a WAV the manifest
        # still names), the manifest renamed last, then the case's previous WAV retired
        with OutputSet(self.manifest_path, option="--store") as outputs:
            if dest.is_file() and file_sha256(dest) == digest:
                stored = dest                     # the same audio is stored already
            else:
                stored = outputs.add(dest)
                shutil.copyfile(audio_src, stored)
                if file_sha256(stored) != digest:
                    raise OutputError(f"--store {self.path}: copy of {audio_src} does not match its source")
            info = sf.info(str(stored))
            audio = {"file": rel, "sha256": digest, "bytes": os.path.getsize(stored),
                     "fs": float(info.samplerate), "channels": info.channels, "samples": info.frames,
                     "subtype": info.subtype}
            entry = dict(entry)
            entry["audio"] = audio
            # re-read the manifest so a concurrent record of another case is not lost
            current = self._read_manifest(self.path) if self.manifest_path.is_file() else self.manifest
            old = current["cases"].get(name)
            current["cases"][name] = entry
            outputs.add(self.manifest_path).write_text(_dump(current), encoding="utf-8")
            old_file = old.get("audio", {}).get("file") if isinstance(old, dict) else None
            still_used = {e.get("audio", {}).get("file") for e in current["cases"].values() if isinstance(e, dict)}
            if isinstance(old_file, str) and old_file not in still_used:
                try:
                    stale = self.inside(old_file, f"case {name!r}")
                except ParameterError:
                    stale = None                # never delete outside the store
                if stale is not None and stale.is_file():
                    outputs.retire(stale)
        self.manifest = current
        self.exists = True
        return dest
