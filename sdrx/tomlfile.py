"""Reading the TOML files sdrx takes (chain specs, scenarios, reference cases), with one-line errors."""

from __future__ import annotations

import sys
from pathlib import Path

from .errors import ParameterError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

__all__ = ["read_toml", "MAX_TOML_BYTES", "tomllib"]

#: largest TOML file read (a chain spec or a cases file is a few kB)
MAX_TOML_BYTES = 16 << 20


def read_toml(path, label: str = "") -> dict:
    """Parse a TOML file; every failure is a :class:`ParameterError` naming the file.

    Parameters
    ----------
    path : str or Path
    label : str
        Words put before the path in messages ("cases file").

    Raises
    ------
    ParameterError
        Unreadable, too large (16 MiB), not UTF-8, not valid TOML, or nested too deeply.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.toml"
    >>> _ = p.write_text("x = [1, 2]")
    >>> read_toml(p)
    {'x': [1, 2]}
    >>> _ = p.write_text("x = ")
    >>> read_toml(p, "cases file")
    Traceback (most recent call last):
    ...
    sdrx.errors.ParameterError: cases file ...a.toml: not valid TOML (Invalid value (at end of document))
    """
    p = Path(path)
    where = f"{label} {p}" if label else str(p)
    try:
        if p.stat().st_size > MAX_TOML_BYTES:
            raise ParameterError(f"{where}: larger than {MAX_TOML_BYTES >> 20} MiB; not a TOML file sdrx reads")
        text = p.read_bytes().decode("utf-8")
        return tomllib.loads(text)
    except UnicodeDecodeError:
        raise ParameterError(f"{where}: not a text (UTF-8) TOML file") from None
    except tomllib.TOMLDecodeError as exc:
        raise ParameterError(f"{where}: not valid TOML ({exc})") from None
    except RecursionError:
        raise ParameterError(f"{where}: nested too deeply to read") from None
    except OSError as exc:
        raise ParameterError(f"{where}: cannot read ({exc.strerror})") from None
