"""``sdrx info``: a capture's metadata and the carriers found on the channel grid."""

from __future__ import annotations

import json
import math

import click

from ..analysis.survey import DEFAULT_SURVEY_SECONDS, DEFAULT_THRESHOLD_DB, survey
from ..capture import open_capture
from ..units import format_frequency
from .common import capture_kwargs, capture_options, SdrxCommand, progress_for

__all__ = ["command", "format_info"]


def _k(hz) -> str:
    return f"{hz / 1e3:.6g}"


def format_info(info, result, first: int, count: int) -> str:
    """The compact terminal table of ``sdrx info``."""
    lines = []
    name = str(info.path) if info.path == info.data_path else f"{info.path} (data {info.data_path.name})"
    lines.append(f"capture   {name}")
    centre = "" if info.center_hz is None else f", centre {format_frequency(info.center_hz)}"
    lines.append(f"format    {info.kind}, {info.datatype}, rate {format_frequency(info.fs)}{centre}")
    lines.append(f"length    {info.samples} samples, {info.seconds:.6g} s")
    lo, hi = info.band_hz
    lines.append(f"band      {_k(lo)}-{_k(hi)} kHz")
    if first != 0 or count != info.samples:
        lines.append(f"surveyed  {first / info.fs:.6g} s to {(first + count) / info.fs:.6g} s")
    if math.isfinite(result.noise_floor_dbfs):
        lines.append(
            f"noise     {result.noise_floor_dbfs:.1f} dBFS per {result.rbw_hz:.4g} Hz bin; "
            f"carriers are at least {result.threshold_db:.3g} dB above it"
        )
    else:
        lines.append("noise     none: every sample of the excerpt is zero")
    n = len(result.carriers)
    lines.append(f"carriers  {n} on the {_k(result.spacing_hz)} kHz grid" + (", strongest first:" if n else ""))
    if n:
        lines.append(f"  {'kHz':>9} {'dBFS':>7} {'offset Hz':>10}")
        for c in result.carriers:
            lines.append(f"  {_k(c.freq_hz):>9} {c.level_dbfs:>7.1f} {round(c.offset_hz) + 0:>10d}")
    return "\n".join(lines)


@click.command("info", cls=SdrxCommand)
@click.argument("capture", type=click.Path(dir_okay=False, path_type=str))
@capture_options
@click.option("--spacing", default="10k", show_default=True, metavar="HZ",
              help="Channel spacing of the grid: 9k (ITU Regions 1 and 3) or 10k (Region 2).")
@click.option("--json", "as_json", is_flag=True, help="Print metadata and carriers as JSON.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def command(capture, datatype, rate, center, start, duration, spacing, as_json, quiet):
    """Metadata of CAPTURE and the carriers on the channel grid, strongest first.

    CAPTURE is a WAV/RF64/W64 file (mono: real RF; stereo: I/Q, needs
    --center), either file of a SigMF pair, or a headerless raw file with
    --format, --rate (and --center for I/Q).

    Example:

        sdrx info demo_signals/coast.sigmf-meta --spacing 10k
    """
    reader = open_capture(capture, **capture_kwargs(datatype, rate, center))
    info = reader.info
    first, count = reader.sample_range(start, duration)
    capped = duration is None and count > DEFAULT_SURVEY_SECONDS * info.fs
    if capped:
        # a long capture is surveyed over its first minute unless --duration asks for more
        duration = DEFAULT_SURVEY_SECONDS
        first, count = reader.sample_range(start, duration)
    bar = progress_for("surveying", quiet)
    try:
        result = survey(reader, spacing_hz=spacing, start_s=start, duration_s=duration,
                        threshold_db=DEFAULT_THRESHOLD_DB, progress=bar)
    finally:
        if bar is not None:
            bar.close()
    if as_json:
        data = info.to_json()
        data["start_s"] = first / info.fs
        data["duration_s"] = count / info.fs
        data.update(result.to_json())
        click.echo(json.dumps(data, indent=1, allow_nan=False))
    else:
        click.echo(format_info(info, result, first, count))
        if capped:
            click.echo(f"          (the first {DEFAULT_SURVEY_SECONDS:g} s of the excerpt by default; --duration S "
                       "surveys more)")
