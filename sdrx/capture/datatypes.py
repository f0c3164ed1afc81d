"""Sample datatypes named as in SigMF, and their conversion to and from full scale 1.0.

A SigMF datatype name reads ``<c|r><f|i|u><bits>[_le|_be]``: ``c`` complex
(interleaved I, Q) or ``r`` real; ``f`` IEEE float, ``i`` signed integer,
``u`` unsigned integer; 8, 16, 32 or 64 bits per component; the byte order
suffix is absent for 8-bit types.

Scaling (the same for every reader, so dBFS means the same for every format):

- signed integers of N bits: ``x = v / 2**(N-1)`` (int16 / 32768, int8 / 128);
- unsigned integers of N bits: ``x = (v - m) / m`` with ``m = (2**N - 1) / 2``
  (cu8: ``(v - 127.5) / 127.5``), so that 0 and 255 are -1.0 and +1.0 and
  the mid-scale offset of an unsigned converter is removed symmetrically;
- floats: taken as they are (full scale 1.0 by convention).

Writing inverts the scaling and rounds to the nearest code (half to even),
clipping to the code range; the number of clipped values is returned.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..errors import ParameterError

__all__ = ["Datatype", "parse_datatype", "KNOWN_DATATYPES"]

_NAME_RE = re.compile(r"^([cr])([fiu])(8|16|32|64)(?:_(le|be))?$")


def _all_names() -> tuple:
    names = []
    for kind in "cr":
        for base, bits_list in (("f", (32, 64)), ("i", (8, 16, 32)), ("u", (8, 16, 32))):
            for bits in bits_list:
                if bits == 8:
                    names.append(f"{kind}{base}{bits}")
                else:
                    names.extend([f"{kind}{base}{bits}_le", f"{kind}{base}{bits}_be"])
    return tuple(names)


KNOWN_DATATYPES = _all_names()


@dataclass(frozen=True)
class Datatype:
    """One SigMF sample datatype.

    Parameters
    ----------
    name : str
        The SigMF name, e.g. ``"ci16_le"``.
    is_complex : bool
        Interleaved I/Q components (``c``) or real samples (``r``).
    base : str
        ``"f"`` float, ``"i"`` signed integer, ``"u"`` unsigned integer.
    bits : int
        Bits per component.
    byteorder : str
        ``"<"``, ``">"`` or ``"|"`` (8-bit).

    Notes
    -----
    Decoding is ``x = (v - offset) * scale`` per component, computed in
    float32 with one vectorised pass for signed integers (a multiply into a
    float32 buffer, then viewed as complex64) and two for unsigned ones.

    Examples
    --------
    >>> dt = parse_datatype("ci16_le")
    >>> dt.kind, dt.sample_bytes, dt.scale
    ('iq', 4, 3.0517578125e-05)
    >>> dt.decode(np.array([16384, -32768], dtype="<i2")).tolist()
    [(0.5-1j)]
    """

    name: str
    is_complex: bool
    base: str
    bits: int
    byteorder: str

    @property
    def kind(self) -> str:
        """``"iq"`` for complex datatypes, ``"real"`` otherwise."""
        return "iq" if self.is_complex else "real"

    @property
    def component_dtype(self) -> np.dtype:
        """numpy dtype of one stored component (byte order included)."""
        return np.dtype(f"{self.byteorder}{self.base}{self.bits // 8}")

    @property
    def components(self) -> int:
        """Components per sample: 2 for I/Q, 1 for real."""
        return 2 if self.is_complex else 1

    @property
    def sample_bytes(self) -> int:
        """Bytes per (complex) sample."""
        return self.components * self.bits // 8

    @property
    def is_float(self) -> bool:
        """True for float datatypes (which may hold NaN or inf)."""
        return self.base == "f"

    @property
    def scale(self) -> float:
        """Multiplier from code to full scale 1.0."""
        if self.base == "f":
            return 1.0
        if self.base == "i":
            return 1.0 / float(2 ** (self.bits - 1))
        return 1.0 / ((2.0**self.bits - 1.0) / 2.0)

    @property
    def offset(self) -> float:
        """Code of zero (mid-scale for unsigned datatypes, else 0)."""
        return (2.0**self.bits - 1.0) / 2.0 if self.base == "u" else 0.0

    @property
    def code_range(self) -> tuple:
        """(lowest, highest) code of an integer datatype."""
        info = np.iinfo(self.component_dtype)
        return int(info.min), int(info.max)

    @property
    def output_dtype(self) -> np.dtype:
        """float32 for real datatypes, complex64 for I/Q ones."""
        return np.dtype(np.complex64 if self.is_complex else np.float32)

    def decode(self, raw: np.ndarray) -> np.ndarray:
        """Components as stored -> float32 (real) or complex64 (I/Q), full scale 1.0.

        Parameters
        ----------
        raw : ndarray of ``component_dtype``
            Components in file order (I, Q, I, Q, ... for complex datatypes);
            its length must be a multiple of ``components``.

        Returns
        -------
        ndarray
            float32 or complex64, one element per sample. May share memory
            with ``raw`` (float32 native order).
        """
        if self.base == "f":
            if raw.dtype == np.float32 and raw.dtype.isnative:
                out = raw
            else:
                # a float64 value beyond the float32 range becomes inf, which the reader reports
                with np.errstate(over="ignore"):
                    out = raw.astype(np.float32)
        elif self.base == "i":
            out = np.empty(raw.shape, dtype=np.float32)
            np.multiply(raw, np.float32(self.scale), out=out, dtype=np.float32, casting="unsafe")
        else:
            out = np.empty(raw.shape, dtype=np.float32)
            np.subtract(raw, np.float32(self.offset), out=out, dtype=np.float32, casting="unsafe")
            out *= np.float32(self.scale)
        if self.is_complex:
            return out.view(np.complex64)
        return out

    def encode(self, x) -> tuple:
        """Full-scale-1.0 samples -> stored components, rounded and clipped.

        Parameters
        ----------
        x : array_like
            Real (real datatypes) or complex (I/Q datatypes) samples.

        Returns
        -------
        (ndarray, int)
            Components of ``component_dtype`` in file order, and the number
            of components that were clipped to the code range (0 for float
            datatypes, which are stored unclipped).

        Raises
        ------
        ParameterError
            If ``x`` holds NaN or inf, or complex values for a real datatype.

        Examples
        --------
        >>> codes, clipped = parse_datatype("ri16_le").encode([0.5, 1.0, -1.0])
        >>> codes.tolist(), clipped
        ([16384, 32767, -32768], 1)
        """
        a = np.asarray(x)
        if self.is_complex:
            # keep the caller's precision (complex64 stays complex64, anything else complex128)
            a = np.asarray(a, dtype=np.complex64 if a.dtype == np.complex64 else np.complex128)
            comp = a.reshape(-1).view(a.real.dtype)
        else:
            if np.iscomplexobj(a):
                raise ParameterError(f"datatype {self.name}: is real; got complex samples")
            comp = a.reshape(-1)
        with np.errstate(over="ignore", invalid="ignore"):
            maybe_bad = comp.size and not np.isfinite(np.add.reduce(comp, dtype=np.float64))
        if maybe_bad and not np.isfinite(comp).all():
            bad = int(np.flatnonzero(~np.isfinite(comp))[0]) // self.components
            raise ParameterError(f"datatype {self.name}: sample {bad} to write is not finite")
        if self.base == "f":
            return comp.astype(self.component_dtype), 0
        lo, hi = self.code_range
        if self.base == "i" and self.bits <= 16 and comp.dtype == np.float32:
            # exact in float32: the scale is a power of two and every code fits in 24 bits
            v = comp * np.float32(1.0 / self.scale)
        else:
            v = comp.astype(np.float64) * (1.0 / self.scale)
            if self.offset:
                v += self.offset
        np.rint(v, out=v)
        clipped = int(np.count_nonzero(v > hi)) + int(np.count_nonzero(v < lo))
        if clipped:
            np.clip(v, lo, hi, out=v)
        return v.astype(self.component_dtype), clipped


@lru_cache(maxsize=None)
def _parse(name: str) -> Datatype:
    m = _NAME_RE.match(name)
    if not m or name not in KNOWN_DATATYPES:
        raise KeyError(name)
    kind, base, bits, endian = m.groups()
    bits = int(bits)
    if bits == 8:
        order = "|"
    else:
        order = "<" if endian == "le" else ">"
    return Datatype(name=name, is_complex=(kind == "c"), base=base, bits=bits, byteorder=order)


def parse_datatype(name, where: str = "datatype") -> Datatype:
    """Look up a SigMF datatype name.

    Parameters
    ----------
    name : str
        ``"ci16_le"``, ``"cf32_le"``, ``"cu8"``, ``"ri16_le"``, ...
    where : str
        The option, key or file the name came from, for the message.

    Returns
    -------
    Datatype

    Raises
    ------
    ParameterError
        If the name is not a known datatype (the message lists them).

    Examples
    --------
    >>> parse_datatype("cu8").kind
    'iq'
    """
    if isinstance(name, Datatype):
        return name
    try:
        return _parse(str(name).strip().lower())
    except KeyError:
        raise ParameterError(
            f"{where}: unknown datatype {name!r}; known: {', '.join(KNOWN_DATATYPES)}"
        ) from None
