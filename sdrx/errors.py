"""Exceptions raised by sdrx.

Every error that a user can cause derives from :class:`SdrxError`; the
command line turns it into a one-line message and exit status 2.
"""

__all__ = ["SdrxError", "ParameterError", "CaptureError", "OutputError"]


class SdrxError(Exception):
    """Base class of every error sdrx raises on purpose."""


class ParameterError(SdrxError, ValueError):
    """A parameter, option or spec key has a value sdrx cannot use."""


class CaptureError(SdrxError, ValueError):
    """A capture file (or another input file) is missing, malformed or inconsistent."""


class OutputError(SdrxError):
    """An output cannot be written as asked (exists without force, is an input, ...)."""
