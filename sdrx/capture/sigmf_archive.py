"""SigMF archives: a ``.sigmf`` file, a tar holding a recording's metadata and data, read in place.

The SigMF specification (1.x, "SigMF Archive Format") packs a recording as an
uncompressed POSIX tar whose members are ``<name>/<name>.sigmf-meta`` and
``<name>/<name>.sigmf-data``. A tar stores a regular member's bytes
contiguously after its 512-byte header, so the samples are read straight from
the archive at the member's offset (one seek and one read per block, as for
a plain ``.sigmf-data`` file): nothing is extracted and memory stays flat.
"""

from __future__ import annotations

import json
import tarfile
from pathlib import Path, PurePosixPath

from ..errors import CaptureError
from .meta import CaptureInfo
from .raw import BinaryReader
from .sigmf import _check_extent, meta_fields

__all__ = ["ARCHIVE_SUFFIX", "is_sigmf_archive", "open_sigmf_archive"]

ARCHIVE_SUFFIX = ".sigmf"
_MAX_META_BYTES = 64 << 20   # a metadata member larger than this is not read into memory


def is_sigmf_archive(path) -> bool:
    """True when a path names a SigMF archive (``.sigmf``)."""
    return Path(path).name.lower().endswith(ARCHIVE_SUFFIX)


def open_sigmf_archive(path, *, center_hz=None) -> BinaryReader:
    """Reader of the recording in a SigMF archive, streaming from its data member.

    Parameters
    ----------
    path : str or Path
        The ``.sigmf`` file.
    center_hz : float or None
        As in :func:`sdrx.capture.sigmf.open_sigmf`.

    Returns
    -------
    BinaryReader
        ``info.path`` and ``info.data_path`` are the archive.

    Raises
    ------
    CaptureError
        Missing file; not an uncompressed tar; no recording, or more than one;
        a member that is not a regular file; metadata as in ``open_sigmf``.

    Examples
    --------
    >>> import tempfile, tarfile, io, json, numpy as np
    >>> d = Path(tempfile.mkdtemp())
    >>> meta = {"global": {"core:datatype": "ri16_le", "core:sample_rate": 8000, "core:version": "1.0.0"},
    ...         "captures": [{"core:sample_start": 0}], "annotations": []}
    >>> with tarfile.open(d / "rec.sigmf", "w", format=tarfile.PAX_FORMAT) as t:
    ...     for name, data in (("rec/rec.sigmf-meta", json.dumps(meta).encode()),
    ...                        ("rec/rec.sigmf-data", np.array([16384, -8192], "<i2").tobytes())):
    ...         ti = tarfile.TarInfo(name); ti.size = len(data); t.addfile(ti, io.BytesIO(data))
    >>> open_sigmf_archive(d / "rec.sigmf").read().tolist()
    [0.5, -0.25]
    """
    p = Path(path)
    if not p.exists():
        raise CaptureError(f"{p}: no such file")
    if p.is_dir():
        raise CaptureError(f"{p}: is a folder, expected a SigMF archive (.sigmf, a tar file)")
    try:
        with tarfile.open(p, mode="r:") as tar:
            members = tar.getmembers()
            meta_member = _only_meta(p, members)
            doc = _read_meta(p, tar, meta_member)
            data_member = _data_member(p, members, meta_member, doc)
    except tarfile.ReadError:
        raise CaptureError(f"{p}: not a SigMF archive (an uncompressed tar holding .sigmf-meta and "
                           ".sigmf-data); a compressed archive must be unpacked first") from None
    label = f"{p}:{meta_member.name}"
    dt, fs, center, header = meta_fields(doc, label, center_hz)
    payload = data_member.size - header
    if payload < 0 or payload % dt.sample_bytes:
        raise CaptureError(f"{p}:{data_member.name}: {data_member.size} bytes is not a whole number of {dt.name} "
                           f"samples ({dt.sample_bytes} bytes each) after a {header}-byte header")
    _check_extent(doc, payload // dt.sample_bytes, label, p)
    info = CaptureInfo(path=p, data_path=p, fs=fs, center_hz=center, kind=dt.kind, datatype=dt.name,
                       samples=payload // dt.sample_bytes)
    return BinaryReader(info, dt, data_member.offset_data + header)


def _only_meta(p: Path, members) -> tarfile.TarInfo:
    metas = [m for m in members if m.name.lower().endswith(".sigmf-meta")]
    if not metas:
        raise CaptureError(f"{p}: the archive holds no .sigmf-meta member")
    if len(metas) > 1:
        names = ", ".join(m.name for m in metas[:3]) + (", ..." if len(metas) > 3 else "")
        raise CaptureError(f"{p}: the archive holds {len(metas)} recordings ({names}); sdrx reads one per archive")
    if not metas[0].isreg():
        raise CaptureError(f"{p}:{metas[0].name}: is not a regular file in the archive")
    return metas[0]


def _read_meta(p: Path, tar, member) -> dict:
    if member.size > _MAX_META_BYTES:
        raise CaptureError(f"{p}:{member.name}: metadata of {member.size} bytes is larger than "
                           f"{_MAX_META_BYTES >> 20} MiB")
    raw = tar.extractfile(member).read()
    try:
        doc = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise CaptureError(f"{p}:{member.name}: SigMF metadata is not UTF-8 JSON text") from None
    except json.JSONDecodeError as exc:
        raise CaptureError(f"{p}:{member.name}: SigMF metadata is not valid JSON ({exc.msg} at line "
                           f"{exc.lineno} column {exc.colno})") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("global"), dict):
        raise CaptureError(f"{p}:{member.name}: SigMF metadata lacks its 'global' object")
    return doc


def _data_member(p: Path, members, meta_member, doc) -> tarfile.TarInfo:
    meta_name = PurePosixPath(meta_member.name)
    dataset = doc["global"].get("core:dataset")
    if dataset is not None:
        wanted = str(meta_name.with_name(str(dataset)))
    else:
        wanted = str(meta_name.with_name(meta_name.name[: -len(".sigmf-meta")] + ".sigmf-data"))
    for m in members:
        if m.name == wanted:
            if not m.isreg() or m.sparse is not None:
                raise CaptureError(f"{p}:{m.name}: is not a plain regular file in the archive")
            return m
    raise CaptureError(f"{p}: the archive holds {meta_member.name} but not its data member {wanted}")
