"""The ``sdrx`` command line: click commands only, thin over the library API.

Each command lives in its own module of this package; this module builds the
group and turns :class:`sdrx.errors.SdrxError` into a one-line message with
exit status 2 (a traceback only with ``--debug``).
"""

from __future__ import annotations

import importlib

import click

from .. import __version__
from .common import SdrxGroup

__all__ = ["main"]

# command name -> module in this package (each defines `command`)
_COMMANDS = {
    "info": "info",
    "synth": "synth",
    "receive": "receive",
    "report": "report",
    "plan": "plan",
    "compare": "compare",
    "refs": "refs",
    "band": "band",
}


class _LazyGroup(SdrxGroup):
    def list_commands(self, ctx):
        names = []
        for name in _COMMANDS:
            if self.get_command(ctx, name) is not None:
                names.append(name)
        return names

    def get_command(self, ctx, name):
        mod = _COMMANDS.get(name)
        if mod is None:
            return None
        try:
            module = importlib.import_module(f".{mod}", __name__)
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{mod}":
                return None
            raise
        return module.command


@click.group(cls=_LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="sdrx")
@click.option("--debug", is_flag=True, help="Show a traceback on errors.")
@click.pass_context
def cli(ctx, debug):
    """sdrx: an offline superheterodyne AM receiver bench.

    Run a capture through a receiver chain you specify, and see what that
    chain does. Example:

        sdrx receive demo_signals/coast.sigmf-meta --tune 1130k -o demo_out/tidewater-1130k.wav
    """
    ctx.ensure_object(dict)
    ctx.obj["debug"] = debug


def main(argv=None):
    """Entry point of the console script."""
    from .common import run_cli

    return run_cli(cli, argv)
