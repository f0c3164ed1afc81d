"""Capture writers: SigMF recordings and WAV captures, streamed, atomic and deterministic."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np

from ..errors import OutputError, ParameterError
from ..fileio import check_output
from ..fileset import OutputSet
from ..units import parse_frequency, validate_fs
from .datatypes import parse_datatype
from .sigmf import build_meta, is_sigmf_path, sigmf_pair
from .wavio import AtomicFile, AtomicWriter, WavStream, WavStreamWriter

__all__ = ["CaptureWriter", "SigMFWriter", "WavCaptureWriter", "open_writer", "WAV_DATATYPES"]

WAV_DATATYPES = {"ri16_le": "pcm16", "ci16_le": "pcm16", "rf32_le": "float32", "cf32_le": "float32"}
_META_KEYS = ("description", "author", "datetime", "annotations", "global")


class CaptureWriter(AtomicWriter):
    """Base of the capture writers: a context manager with ``write(block)``.

    ``write`` takes float (real) or complex (I/Q) samples at full scale 1.0
    and returns the number of components clipped in that block; ``clipped``
    is the running total and ``samples`` the number written. Leaving the
    ``with`` block normally renames the files into place; an exception
    removes the temporary files and leaves any earlier output untouched.
    """

    def __init__(self, dt, fs: float, kind: str):
        self.dt = dt
        self.fs = fs
        self.kind = kind
        self.samples = 0
        self.clipped = 0
        self._closed = False

    def _encode(self, block):
        if self._closed:
            raise OutputError(f"{self.path}: writer is closed")
        a = np.asarray(block)
        if a.ndim != 1:
            raise ParameterError(f"{self.path}: blocks must be one-dimensional, got shape {a.shape}")
        if self.kind == "iq" and not np.iscomplexobj(a):
            raise ParameterError(f"{self.path}: I/Q capture expects complex samples, got {a.dtype}")
        codes, clipped = self.dt.encode(a)
        self.samples += a.shape[0]
        self.clipped += clipped
        return codes, clipped

    def write(self, block) -> int:  # pragma: no cover - abstract
        raise NotImplementedError


class SigMFWriter(CaptureWriter):
    """Write a SigMF recording: ``<stem>.sigmf-data`` then ``<stem>.sigmf-meta``.

    The data file is renamed into place first and the metadata last, so a
    reader never finds metadata without its complete data.

    Examples
    --------
    >>> import tempfile, pathlib, json
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with open_writer(d / "t.sigmf-meta", fs=1e6, kind="iq", datatype="ci8", center_hz=1e6) as w:
    ...     w.write(np.array([0.5 + 0.25j], dtype=np.complex64))
    0
    >>> (d / "t.sigmf-data").read_bytes()
    b'@ '
    >>> json.loads((d / "t.sigmf-meta").read_text())["global"]["core:datatype"]
    'ci8'
    """

    def __init__(self, path, *, fs, kind, dt, center_hz, meta, outputs=None):
        super().__init__(dt, fs, kind)
        self.meta_path, self.data_path = sigmf_pair(path)
        self.path = self.meta_path
        self._meta = meta
        self._center = center_hz
        self._sha = hashlib.sha512()
        # one set: the data renamed before the metadata, which a reader opens first
        self._own = outputs is None
        self.outputs = OutputSet(self.meta_path) if outputs is None else outputs
        if outputs is not None and outputs.head is None:
            outputs.head = self.meta_path
        self._data_file = AtomicFile(self.data_path, self.outputs)
        self._meta_file = AtomicFile(self.meta_path, self.outputs)

    def write(self, block) -> int:
        """Append samples; returns the number of components clipped."""
        try:
            codes, clipped = self._encode(block)
            buf = memoryview(np.ascontiguousarray(codes)).cast("B")
            self._sha.update(buf)
            self._data_file.write(buf)
        except BaseException:
            self.abort()
            raise
        return clipped

    def close(self) -> None:
        """Write the metadata (with the data's SHA-512); commit data and metadata (or leave that to the set)."""
        if self._closed:
            return
        self._closed = True
        try:
            m = self._meta
            doc = build_meta(datatype=self.dt.name, fs=self.fs, center_hz=self._center,
                             description=m.get("description"), author=m.get("author"),
                             datetime=m.get("datetime"), sha512=self._sha.hexdigest(),
                             annotations=m.get("annotations", ()), extra_global=m.get("global"))
            text = json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
            self._meta_file.write(text.encode("utf-8"))
            self._data_file.commit()
            self._meta_file.commit()
            if self._own:
                self.outputs.commit()
        except BaseException:
            self.abort()
            raise

    def abort(self) -> None:
        """Remove both temporary files (and the others of the set)."""
        self._closed = True
        self._data_file.abort()
        self._meta_file.abort()


class WavCaptureWriter(WavStreamWriter, CaptureWriter):
    """Write a WAV capture: real -> mono, I/Q -> stereo (I left, Q right); RF64 over 4 GiB.

    A WAV file cannot hold a centre frequency: reading an I/Q WAV back needs
    ``--center``. ``meta`` description/author/datetime go to RIFF INFO tags.
    """

    def __init__(self, path, *, fs, kind, dt, meta, expected_samples=None, outputs=None):
        super().__init__(dt, fs, kind)
        self.path = Path(path)
        tags = {}
        if m := meta.get("description"):
            tags["ICMT"] = m
        if m := meta.get("author"):
            tags["IART"] = m
        if m := meta.get("datetime"):
            tags["ICRD"] = m
        from .. import __version__

        tags["ISFT"] = f"sdrx {__version__}"
        for key in ("annotations", "global"):
            if meta.get(key):
                raise ParameterError(f"meta.{key}: a WAV capture cannot hold it; write a .sigmf-meta recording")
        self._stream = WavStream(self.path, fs, 2 if kind == "iq" else 1, WAV_DATATYPES[dt.name],
                                 expected_frames=expected_samples, info=tags, outputs=outputs)

    def write(self, block) -> int:
        """Append samples; returns the number of components clipped."""
        try:
            codes, clipped = self._encode(block)
            self._stream.write_codes(codes)
        except BaseException:
            self.abort()
            raise
        return clipped


def open_writer(path, *, fs, kind, datatype, center_hz=None, force=False, inputs=(), meta=None,
                expected_samples=None, outputs=None) -> CaptureWriter:
    """Open a capture writer chosen by the path's suffix.

    Parameters
    ----------
    path : str or Path
        ``*.sigmf-meta`` or ``*.sigmf-data`` (the pair is written) or ``*.wav``.
    fs : float or str
        Sample rate, Hz.
    kind : str
        ``"real"`` or ``"iq"``; must agree with the datatype's ``r``/``c``.
    datatype : str
        SigMF datatype. SigMF: any known one. WAV: ``ri16_le``/``ci16_le``
        (PCM_16) or ``rf32_le``/``cf32_le`` (FLOAT).
    center_hz : float, optional
        Centre frequency of an I/Q capture (SigMF ``captures[0].core:frequency``).
        Required for SigMF I/Q; a WAV file cannot store it.
    force : bool
        Replace existing outputs.
    inputs : iterable of paths
        Files the outputs must not be.
    meta : dict, optional
        ``description``, ``author``, ``datetime`` (ISO 8601, left out unless
        given, so that outputs stay deterministic), and for SigMF
        ``annotations`` (list of SigMF annotation objects) and ``global``
        (extra global keys).
    expected_samples : int, optional
        WAV: the number of samples to be written, when known (picks WAV or RF64
        up front); otherwise room for an RF64 header is reserved.
    outputs : OutputSet, optional
        A set of outputs the capture's files join (committed with the others,
        e.g. a truth sidecar); by default the capture is a set of its own.

    Returns
    -------
    CaptureWriter

    Raises
    ------
    OutputError
        Output exists without ``force``, is one of the inputs, or its folder is missing.
    ParameterError
        Unknown datatype or suffix, kind/datatype mismatch, bad rate, I/Q
        SigMF without centre, unknown meta keys.

    Notes
    -----
    Quantisation is round-to-nearest (half to even) of ``x * 2**(N-1)`` for
    signed and ``x * m + m`` for unsigned datatypes (``m = (2**N - 1)/2``),
    clipped to the code range; the clipped count is returned by ``write``.
    """
    p = Path(path)
    rate = validate_fs(fs, "fs")
    dt = parse_datatype(datatype, "datatype")
    if kind not in ("real", "iq"):
        raise ParameterError(f"kind: must be 'real' or 'iq', got {kind!r}")
    if dt.kind != kind:
        raise ParameterError(f"datatype {dt.name}: is {dt.kind}, but kind is {kind!r}")
    center = None if center_hz is None else parse_frequency(center_hz, "center_hz")
    meta = dict(meta or {})
    unknown = sorted(set(meta) - set(_META_KEYS))
    if unknown:
        raise ParameterError(f"meta: unknown key(s) {', '.join(unknown)}; known: {', '.join(_META_KEYS)}")
    inputs = tuple(inputs)
    if is_sigmf_path(p):
        meta_path, data_path = sigmf_pair(p)
        if kind == "iq" and center is None:
            raise ParameterError(f"{meta_path}: an I/Q SigMF recording needs center_hz (core:frequency)")
        if kind == "real" and center is not None:
            raise ParameterError(f"center_hz: applies to I/Q captures; {dt.name} is real")
        check_output(meta_path, inputs=inputs, force=force)
        check_output(data_path, inputs=inputs, force=force)
        return SigMFWriter(meta_path, fs=rate, kind=kind, dt=dt, center_hz=center, meta=meta, outputs=outputs)
    if p.suffix.lower() == ".wav":
        if dt.name not in WAV_DATATYPES:
            raise ParameterError(
                f"datatype {dt.name}: a WAV capture holds one of {', '.join(WAV_DATATYPES)}"
            )
        check_output(p, inputs=inputs, force=force)
        return WavCaptureWriter(p, fs=rate, kind=kind, dt=dt, meta=meta, expected_samples=expected_samples,
                                outputs=outputs)
    raise ParameterError(f"{p}: unknown output type; name a .sigmf-meta, .sigmf-data or .wav file")
