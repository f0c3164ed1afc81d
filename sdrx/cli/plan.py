"""``sdrx plan``: frequency plan of an IF over a band, and the loaded Q a rejection needs."""

from __future__ import annotations

import json

import click

from ..analysis.plan import PRACTICAL_LOADED_Q, capacitance_verdict, frequency_plan
from ..errors import ParameterError
from .common import SdrxCommand

__all__ = ["command", "format_plan", "format_comparison"]


def _k(hz) -> str:
    """Frequency in kHz, compact (``1227.5``)."""
    return f"{hz / 1e3:.6g}"


def _q_table(qt, lines):
    where_order = ("if", "band_bottom", "band_top")
    heads = {}
    for r in qt.rows:
        heads.setdefault(r.where, r.f0_hz)
    cols = [w for w in where_order if w in heads]
    lines.append(f"loaded Q per circuit for {qt.reject_db:g} dB rejection at {_k(qt.offset_hz)} kHz offset (exact forms):")
    title = {"if": "IF", "band_bottom": "bottom", "band_top": "top"}
    lines.append(f"  {'stages':<18}" + "".join(f"{title[w] + ' ' + _k(heads[w]) + 'k':>16}" for w in cols))
    keys = []
    for r in qt.rows:
        if (r.kind, r.stages) not in keys:
            keys.append((r.kind, r.stages))
    for kind, n in keys:
        label = f"{n} x {'single-tuned' if kind == 'single' else 'double-tuned'}"
        cells = []
        for w in cols:
            r = next(x for x in qt.rows if x.where == w and x.kind == kind and x.stages == n)
            cells.append(f"{r.q_loaded:>15.1f}{'*' if r.practical else ' '}")
        lines.append(f"  {label:<18}" + "".join(cells))
    lines.append("  * practical; " + qt.verdict())


def format_plan(plan) -> str:
    """The compact terminal table of one plan."""
    lines = []
    lo, hi = plan.band_hz
    lines.append(f"IF {_k(plan.if_hz)} kHz, {plan.injection}-side LO, band {_k(lo)}-{_k(hi)} kHz, "
                 f"{len(plan.channels)} channels every {_k(plan.spacing_hz)} kHz")
    l0, l1 = plan.lo_range_hz
    i0, i1 = plan.image_range_hz
    lines.append(f"LO range {_k(l0)}-{_k(l1)} kHz: tuning ratio {plan.lo_tuning_ratio:.4g}, "
                 f"capacitance ratio {plan.lo_capacitance_ratio:.3g} (= ratio squared): "
                 f"{capacitance_verdict(plan.lo_capacitance_ratio)[1]}")
    lines.append(f"RF section: tuning ratio {plan.rf_tuning_ratio:.4g}, capacitance ratio {plan.rf_capacitance_ratio:.3g}: "
                 f"{capacitance_verdict(plan.rf_capacitance_ratio)[1]}")
    lines.append(f"image range {_k(i0)}-{_k(i1)} kHz; "
                 f"{sum(c.image_channel_hz is not None for c in plan.channels)} channels have their image inside the band")
    lines.append("")
    lines.append(f"{'tune':>8} {'LO':>8} {'image':>8} {'img on':>8} {'half-IF':>8}  spurs in band, kHz (order)")
    for c in plan.channels:
        img = _k(c.image_channel_hz) if c.image_channel_hz is not None else "-"
        spurs = " ".join(f"{_k(s.rf_hz)}({s.order})" for s in sorted(c.spurs, key=lambda s: (s.order, s.rf_hz))[:4])
        more = f" +{len(c.spurs) - 4}" if len(c.spurs) > 4 else ""
        lines.append(f"{_k(c.tune_hz):>8} {_k(c.lo_hz):>8} {_k(c.image_hz):>8} {img:>8} "
                     f"{_k(c.half_if_spur_hz):>8}  {spurs or '-'}{more}")
    if plan.q_required is not None:
        lines.append("")
        _q_table(plan.q_required, lines)
    return "\n".join(lines)


def format_comparison(plans) -> str:
    """Several IFs over the same band, side by side."""
    w = 22
    rows = [
        ("IF, kHz", lambda p: _k(p.if_hz)),
        ("LO range, kHz", lambda p: f"{_k(p.lo_range_hz[0])}-{_k(p.lo_range_hz[1])}"),
        ("LO tuning ratio", lambda p: f"{p.lo_tuning_ratio:.4g}"),
        ("LO capacitance ratio", lambda p: f"{p.lo_capacitance_ratio:.3g} {capacitance_verdict(p.lo_capacitance_ratio)[0]}"),
        ("image range, kHz", lambda p: f"{_k(p.image_range_hz[0])}-{_k(p.image_range_hz[1])}"),
        ("images inside band", lambda p: str(sum(c.image_channel_hz is not None for c in p.channels))),
        ("half-IF spur in band", lambda p: str(sum(p.band_hz[0] <= c.half_if_spur_hz <= p.band_hz[1]
                                                    for c in p.channels))),
        ("spurs in band, total", lambda p: str(sum(len(c.spurs) for c in p.channels))),
        ("lowest spur order", lambda p: str(min((s.order for c in p.channels for s in c.spurs), default="-"))),
    ]
    if all(p.q_required is not None for p in plans):
        qt0 = plans[0].q_required
        for kind, n in (("single", 1), ("single", 2), ("single", 3), ("single", 4), ("double", 1), ("double", 2)):
            label = f"Q at IF, {n} x {kind}"
            rows.append((label, lambda p, kind=kind, n=n: "{:.1f}{}".format(*next(
                (r.q_loaded, "*" if r.practical else "") for r in p.q_required.rows
                if r.where == "if" and r.kind == kind and r.stages == n))))
        note = (f"Q: loaded Q per circuit for {qt0.reject_db:g} dB at {_k(qt0.offset_hz)} kHz; "
                f"* practical (<= {qt0.practical_q:g}, common practice)")
    else:
        note = None
    lo, hi = plans[0].band_hz
    lines = [f"band {_k(lo)}-{_k(hi)} kHz, {plans[0].injection}-side LO, spacing {_k(plans[0].spacing_hz)} kHz"]
    for label, fn in rows:
        lines.append(f"{label:<{w}}" + "".join(f"{fn(p):>{w}}" for p in plans))
    if note:
        lines.append(note)
        for p in plans:
            lines.append(f"IF {_k(p.if_hz)} kHz: {p.q_required.verdict()}")
    return "\n".join(lines)


@click.command("plan", cls=SdrxCommand)
@click.option("--if", "if_list", multiple=True, required=True, metavar="F",
              help="Intermediate frequency, e.g. 455k; repeat to compare several IFs side by side.")
@click.option("--band", required=True, metavar="LO:HI", help="Band edges, e.g. 540k:1700k.")
@click.option("--spacing", default="10k", show_default=True, metavar="F", help="Channel spacing (9k or 10k at MF).")
@click.option("--injection", type=click.Choice(["high", "low"]), default="high", show_default=True,
              help="LO above (high) or below (low) the tuned frequency.")
@click.option("--reject", metavar="DB", default=None, help="Rejection to reach at --at, dB (with --at).")
@click.option("--at", "at", metavar="OFFSET", default=None, help="Offset from the centre for --reject, e.g. 10k.")
@click.option("--max-q", default=PRACTICAL_LOADED_Q, show_default=True, type=float,
              help="Loaded Q counted as practical for LC circuits in the verdict (common practice).")
@click.option("--json", "as_json", is_flag=True, help="Print the plan as JSON ({'plans': [...]} for several --if).")
def command(if_list, band, spacing, injection, reject, at, max_q, as_json):
    """Frequency plan: LO and image ranges, per-channel images and mixer spurs, required Q.

    Example:

        sdrx plan --if 455k --band 540k:1700k --spacing 10k --reject 40 --at 10k

    Compare IFs: sdrx plan --if 455k --if 10.7M --band 540k:1700k
    """
    plans = [frequency_plan(f, band, spacing, injection, reject_db=reject, at_hz=at, practical_q=max_q)
             for f in if_list]
    seen = set()
    for p in plans:
        if p.if_hz in seen:
            raise ParameterError(f"--if {p.if_hz:g}: given twice; give each IF once")
        seen.add(p.if_hz)
    if as_json:
        data = plans[0].to_json() if len(plans) == 1 else {"plans": [p.to_json() for p in plans]}
        click.echo(json.dumps(data, indent=1, sort_keys=False, allow_nan=False))
    elif len(plans) == 1:
        click.echo(format_plan(plans[0]))
    else:
        click.echo(format_comparison(plans))
