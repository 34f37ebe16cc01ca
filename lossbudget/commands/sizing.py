"""The size budget of a grid: time and memory estimated before solving, refused above it.

A map or an export over a grid of N points costs about N times a per-point figure measured
with ``benchmarks/grid_cost.py`` (the embedded demo design on the development machine, a
2-CPU x86-64 box shared with other work): the estimate is stated as such, with its basis,
and a grid above ``--max-points`` is refused with exit status 2 before anything is solved
or written.
"""

from __future__ import annotations

from dataclasses import dataclass

import click

from lossbudget.commands.common import BadInput


@dataclass(frozen=True, slots=True, kw_only=True)
class PointCost:
    """Measured cost of one operating point of a command: wall time and peak memory."""

    seconds: float
    bytes: float


BASE_BYTES = 0.15e9
"""Peak memory of a command on a tiny grid (imports, matplotlib, openpyxl). [B]"""

COSTS = {
    "map": PointCost(seconds=120e-6, bytes=0.9e3),
    "csv": PointCost(seconds=180e-6, bytes=0.9e3),
    "json": PointCost(seconds=840e-6, bytes=3.4e3),
    "xlsx": PointCost(seconds=9.4e-3, bytes=9.2e3),
}
"""Per-point cost of each output as ``benchmarks/grid_cost.py`` printed it on the development
machine while other work shared its 2 CPUs (map and csv 1000 × 1000, json 300 × 300 with the
loss table, xlsx 100 × 100): map 120.7 us and 851 B, csv 179.9 us and 858 B, json 839.7 us
and 3419 B, xlsx 9410.7 us and 9221 B a point (rounded here). An idle machine is faster (the
1000 × 1000 map took 51.5 s there before the tables were streamed)."""

DEFAULT_MAX_POINTS = 2_000_000
"""The budget in points unless ``--max-points`` says otherwise (.xlsx: see XLSX_MAX_POINTS)."""
XLSX_MAX_POINTS = 50_000
"""The default budget of a workbook: openpyxl writes cell by cell (about 8 min here)."""

ANNOUNCE_POINTS = 20_000
"""From this many points on, the estimate is printed on stderr before solving."""

BASIS = "per-point figures of benchmarks/grid_cost.py, demo design, 2 CPUs"


def _duration(seconds: float) -> str:
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    return f"{seconds / 3600:.1f} h"


def estimate(points: int, output: str) -> tuple[float, float]:
    """Estimated wall time [s] and peak memory [B] of ``points`` points for ``output``."""
    cost = COSTS[output]
    return points * cost.seconds, BASE_BYTES + points * cost.bytes


def check_size(points: int, *, output: str, max_points: int | None, shape: str) -> None:
    """Refuse a grid above the budget (BadInput, exit 2), naming the numbers and the option.

    Parameters
    ----------
    points : int
        Operating points of the grid.
    output : {"map", "csv", "json", "xlsx"}
        What is written (the cost per point differs).
    max_points : int or None
        The budget from ``--max-points``; the default for ``output`` when None.
    shape : str
        The grid as the user gave it ("5,000 × 5,000"), for the message.
    """
    budget = max_points if max_points is not None else (
        XLSX_MAX_POINTS if output == "xlsx" else DEFAULT_MAX_POINTS)
    seconds, memory = estimate(points, output)
    if points <= budget:
        if points >= ANNOUNCE_POINTS:
            click.echo(f"{shape} = {points:,} points: estimated {_duration(seconds)} and "
                       f"{memory / 1e9:.1f} GB of memory ({BASIS})", err=True)
        return
    raise BadInput(
        f"grid of {shape} = {points:,} points is above the size budget of {budget:,} points "
        f"(estimated {_duration(seconds)} and {memory / 1e9:.1f} GB of memory; {BASIS}): "
        f"use fewer points, or raise the budget with --max-points {points}"
    )


max_points_option = click.option(
    "--max-points",
    type=click.IntRange(min=1),
    metavar="N",
    help=f"Size budget: refuse grids of more than N points before solving [-]; default "
    f"{DEFAULT_MAX_POINTS:,} ({XLSX_MAX_POINTS:,} for an .xlsx workbook).",
)
"""The ``--max-points`` option of the commands that sweep a grid."""
