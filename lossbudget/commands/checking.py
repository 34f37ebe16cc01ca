"""``lossbudget check``: every part's limits over the operating envelope, with derating."""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import click

from lossbudget.commands.common import (
    EXIT_LIMIT_FAILED,
    EXIT_OK,
    BadInput,
    design_argument,
    read_design,
    reports_bad_input,
)
from lossbudget.output.tables import aligned_table
from lossbudget.units import format_quantity

_DIMS = {"degC": "temperature", "V": "voltage", "A": "current", "T": "flux_density",
         "vin": "voltage", "vout": "voltage", "load": "current", "ambient": "temperature",
         "fsw": "frequency"}


def _value(x: float, unit: str) -> str:
    if not math.isfinite(x):
        return "-"
    if unit == "h":
        return f"{x:,.0f} h"
    if unit == "degC":
        return f"{x:.1f} degC"
    return format_quantity(x, _DIMS[unit], digits=4)


def _margin(x: float, unit: str) -> str:
    if not math.isfinite(x):
        return "-"
    return f"{x:+.1f} K" if unit == "K" else f"{x * 100:+.1f} %"


def _wrap(text: str, indent: str, hang: str = "    ") -> list[str]:
    return textwrap.wrap(text, width=100, initial_indent=indent,
                         subsequent_indent=indent + hang, break_on_hyphens=False)


def limit_table(report) -> list[str]:
    """The limit rows as an aligned table with units, then the basis of each design limit."""
    varying = report.varying_axes
    bases: list[str] = []
    rows = []
    for r in report.rows:
        if r.basis not in bases:
            bases.append(r.basis)
        where = ", ".join(format_quantity(r.where[a], _DIMS[a], digits=4)
                          for a in varying if a in r.where)
        rows.append([
            r.part, r.quantity, _value(r.worst, r.unit), where or "-",
            _value(r.design_limit, r.unit), _value(r.absolute_limit, r.unit),
            _margin(r.margin, r.margin_unit), r.status, f"[{bases.index(r.basis) + 1}]",
        ])
    for part, quantity, key in report.not_checked:  # a limit without its rating
        basis = f"not checked: {key} would enable it"
        if basis not in bases:
            bases.append(basis)
        rows.append([part, quantity, "-", "-", "-", "-", "-", "not checked",
                     f"[{bases.index(basis) + 1}]"])
    header = ["part", "quantity", "worst", f"where ({', '.join(varying)})", "design limit",
              "absolute limit", "margin", "status", "basis"]
    lines = [aligned_table(header, rows, right=[False, False, True, False, True, True, True,
                                                 False, False], indent="  ")]
    lines.append("  margin: kelvin for temperatures, % of the design limit otherwise")
    lines.append("")
    lines.append("  basis of each design limit:")
    for k, b in enumerate(bases, start=1):
        lines.extend(_wrap(f"[{k}] {b}", "    "))
    return lines


def check_report(report) -> str:
    """The text report of a :class:`~lossbudget.limits.LimitReport`."""
    fixed = [a for a, values in report.envelope.items() if len(values) == 1]
    lines = [
        f"{report.design_name}: limits over the operating envelope",
        f"  corner: {report.corner}-case part values"
        + (" (max resistances, drops, charges and leakage; min capacitance, inductance and "
           "saturation current)" if report.corner == "worst" else " (typical: not a worst case)"),
        f"  derating: {report.derating}",
    ]
    if report.calibration:
        lines.extend(_wrap(report.calibration, "  "))
    if fixed:
        lines.append("  throughout: " + ", ".join(
            f"{a} {format_quantity(report.envelope[a][0], _DIMS[a])}" for a in fixed))
    lines.append("")
    lines.extend(limit_table(report))
    notes = [(r.part, r.quantity, r.note) for r in report.rows if r.note]
    if notes:
        lines.append("  notes:")
        for p, q, n in notes:
            lines.extend(_wrap(f"{p} {q}: {n}", "    "))
    lines.extend(_wrap(f"grid: {report.grid}", "  "))
    lines.append("")
    lines.append(f"  worst status: {report.worst_status}" + (
        f" ({len(report.not_checked)} limits not checked: no rating given)"
        if report.not_checked else ""))
    lines.append("")
    for text in report.cautions:
        lines.extend(_wrap(f"caution: {text}", "  "))
    return "\n".join(lines)


@click.command()
@design_argument
@click.option(
    "--derating",
    type=click.Choice(["none", "moderate", "conservative", "custom"]),
    help="Derating profile [-]; default the design's limits.derating. none: the absolute "
    "ratings; moderate, conservative: the built-in tables (each row names its document); "
    "custom: the design's [limits.margins] rows, moderate for the rows they do not name. A "
    "named profile ignores the design's [limits.margins].",
)
@click.option("--strict", is_flag=True, help="Exit 1 on a caution too, not only on a fail.")
@click.option(
    "--chart",
    type=click.Path(dir_okay=False, path_type=Path),
    help="Also write the margin chart (one bar per limit row) to this .png, .svg or .pdf.",
)
@reports_bad_input
def check(design: Path, derating: str | None, strict: bool, chart: Path | None) -> None:
    """Check every part's limits over the operating envelope at worst-case part values.

    Input voltage x output voltage x load up to rated x ambient, each part's worst point
    refined; design limits from the derating profile. Exit status: 0 all ok; 1 a limit
    failed (or, with --strict, a caution); 2 bad input.
    """
    from lossbudget.limits import check_limits

    if chart is not None and chart.suffix.lower() not in (".png", ".svg", ".pdf"):
        raise BadInput(f"--chart: expected a .png, .svg or .pdf file name, got {str(chart)!r}")
    report = check_limits(read_design(design), derating=derating, corner="worst")
    click.echo(check_report(report))
    if chart is not None:
        from lossbudget.output.plots import margin_chart

        click.echo(f"  margin chart: {margin_chart(report, chart)}")
    bad = ("fail", "caution") if strict else ("fail",)
    raise click.exceptions.Exit(EXIT_LIMIT_FAILED if report.worst_status in bad else EXIT_OK)
