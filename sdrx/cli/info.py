"""``sdrx info``: a capture's metadata and the carriers found on the channel grid."""

from __future__ import annotations

import json
import math

import click

from ..analysis.survey import (DEFAULT_SURVEY_SECONDS, DEFAULT_THRESHOLD_DB, band_statistics, grid_fit,
                               resolution_decimals, survey_statistics)
from ..capture import open_capture
from ..capture.impairments import CARRIER_TOLERANCE_HZ, estimate_from_statistics
from ..units import format_frequency
from ..errors import ParameterError
from ..fileio import atomic_path, check_output
from .common import SdrxCommand, capture_kwargs, capture_options, progress_for

__all__ = ["command", "format_info", "format_impairments"]


def _k(hz) -> str:
    return f"{hz / 1e3:.6g}"


def _carrier_note(info, c, carriers, imp) -> str:
    """'  DC offset?' or '  mirror of F kHz?' for a line the recorder's faults explain."""
    if imp is None or info.kind != "iq":
        return ""
    f = c.freq_hz + c.offset_hz
    if abs(f - info.center_hz) < 1.0 and imp.dc_separable and imp.dc_offset_dbfs is not None \
            and abs(imp.dc_offset_dbfs - c.level_dbfs) < 1.0:
        return "  (the DC offset)"
    irr = imp.mirror_rejection_db
    if irr is None:
        return ""
    for o in carriers:
        if o is not c and abs(2 * info.center_hz - (o.freq_hz + o.offset_hz) - f) < 5.0 \
                and abs(o.level_dbfs - irr - c.level_dbfs) < 3.0:
            return f"  (mirror of {_k(o.freq_hz)})"
    return ""


def format_impairments(imp) -> list:
    """The ``front end`` lines of ``sdrx info``: the estimates, then a hint per fault worth correcting."""
    lines = [f"front end estimated over {imp.seconds:.3g} s (carrier tolerance {CARRIER_TOLERANCE_HZ:g} Hz)"]
    dc = imp.dc_offset_dbfs
    dc_text = "not told apart from the carrier at the centre" if not imp.dc_separable else (
        "none" if dc is None else f"{dc:.1f} dBFS")
    lines.append(f"  DC offset        {dc_text}")
    if imp.kind == "iq":
        if imp.mirror_rejection_db is None:
            lines.append("  I/Q balance      too little signal to estimate")
        else:
            lines.append(f"  I/Q balance      gain {imp.iq_gain_error_db:+.3f} dB, phase {imp.iq_phase_error_deg:+.3f} deg, "
                         f"mirror rejection {imp.mirror_rejection_db:.1f} dB")
    if imp.clock_error_ppm is None:
        lines.append("  clock            no estimate (fewer than 2 carriers on the grid agree)")
    else:
        se = "" if imp.clock_uncertainty_ppm is None else f" +- {imp.clock_uncertainty_ppm:.2f}"
        lines.append(f"  clock            {imp.clock_error_ppm:+.2f}{se} ppm from {imp.clock_carriers} carriers")
    for note in imp.notes:
        lines.append(f"  note: {note}")
    for hint in imp.hints():
        lines.append(f"  hint: {hint}")
    return lines


def _offset_text(c) -> str:
    """'+2003.7 +-0.4': the offset to the digits its resolution supports, and that resolution."""
    res = c.offset_resolution_hz
    if not math.isfinite(res):
        return f"{c.offset_hz:+.0f}"
    d = resolution_decimals(res)
    value = f"{round(c.offset_hz, d) + 0.0:+.{max(d, 0)}f}"
    return f"{value} +-{res:.1g}"


def format_info(info, result, first: int, count: int, impairments=None, fit=None) -> str:
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
        lines.append(f"  {'kHz':>9} {'dBFS':>7}  offset Hz from the channel (interpolated; +- its resolution)")
        for c in result.carriers:
            note = _carrier_note(info, c, result.carriers, impairments)
            lines.append(f"  {_k(c.freq_hz):>9} {c.level_dbfs:>7.1f}  {_offset_text(c):<16}" + note)
    hint = None if fit is None else fit.hint()
    if hint is not None:
        lines.append(f"  hint: {hint}")
    if impairments is not None:
        lines.extend(format_impairments(impairments))
    return "\n".join(lines)


@click.command("info", cls=SdrxCommand)
@click.argument("capture", type=click.Path(dir_okay=False, path_type=str))
@capture_options
@click.option("--spacing", default="10k", show_default=True, metavar="HZ",
              help="Channel spacing of the grid: 9k (ITU Regions 1 and 3) or 10k (Region 2).")
@click.option("--json", "as_json", is_flag=True, help="Print metadata and carriers as JSON.")
@click.option("--spectrogram", "spectrogram", default=None, type=click.Path(dir_okay=False), metavar="PNG",
              help="Also draw the excerpt's spectrogram with the carriers found marked (the band overview's picture).")
@click.option("--force", is_flag=True, help="Replace an existing --spectrogram file.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
def command(capture, datatype, rate, center, start, duration, spacing, as_json, spectrogram, force, quiet):
    """Metadata of CAPTURE, the carriers on the channel grid (strongest first) and the recorder's faults.

    CAPTURE is a WAV/RF64/W64 file (mono: real RF; stereo: I/Q, needs
    --center), either file of a SigMF pair, or a headerless raw file with
    --format, --rate (and --center for I/Q).

    The recorder's faults are estimated from the same pass: DC offset, I/Q
    gain and phase imbalance with the mirror rejection they give, and the
    sample-clock error in ppm from the broadcast carriers on the grid; each
    with a hint of the --correct option that undoes it.

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
    png_path = None
    if spectrogram is not None:
        png_path = check_output(spectrogram, inputs=[info.path, info.data_path], force=force, option="--spectrogram")
        if png_path.suffix.lower() != ".png":
            raise ParameterError(f"--spectrogram {png_path}: the picture is written as PNG; name a .png file")
    bar = progress_for("surveying", quiet)
    try:
        band = band_statistics(reader, spacing_hz=spacing, start_s=start, duration_s=duration, progress=bar)
    finally:
        if bar is not None:
            bar.close()
    result = survey_statistics(band, band_spacing(spacing), DEFAULT_THRESHOLD_DB)
    impairments = estimate_from_statistics(band, result)
    fit = grid_fit(band, result)
    if png_path is not None:
        _write_spectrogram(reader, png_path, result, start, duration, quiet)
    if as_json:
        data = info.to_json()
        data["start_s"] = first / info.fs
        data["duration_s"] = count / info.fs
        data.update(result.to_json())
        data["grid_fit"] = fit.to_json()
        data["impairments"] = impairments.to_json()
        click.echo(json.dumps(data, indent=1, allow_nan=False))
    else:
        click.echo(format_info(info, result, first, count, impairments, fit))
        if capped:
            click.echo(f"          (the first {DEFAULT_SURVEY_SECONDS:g} s of the excerpt by default; --duration S "
                       "surveys more)")


def band_spacing(spacing) -> float:
    """The --spacing value in Hz (already checked by band_statistics)."""
    from ..units import parse_frequency

    return parse_frequency(spacing, "--spacing")


def _write_spectrogram(reader, path, result, start, duration, quiet) -> None:
    from ..band.figures import capture_spectrogram_png
    from ..band.outputs import station_name

    bar = progress_for("spectrogram", quiet)
    try:
        png = capture_spectrogram_png(reader, spacing_hz=result.spacing_hz, start_s=start, duration_s=duration,
                                      stations=[(c.freq_hz, station_name(c.freq_hz)) for c in
                                                sorted(result.carriers, key=lambda c: c.freq_hz)], progress=bar)
    finally:
        if bar is not None:
            bar.close()
    with atomic_path(path) as tmp:
        tmp.write_bytes(png)
