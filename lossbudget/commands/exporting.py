"""``lossbudget export``: the loss budget over a grid as a workbook, CSV tables or JSON.

The grid options are those of ``lossbudget map`` (their parsers live in
:mod:`lossbudget.commands.mapping`); the file's suffix chooses the writer of
:mod:`lossbudget.output.workbook`. Nothing is written until the budget is solved, and then
atomically: a failed export leaves no partial file and any previous file untouched.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import click
import numpy as np

from lossbudget.cautions import CAUTIONS
from lossbudget.commands.common import (
    BadInput,
    design_argument,
    nothing_solved,
    quantity,
    read_design,
    reports_bad_input,
)
from lossbudget.commands.mapping import (
    LONG_TABLE_POINTS,
    _progress,
    grid_options,
    load_points,
    vin_axis,
)
from lossbudget.commands.sizing import check_size, max_points_option
from lossbudget.output.tables import aligned_table
from lossbudget.units import format_quantity

SUFFIXES = (".xlsx", ".csv", ".json")


def _span(values: np.ndarray, dimension: str) -> str:
    lo, hi = float(np.min(values)), float(np.max(values))
    if math.isclose(lo, hi):
        return format_quantity(lo, dimension)
    return f"{format_quantity(lo, dimension)} to {format_quantity(hi, dimension)}"


@click.command("export")
@design_argument
@click.option(
    "-o",
    "--output",
    required=True,
    metavar="FILE",
    type=click.Path(dir_okay=False, path_type=Path),
    help="File to write: .xlsx (the workbook), .csv (the point table there, the loss "
    "and stress tables beside it as STEM-losses.csv and STEM-stresses.csv) or "
    ".json (the three tables and the provenance). The folder must exist.",
)
@grid_options
@click.option(
    "--corner",
    type=click.Choice(["typ", "worst"]),
    default="typ",
    show_default=True,
    help="Part values: typical or worst case.",
)
@click.option(
    "--with-limits/--no-limits",
    default=True,
    show_default=True,
    help="Check the limits over the design's envelope (worst-case part values) and "
    "show the rows on the workbook's summary sheet (.xlsx only).",
)
@click.option(
    "--long-table",
    is_flag=True,
    help=f"Write the loss table (.csv, .json) even above {LONG_TABLE_POINTS:,} points.",
)
@max_points_option
@reports_bad_input
def export(
    design: Path,
    output: Path,
    vin_range,
    load_range,
    load_pct_range,
    log_load,
    ambient,
    corner,
    with_limits,
    long_table,
    max_points,
) -> None:
    """Write the loss budget over input voltage × load as a workbook (.xlsx), CSV tables
    (.csv) or one JSON document (.json), chosen by the suffix of FILE."""
    from lossbudget.output.workbook import check_target, write_tables, write_workbook
    from lossbudget.sweep import sweep_rows, weighted_efficiency

    suffix = output.suffix.lower()
    if suffix not in SUFFIXES:
        raise BadInput(
            f"-o {output}: expected a file name ending in .xlsx, .csv or .json, "
            f"got {suffix or 'no suffix'!r}"
        )
    d = read_design(design)
    vin = vin_axis(d, vin_range)
    load = load_points(d, load=load_range, load_pct=load_pct_range, log_load=log_load)
    amb = quantity(ambient, "temperature", "--ambient")
    check_target(output, suffixes=SUFFIXES)  # a folder that is missing fails before the solve
    check_size(vin.size * load.size, output=suffix[1:], max_points=max_points,
               shape=f"{vin.size:,} × {load.size:,}")
    budget = sweep_rows(
        d, vin=vin, load=load, ambient=amb, corner=corner, progress=_progress(vin.size * load.size)
    )
    lines = [
        f"{d.name}: {vin.size} × {load.size} points (vin {_span(vin, 'voltage')}, load "
        f"{_span(load, 'current')}), ambient "
        f"{_span(np.asarray(budget.coords['ambient']), 'temperature')}, {corner} part values",
    ]
    flagged = int(np.count_nonzero(budget.flagged))
    if flagged:
        lines.append(f"  {flagged} point(s) flagged: blank cells, the reason in each row")
    if suffix == ".xlsx":
        weighted = weighted_efficiency(d, ambient=amb, corner=corner)
        report = None
        if with_limits:
            try:
                from lossbudget.limits import check_limits
            except ImportError:
                lines.append("  limit check skipped: lossbudget.limits is not available")
            else:
                report = check_limits(d)
                lines.append(
                    f"  limit check ({report.corner} part values, derating "
                    f"{report.derating}): worst status {report.worst_status}"
                )
        files = [
            (
                "workbook",
                write_workbook(output, budget=budget, report=report, weighted=weighted, design=d),
            )
        ]
    else:
        points = vin.size * load.size
        with_losses = long_table or points <= LONG_TABLE_POINTS
        if not with_losses:
            lines.append(
                f"  loss table left out: {points:,} points is above {LONG_TABLE_POINTS:,} "
                "(add --long-table to write it)"
            )
        written = write_tables(output, budget=budget, long_table=with_losses)
        names = (
            ("point table", "loss table", "stress table")
            if with_losses
            else ("point table", "stress table")
        )
        if suffix == ".json":
            names = ("tables and provenance",)
        files = list(zip(names, written, strict=True))
    click.echo("\n".join(lines))
    click.echo("")
    click.echo(aligned_table(("wrote", "file"), [(w, str(p)) for w, p in files]))
    click.echo("")
    for text in CAUTIONS:
        click.echo(textwrap.fill(f"caution: {text}", width=96, subsequent_indent="  "))
    nothing_solved(int(np.size(budget.flagged)), flagged)
