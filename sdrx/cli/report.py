"""``sdrx report``: selectivity and image report of a chain at one tuning (JSON, PNG, HTML)."""

from __future__ import annotations

import click

from ..errors import ParameterError
from .common import (SdrxCommand, capture_kwargs, capture_options, correction_options, full_scale_option,
                     progress_for)

__all__ = ["command"]


@click.command("report", cls=SdrxCommand)
@click.argument("chain", metavar="SPEC|PRESET")
@click.option("--tune", required=True, metavar="F", help="Tuned carrier, e.g. 1130k.")
@click.option("--capture", "capture", default=None, metavar="CAPTURE",
              help="Also list the carriers of this capture near the tuning and draw its spectrum.")
@click.option("--spacing", default="10k", show_default=True, metavar="F", help="Channel spacing (9k or 10k at MF).")
@click.option("--path", "path", type=click.Choice(["fast", "exact"]), default="fast", show_default=True,
              help="Execution path used for the measured figures.")
@click.option("--points", default=31, show_default=True, type=int,
              help="Test carriers across +-3 channel spacings for the measured curve.")
@click.option("--no-measure", is_flag=True, help="Designed figures only (skip the test-carrier runs).")
@click.option("--noise-figure", "noise_figure", default=None, metavar="DB",
              help="Noise figure of the measured sensitivity (default: the spec's frontend.noise_figure_db, "
                   "else 10 dB).")
@full_scale_option
@click.option("-o", "--output", "out_dir", required=True, metavar="DIR",
              help="Folder for report.json, report.html and the PNG figures (created if missing).")
@click.option("--force", is_flag=True, help="Replace report files already in DIR.")
@click.option("--quiet", is_flag=True, help="No progress bar and no summary line.")
@correction_options
@capture_options
def command(chain, tune, capture, spacing, path, points, no_measure, noise_figure, full_scale_dbm, out_dir, force,
            quiet, correct, ppm,
            datatype, rate, center, start, duration):
    """Selectivity, image and datasheet report: designed and measured figures, sensitivity, fidelity, THD.

    Example:

        sdrx report medium --tune 1130k -o demo_out/report

    Writes DIR/report.json, DIR/report.html (self-contained, opens from disk)
    and DIR/*.png. With --capture, the carriers near the tuning and the
    capture's spectrum are added (of the corrected capture with --correct).
    --full-scale-dbm gives the capture's carriers in dBm beside dBFS and is
    the full scale of the measured sensitivity.
    """
    from ..report.build import build_report, report_files, write_report
    from ..units import parse_seconds
    from pathlib import Path

    if capture is None:
        # these options describe the capture; without one they would be silently ignored
        for name, value in (("--format", datatype), ("--rate", rate), ("--center", center),
                            ("--duration", duration), ("--ppm", ppm),
                            ("--correct", None if correct == "none" else correct)):
            if value is not None:
                raise ParameterError(f"{name} {value}: only applies with --capture CAPTURE")
        if parse_seconds(start, "--start") != 0:
            raise ParameterError(f"--start {start}: only applies with --capture CAPTURE")

    if full_scale_dbm is not None and capture is None and no_measure:
        raise ParameterError(f"--full-scale-dbm {full_scale_dbm}: only applies with --capture CAPTURE or to the "
                             "measured figures (drop --no-measure)")
    nf = None
    if noise_figure is not None:
        from ..chain.spec import check_noise_figure_db
        from ..units import parse_db

        if no_measure:
            raise ParameterError(f"--noise-figure {noise_figure}: only applies to the measured figures (drop --no-measure)")
        nf = check_noise_figure_db(parse_db(noise_figure, "--noise-figure"), "--noise-figure")

    # refuse an existing output before any work
    d = Path(out_dir)
    if d.is_dir() and not force:
        from ..fileio import check_output

        for p in report_files(d, {}):
            check_output(p, force=force, option="-o")
    start_s = parse_seconds(start, "--start")
    duration_s = None if duration is None else parse_seconds(duration, "--duration", allow_zero=False)
    bar = progress_for("measuring", quiet)
    try:
        rep = build_report(chain, tune, spacing_hz=spacing, capture=capture, path=path, measure=not no_measure,
                           points=points, start_s=start_s, duration_s=duration_s, progress=bar, noise_figure_db=nf,
                           capture_kw=capture_kwargs(datatype, rate, center) if capture else None,
                           correct=correct if capture else None, ppm=ppm, full_scale_dbm=full_scale_dbm)
    finally:
        if bar is not None:
            bar.close()
    inputs = [capture] if capture else []
    if Path(chain).is_file():
        inputs.append(chain)
    written = write_report(rep, out_dir, force=force, inputs=inputs)
    if not quiet:
        html = next(p for p in written if p.name == "report.html")
        click.echo(str(html))
