"""Shared pieces of the click commands: error mapping, capture options."""

from __future__ import annotations

import sys

import click

from ..errors import SdrxError
from ..progress import make_progress

__all__ = ["run_cli", "capture_options", "capture_kwargs", "correction_options", "progress_for", "fail"]


def _terminate(signum, frame):
    raise KeyboardInterrupt


def run_cli(group, argv=None):
    """Run the click group; map SdrxError (and a few OS errors) to exit 2.

    SIGTERM is handled like Ctrl-C, so that writers remove their temporary
    files on the way out.
    """
    debug = "--debug" in (argv if argv is not None else sys.argv[1:])
    import signal
    import threading

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _terminate)
    try:
        rv = group.main(args=argv, prog_name="sdrx", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    except click.Abort:
        click.echo("sdrx: interrupted", err=True)
        sys.exit(130)
    except KeyboardInterrupt:
        click.echo("sdrx: interrupted; no partial output left behind", err=True)
        sys.exit(130)
    except SdrxError as exc:
        if debug:
            raise
        click.echo(f"sdrx: error: {exc}", err=True)
        sys.exit(2)
    except (FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        if debug:
            raise
        click.echo(f"sdrx: error: {exc.filename}: {exc.strerror}", err=True)
        sys.exit(2)
    if isinstance(rv, int) and rv != 0:
        sys.exit(rv)
    return 0


def fail(message: str) -> None:
    """Raise a one-line usage error (exit 2)."""
    raise click.UsageError(message)


def capture_options(f):
    """Options every command that reads a capture accepts."""
    opts = [
        click.option("--format", "datatype", metavar="DATATYPE",
                     help="Headerless raw file: SigMF datatype such as ci16_le, cf32_le, cu8."),
        click.option("--rate", metavar="HZ", help="Raw file: sample rate, e.g. 2.4M."),
        click.option("--center", metavar="HZ",
                     help="Centre frequency of an I/Q capture (WAV stereo or raw), e.g. 1.1M."),
        click.option("--start", default="0", show_default=True, metavar="S",
                     help="Start of the excerpt, seconds into the capture."),
        click.option("--duration", default=None, metavar="S", help="Length of the excerpt, seconds."),
    ]
    for o in reversed(opts):
        f = o(f)
    return f


def capture_kwargs(datatype, rate, center):
    """Keyword arguments for :func:`sdrx.capture.open_capture` from the options."""
    return {"datatype": datatype, "fs": rate, "center_hz": center}


def progress_for(label: str, quiet: bool):
    """A terminal progress bar, or None when quiet or not on a TTY."""
    return make_progress(label, quiet=quiet)


def correction_options(f):
    """``--correct`` and ``--ppm``: undo the recording front end's faults (sdrx.capture.correct)."""
    opts = [
        click.option("--correct", "correct", default="none", show_default=True, metavar="LIST",
                     help="Undo the recorder's faults first: dc, iq, clock (comma-separated), all or none."),
        click.option("--ppm", "ppm", default=None, metavar="PPM",
                     help="Clock error to undo with --correct clock, instead of estimating it (e.g. 60)."),
    ]
    for o in reversed(opts):
        f = o(f)
    return f
