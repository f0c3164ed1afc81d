"""``sdrx band``: every station of one or more captures in one pass per capture, here or on a Dask cluster."""

from __future__ import annotations

import click

from .common import (SdrxCommand, capture_kwargs, capture_options, correction_options, full_scale_option,
                     progress_for)

__all__ = ["command"]


@click.command("band", cls=SdrxCommand)
@click.argument("captures", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option("-o", "--output", "out", required=True, type=click.Path(file_okay=False),
              help="Folder for the station WAVs, band.json, log.csv and index.html.")
@click.option("--stations", default="all", show_default=True, metavar="all|F,F,...",
              help="'all': every carrier the survey finds on the channel grid; or frequencies, e.g. 600k,880k.")
@click.option("--min-level", "min_level", default=None, type=float, metavar="DBFS",
              help="With --stations all: leave out carriers weaker than this (dBFS).")
@click.option("--chain", "chains", multiple=True, metavar="SPEC|F=SPEC",
              help="Chain for every station (preset or TOML), or F=SPEC for one station; repeatable. Default medium.")
@click.option("--spacing", default="10k", show_default=True, metavar="HZ",
              help="Channel spacing of the survey's grid: 9k (ITU Regions 1 and 3) or 10k (Region 2).")
@click.option("--segment", "segment", default="60", show_default=True, metavar="S",
              help="Seconds of capture per unit of work (0: one unit per capture).")
@click.option("--workers", type=int, default=None, metavar="N",
              help="Run on N local worker processes (a Dask LocalCluster on 127.0.0.1).")
@click.option("--scheduler", default=None, metavar="ADDRESS",
              help="Run on an existing Dask cluster, e.g. tcp://10.0.0.5:8786 (workers must see the same paths).")
@click.option("--work-dir", "work_dir", default=None, type=click.Path(file_okay=False), metavar="DIR",
              help="Shared folder where workers leave segment parts (default: inside the output folder).")
@full_scale_option
@click.option("--float", "float_output", is_flag=True, help="Write 32-bit float WAVs instead of 16-bit PCM.")
@click.option("--force", is_flag=True, help="Replace an earlier band run in the output folder.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@correction_options
@capture_options
def command(captures, out, stations, min_level, chains, spacing, segment, workers, scheduler, work_dir,
            full_scale_dbm, float_output, force, quiet, correct, ppm, datatype, rate, center, start, duration):
    """Receive every station of each CAPTURE: one WAV per station, a level log and an overview page.

    Each capture is read and channelized once; every station's IF stages,
    AGC, detector and audio run from that one pass, with the audio of
    `sdrx receive` of that station (to float rounding). Several captures, and segments of long
    captures, run in parallel with --workers or --scheduler. --correct undoes
    the recorder's faults (estimated once per capture) ahead of every station.
    With --full-scale-dbm (or the specs' frontend.full_scale_dbm) band.json
    and log.csv give the carrier levels in dBm beside dBFS.

    Example:

        sdrx band demo_signals/coast.sigmf-meta --min-level -60 -o demo_out/band
    """
    from ..band import band
    from ..parallel import describe

    seg = float(segment) if segment not in (None, "") and _is_number(segment) else segment
    bar = progress_for("band", quiet)
    try:
        s = band(list(captures), out, stations=stations, min_level_dbfs=min_level, chains=chains, spacing_hz=spacing,
                 start_s=start, duration_s=duration, segment_s=seg, workers=workers, scheduler=scheduler,
                 float_output=float_output, force=force, progress=bar, work_dir=work_dir,
                 correct=correct, ppm=ppm, full_scale_dbm=full_scale_dbm, **capture_kwargs(datatype, rate, center))
    finally:
        if bar is not None:
            bar.close()
    n_st = sum(len(c["stations"]) for c in s["captures"])
    n_seg = sum(c["segments"] for c in s["captures"])
    click.echo(f"{out}: {n_st} stations from {len(s['captures'])} capture(s), {n_seg} segment(s) on "
               f"{describe(workers, scheduler)}; open {out}/index.html")
    n_warn = sum(1 for c in s["captures"] for st in c["stations"] if st["warnings"])
    if n_warn:
        click.echo(f"warning: {n_warn} station(s) have warnings; see {out}/band.json", err=True)
    return 0


def _is_number(text) -> bool:
    try:
        float(text)
    except (TypeError, ValueError):
        return False
    return True
