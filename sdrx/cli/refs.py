"""``sdrx refs``: record and verify stored references (thin over :mod:`sdrx.refs`)."""

from __future__ import annotations

import click

from .common import SdrxGroup, progress_for

__all__ = ["command"]


@click.group("refs", cls=SdrxGroup)
def command():
    """Stored references: prove that a chain's output did not drift.

    A cases file (TOML) lists captures, tunings, chains and tolerances;
    `record` stores each case's audio and a manifest, `verify` reruns the
    cases and compares. Examples:

    \b
        sdrx refs record tests/refs/cases.toml --store tests/refs/store
        sdrx refs verify tests/refs/cases.toml --store tests/refs/store --junit refs.xml
    """


@command.command("record")
@click.argument("cases", metavar="CASES.toml", type=click.Path(dir_okay=False))
@click.option("--store", "store", required=True, metavar="DIR",
              help="Store folder (new, empty, or made by an earlier record).")
@click.option("--case", "names", multiple=True, metavar="NAME", help="Record only this case (repeatable).")
@click.option("--update", is_flag=True, help="Replace references that exist already.")
@click.option("--quiet", "-q", is_flag=True, help="No progress bar, no per-case lines.")
def record(cases, store, names, update, quiet):
    """Run each case and store its audio (float WAV) and manifest entry.

    Refuses to replace an existing reference unless --update. Example:

        sdrx refs record cases.toml --store refs --case harbour-1130
    """
    from ..refs.record import record_cases

    bar = progress_for("recording", quiet)

    def show(res):
        if not quiet:
            if bar is not None:
                bar.close()
            click.echo(res.line())

    try:
        results = record_cases(cases, store, names=list(names) or None, update=update, progress=bar,
                               on_result=show)
    finally:
        if bar is not None:
            bar.close()
    if not quiet:
        click.echo(f"{len(results)} reference(s) in {store}")
    return 0


@command.command("verify")
@click.argument("cases", metavar="CASES.toml", type=click.Path(dir_okay=False))
@click.option("--store", "store", required=True, metavar="DIR", help="Store folder made by sdrx refs record.")
@click.option("--case", "names", multiple=True, metavar="NAME", help="Verify only this case (repeatable).")
@click.option("--junit", "junit", default=None, metavar="FILE", help="Write a JUnit XML report for CI.")
@click.option("--failures", "failures", default=None, metavar="DIR",
              help="Folder for difference WAVs and spectra of failing cases "
                   "[default: beside --junit as STEM-failures/, else beside the store as STORE-failures/].")
@click.option("--force", is_flag=True,
              help="Replace an existing --junit file; write into a --failures folder that holds files not made "
                   "by sdrx (what an earlier verify wrote there is always replaced).")
@click.option("--quiet", "-q", is_flag=True, help="No progress bar; failing cases and the count only.")
def verify(cases, store, names, junit, failures, force, quiet):
    """Rerun each case and compare with its stored reference.

    One line per case: PASS/FAIL, the figures and their limits. Exit status
    0 when all pass, 1 when any fails, 2 on bad input. Example:

        sdrx refs verify cases.toml --store refs --junit demo_out/refs.xml --force
    """
    from ..refs.verify import verify_cases

    bar = progress_for("verifying", quiet)

    def show(res):
        if bar is not None:
            bar.close()
        if not quiet or not res.passed:
            click.echo(res.line())

    try:
        report = verify_cases(cases, store, names=list(names) or None, junit=junit, failures_dir=failures,
                              force=force, progress=bar, on_result=show)
    finally:
        if bar is not None:
            bar.close()
    click.echo(report.lines()[-1])
    if report.junit is not None and not quiet:
        click.echo(f"JUnit report: {report.junit}")
    return report.exit_code
