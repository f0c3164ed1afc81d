"""Shared pieces of the click commands: error mapping, capture options."""

from __future__ import annotations

import sys

import click

from ..errors import SdrxError
from ..progress import make_progress

__all__ = ["one_line", "run_cli", "capture_options", "capture_kwargs", "correction_options", "full_scale_option", "progress_for", "fail",
           "SdrxCommand", "SdrxGroup", "usage_line", "split_debug"]


def _terminate(signum, frame):
    raise KeyboardInterrupt


def one_line(text: str) -> str:
    """A message as one printable line: line breaks and other control characters (which a file name or
    a value from a file may hold) are shown as escapes.

    Examples
    --------
    >>> one_line("bad name 'a\\nb\\x1b[31m'")
    "bad name 'a\\\\nb\\\\x1b[31m'"
    """
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(text))


def split_debug(argv):
    """``--debug`` may stand anywhere on the line (before ``--``): take it out; return (argv, debug).

    Examples
    --------
    >>> split_debug(["receive", "x.wav", "--debug", "--tune", "1M"])
    (['receive', 'x.wav', '--tune', '1M'], True)
    >>> split_debug(["info", "--", "--debug"])
    (['info', '--', '--debug'], False)
    """
    args = list(argv)
    end = args.index("--") if "--" in args else len(args)
    debug = "--debug" in args[:end]
    return [a for i, a in enumerate(args) if not (i < end and a == "--debug")], debug


def usage_line(exc: click.ClickException) -> str:
    """A click usage error as one line: the command, the problem, where to read more.

    Examples
    --------
    >>> import click
    >>> usage_line(click.UsageError("Missing option '--tune'."))
    "Missing option '--tune'."
    """
    msg = " ".join(line.strip() for line in str(exc.format_message()).splitlines() if line.strip())
    ctx = getattr(exc, "ctx", None)
    if ctx is not None and ctx.command_path and ctx.command_path != "sdrx":
        name = ctx.command_path[len("sdrx "):] if ctx.command_path.startswith("sdrx ") else ctx.command_path
        return f"{name}: {msg} (see sdrx {name} --help)"
    return msg


def run_cli(group, argv=None):
    """Run the click group; map SdrxError, click usage errors and OS errors to one line and exit 2.

    ``--debug`` anywhere on the line shows the traceback instead. SIGTERM is
    handled like Ctrl-C, so that writers remove their temporary files on the
    way out.
    """
    argv, debug = split_debug(argv if argv is not None else sys.argv[1:])
    if debug:
        argv = ["--debug"] + argv
    import signal
    import threading

    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _terminate)
    try:
        rv = group.main(args=argv, prog_name="sdrx", standalone_mode=False)
    except click.exceptions.Exit as exc:
        return exc.exit_code
    except click.exceptions.NoArgsIsHelpError as exc:
        click.echo(exc.ctx.get_help() if exc.ctx is not None else str(exc))
        sys.exit(2)
    except click.ClickException as exc:
        if debug:
            raise
        click.echo(f"sdrx: error: {one_line(usage_line(exc))}", err=True)
        sys.exit(2)
    except click.Abort:
        click.echo("sdrx: interrupted", err=True)
        sys.exit(130)
    except KeyboardInterrupt:
        click.echo("sdrx: interrupted; no partial output left behind", err=True)
        sys.exit(130)
    except SdrxError as exc:
        if debug:
            raise
        click.echo(f"sdrx: error: {one_line(exc)}", err=True)
        sys.exit(2)
    except OSError as exc:
        if debug:
            raise
        where = exc.filename if exc.filename is not None else "input/output"
        shown = str(where) if len(str(where)) <= 80 else str(where)[:77] + "..."
        click.echo(f"sdrx: error: {one_line(shown)}: {one_line(exc.strerror or exc)}", err=True)
        sys.exit(2)
    if isinstance(rv, int) and rv != 0:
        sys.exit(rv)
    return 0


def _refuse_repeated(command: click.Command, ctx: click.Context, args) -> None:
    """Refuse an option that takes one value when it is given more than once (the last would win silently)."""
    parser = command.make_parser(ctx)
    try:
        _opts, _rest, order = parser.parse_args(args=list(args))
    except click.UsageError:
        return                      # the real parse reports it
    seen = {}
    for param in order:
        if not isinstance(param, click.Option) or param.multiple or param.count or param.is_flag:
            continue
        seen[param.name] = seen.get(param.name, 0) + 1
        if seen[param.name] == 2:
            name = max(param.opts, key=len)
            raise click.UsageError(f"{name} is given more than once; give it once", ctx=ctx)


class SdrxCommand(click.Command):
    """A click command that refuses a single-value option given twice (``--tune 600k --tune 880k``)."""

    def parse_args(self, ctx, args):
        _refuse_repeated(self, ctx, args)
        return super().parse_args(ctx, args)


class SdrxGroup(click.Group):
    """A click group whose subcommands are :class:`SdrxCommand` (and its own options checked the same way)."""

    command_class = SdrxCommand

    def parse_args(self, ctx, args):
        # only the group's own options, up to the subcommand's name
        head = []
        for a in args:
            if not a.startswith("-"):
                break
            head.append(a)
        _refuse_repeated(self, ctx, head)
        return super().parse_args(ctx, args)


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


def full_scale_option(f):
    """``--full-scale-dbm``: the capture's calibration (antenna power of a full-scale carrier), over the spec's."""
    return click.option("--full-scale-dbm", "full_scale_dbm", default=None, metavar="DBM",
                        help="Antenna power of a full-scale carrier in this capture, e.g. -10 (overrides the spec's "
                             "frontend.full_scale_dbm): carrier levels in dBm, thermal noise placed in dBFS.")(f)
