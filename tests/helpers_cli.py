"""Run the sdrx command line in-process for tests: (exit status, stdout, stderr)."""

from __future__ import annotations

from sdrx.cli import main

__all__ = ["run"]


def run(argv, capsys):
    """``sdrx ARGV...`` through the real entry point; capture its output with pytest's capsys."""
    try:
        rc = main([str(a) for a in argv])
    except SystemExit as exc:
        rc = exc.code
    out = capsys.readouterr()
    return rc, out.out, out.err
