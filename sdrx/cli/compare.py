"""``sdrx compare``: A/B(/X) listening page for several chains on the same excerpt."""

from __future__ import annotations

import click

from .common import (SdrxCommand, capture_kwargs, capture_options, correction_options, full_scale_option,
                     progress_for)

__all__ = ["command"]


@click.command("compare", cls=SdrxCommand)
@click.argument("capture", metavar="CAPTURE")
@click.argument("specs", nargs=-1, metavar="SPEC_A SPEC_B [SPEC_C ...]")
@click.option("--tune", required=True, metavar="F", help="Tuned carrier, e.g. 1130k.")
@click.option("-o", "--output", "out_dir", required=True, metavar="DIR",
              help="Folder for the WAVs, compare.json and index.html (created if missing).")
@click.option("--blind", default=0, show_default=True, type=int, metavar="N",
              help="Number of blind A/B/X trials on the page.")
@click.option("--seed", default=None, type=int, metavar="K",
              help="Seed for drawing X (default: a fresh one, written only to the key file).")
@click.option("--spacing", default="10k", show_default=True, metavar="F",
              help="Channel spacing for the adjacent-channel figures (9k or 10k at MF).")
@click.option("--path", "path", type=click.Choice(["fast", "exact"]), default="fast", show_default=True,
              help="Execution path of the receiver.")
@full_scale_option
@click.option("--force", is_flag=True, help="Write into DIR although it is not empty.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary line.")
@correction_options
@capture_options
def command(capture, specs, tune, out_dir, blind, seed, spacing, path, full_scale_dbm, force, quiet, correct, ppm,
            datatype, rate, center, start, duration):
    """Compare chains by ear: the same excerpt through each, aligned and loudness-matched.

    Example:

    \b
        sdrx compare demo_signals/coast.sigmf-meta --tune 1130k wide narrow -o demo_out/compare --blind 10

    Each SPEC is a preset name or a chain TOML file, optionally with a label:
    SPEC@LABEL (e.g. medium@medium-again to compare a chain with itself).
    Writes DIR/LABEL.wav per spec, DIR/compare.json, DIR/index.html (open it
    in a browser; it plays the WAVs beside it) and, with --blind,
    DIR/blind-key.json. The excerpt is --start/--duration, by default the rest
    of the capture from --start, at most 30 s (1 to 120 s allowed). Each
    receiver runs 0.2 s ahead of the excerpt to settle (from --start 0, the
    first 0.2 s is not heard). With --correct the recorder's faults are
    estimated once and undone alike for every chain. --full-scale-dbm gives
    every chain the capture's calibration (compare.json: carrier levels in dBm).
    """
    from ..compare.run import compare

    bar = progress_for("receiving", quiet)
    try:
        result = compare(capture, tune, specs, out_dir, start_s=start, duration_s=duration, blind=blind,
                         seed=seed, spacing_hz=spacing, path=path, force=force, progress=bar,
                         correct=correct, ppm=ppm, full_scale_dbm=full_scale_dbm, **capture_kwargs(datatype, rate, center))
    finally:
        if bar is not None:
            bar.close()
    if not quiet:
        from pathlib import Path

        lo = result["loudness"]
        click.echo(f"{Path(out_dir) / result['page']}: {len(result['specs'])} outputs at "
                   f"{lo['target_lufs']:.1f} LUFS (set by {lo['limited_by']}'s peak)"
                   + (f", {len(result['trials'])} blind trials, key in {Path(out_dir) / result['key_file']}"
                      if result["key_file"] else ""))
