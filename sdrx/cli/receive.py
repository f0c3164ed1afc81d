"""``sdrx receive``: a capture through a receiver chain to audio."""

from __future__ import annotations

import click

from .common import SdrxCommand, capture_options, correction_options, full_scale_option, one_line, progress_for

__all__ = ["command"]


def _list_chains(ctx, _param, value):
    if not value or ctx.resilient_parsing:
        return
    from ..analysis.selectivity import if_widths
    from ..chain import design_chain, list_presets
    from ..units import format_frequency

    click.echo(f"{'preset':8s} {'IF -3 dB':>9s} {'IF -6 dB':>9s}  {'audio band':16s} description")
    for name, desc in list_presets():
        design = design_chain(name)
        widths = if_widths(design)
        w3, w6 = (("-" if widths[lv] is None else f"{widths[lv] / 1e3:.1f} kHz") for lv in (3.0, 6.0))
        audio = design.audio
        band = f"{format_frequency(audio.highpass_hz)}-{format_frequency(audio.lowpass_hz)}"
        click.echo(f"{name:8s} {w3:>9s} {w6:>9s}  {band:16s} {desc}")
    click.echo("IF -3/-6 dB: overall width of the whole IF chain (every stage together), from the design; "
               "audio band: the audio filters' corners. --show-chain PRESET prints a preset's TOML.")
    ctx.exit(0)


def _show_chain(ctx, _param, value):
    if value is None or ctx.resilient_parsing:
        return
    from ..chain.spec_toml import spec_to_toml
    from ..errors import ParameterError

    try:
        text = spec_to_toml(value)
    except ParameterError as exc:
        raise ParameterError(str(exc).replace("--chain ", "--show-chain ", 1)) from None
    click.echo(text, nl=False)
    ctx.exit(0)


@click.command("receive", cls=SdrxCommand)
@click.argument("capture", type=click.Path(dir_okay=False), required=True)
@click.option("--tune", required=True, metavar="F", help="Carrier frequency of the station, e.g. 1130k.")
@click.option("--chain", default="medium", show_default=True, metavar="SPEC|PRESET",
              help="Chain spec TOML file or preset name (see --list-chains).")
@click.option("-o", "--output", "out", required=True, type=click.Path(dir_okay=False), help="Output WAV.")
@click.option("--summary", "summary", type=click.Path(dir_okay=False), default=None, help="Write the run summary JSON here.")
@click.option("--path", "path", type=click.Choice(["fast", "exact"]), default="fast", show_default=True,
              help="fast: complex-envelope equivalent; exact: a real IF at an IF sample rate.")
@click.option("--if-rate", default=None, metavar="HZ", help="Exact path: IF sample rate (default: chosen automatically).")
@full_scale_option
@click.option("--float", "float_output", is_flag=True, help="Write 32-bit float WAV instead of 16-bit PCM.")
@click.option("--force", is_flag=True, help="Replace existing outputs.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@click.option("--list-chains", is_flag=True, expose_value=False, is_eager=True, callback=_list_chains,
              help="List the shipped chain presets (overall IF -3/-6 dB widths, audio band) and exit.")
@click.option("--show-chain", metavar="PRESET", expose_value=False, is_eager=True, callback=_show_chain,
              help="Print a preset's chain spec as TOML, every key written out, and exit: save it, edit it, "
                   "pass it as --chain FILE.toml.")
@click.option("--spacing", default="10k", show_default=True, metavar="HZ",
              help="Channel spacing (9k or 10k at MF): the adjacent channels of the checks, and the grid of "
                   "broadcast carriers that --correct clock estimates the clock error from.")
@correction_options
@capture_options
def command(capture, tune, chain, out, summary, path, if_rate, full_scale_dbm, float_output, force, quiet, spacing,
            correct, ppm,
            datatype, rate, center, start, duration):
    """Receive one station of CAPTURE through a superheterodyne chain; write its audio.

    Example:

    \b
        sdrx receive demo_signals/coast.sigmf-meta --tune 1130k --chain narrow \\
            -o demo_out/tidewater-1130k.wav --summary demo_out/tidewater-1130k.json

    With --correct (dc, iq, clock, all) the recorder's faults are estimated
    over the excerpt and undone before the chain; the summary's
    "corrections" gives the values used.
    """
    from ..run import receive
    from ..units import format_frequency

    bar = progress_for("receive", quiet)
    try:
        s = receive(capture, tune, chain, out, summary_path=summary, path=path, start_s=start,
                    duration_s=duration, float_output=float_output, force=force, progress=bar,
                    datatype=datatype, fs=rate, center_hz=center, if_rate_hz=if_rate, correct=correct, ppm=ppm,
                    spacing_hz=spacing, full_scale_dbm=full_scale_dbm)
    finally:
        if bar is not None:
            bar.close()
    c = s["carrier_dbfs"]
    dbm = s["carrier_dbm"]
    in_dbm = f" = {dbm['mean']:.1f} dBm" if dbm is not None and dbm["mean"] is not None else ""
    click.echo(
        f"{out}: {s['output']['seconds']:.3f} s at {format_frequency(s['output']['rate_hz'])}; "
        f"carrier {c['mean']:.1f} dBFS{in_dbm} (min {c['min']:.1f}, max {c['max']:.1f}); "
        f"LO {format_frequency(s['lo_hz'])}, image {format_frequency(s['image_hz'])}"
        if c["mean"] is not None else f"{out}: {s['output']['seconds']:.3f} s"
    )
    for w in s["warnings"]:
        click.echo(f"warning: {one_line(w)}", err=True)
    if summary:
        click.echo(f"summary: {summary}")
    return 0
