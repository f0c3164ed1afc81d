"""``sdrx synth``: scenario TOML -> deterministic test capture + truth sidecar."""

from __future__ import annotations

import click

from ..units import format_frequency
from .common import SdrxCommand, progress_for

__all__ = ["command"]


@click.command("synth", cls=SdrxCommand)
@click.argument("scenario", metavar="SCENARIO.toml", type=click.Path(dir_okay=True, path_type=str))
@click.option("-o", "--output", "out", required=True, metavar="OUT",
              help="Capture to write: NAME.sigmf-meta (SigMF pair) or NAME.wav; "
                   "the truth goes to NAME.truth.json beside it.")
@click.option("--seconds", default=None, metavar="S", help="Duration, overriding the scenario's (e.g. 2, 500ms).")
@click.option("--seed", default=None, type=click.IntRange(min=0), metavar="N",
              help="Root seed, overriding the scenario's.")
@click.option("--force", is_flag=True, help="Replace existing outputs.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary line.")
def command(scenario, out, seconds, seed, force, quiet):
    """Synthesize the test capture a SCENARIO.toml describes.

    Stations (carrier, level in dBFS, modulation depth, program, fading),
    noise floor and impulse noise are generated block by block; the same
    scenario and seed always give the same bytes. A truth sidecar
    (NAME.truth.json) lists every station and how to regenerate its program.

    Example:

        sdrx synth demo_signals/coast.toml -o demo_out/coast.sigmf-meta --force
    """
    from ..synth import synthesize

    bar = progress_for("synth", quiet)
    try:
        truth = synthesize(scenario, out, seconds=seconds, seed=seed, force=force, progress=bar)
    finally:
        if bar is not None:
            bar.close()
    if not quiet:
        cap = truth["capture"]
        msg = (f"wrote {out}: {cap['kind']} {cap['datatype']} at {format_frequency(cap['rate_hz'])}, {cap['seconds']:g} s, "
               f"{len(truth['stations'])} station(s); truth in {truth_name(out)}")
        click.echo(msg)
        if cap["over_full_scale"]:
            click.echo(f"sdrx: warning: {cap['over_full_scale']} sample components were beyond full scale "
                       f"and were clipped; lower the station levels", err=True)
    return 0


def truth_name(out) -> str:
    """Path of the truth sidecar of ``out``, as text."""
    from ..synth import truth_path_for

    return str(truth_path_for(out))
