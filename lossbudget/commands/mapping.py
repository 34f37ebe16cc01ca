"""``lossbudget map`` and ``lossbudget demo``: the efficiency map, its plots and tables.

``map`` sweeps a design over input voltage × load, writes the four plots, the point table
and (up to ~1e5 points, or when asked) the loss table, and prints a one-screen summary with
the weighted efficiencies. ``demo`` does the whole job on the embedded demo design: the
breakdown at the nominal point, the map, and the limit check and workbook.
"""

from __future__ import annotations

import importlib.resources
import math
import sys
import textwrap
from dataclasses import dataclass
from pathlib import Path

import click
import numpy as np

from lossbudget.cautions import CAUTIONS
from lossbudget.commands.checking import limit_table
from lossbudget.commands.common import (
    BadInput,
    design_argument,
    nothing_solved,
    quantity,
    read_design,
    reports_bad_input,
)
from lossbudget.commands.point import point_report
from lossbudget.commands.sizing import check_size, max_points_option
from lossbudget.design import Design, load_design
from lossbudget.errors import DesignError
from lossbudget.limits import temperature_design_limits
from lossbudget.output.files import OutputSet, output_set
from lossbudget.output.tablefiles import table_chunks, write_csv
from lossbudget.output.tables import aligned_table
from lossbudget.units import format_quantity

LONG_TABLE_POINTS = 100_000
MAX_AXIS_POINTS = 10_000_000  # an axis is built before the size budget is checked
PROGRESS_POINTS = 20_000
SUMMARY_ROWS = 8
FILE_NAMES = {
    "efficiency map": "efficiency_map",
    "efficiency curves": "efficiency_curves",
    "loss breakdown": "loss_breakdown",
    "temperatures": "temperatures",
    "loss bars": "loss_bars",
}


# --------------------------------------------------------------------------------------------
# options → axes
# --------------------------------------------------------------------------------------------


def parse_range(
    text: str, dimension: str, option: str, *, nonnegative: bool = False
) -> tuple[float, float, int]:
    """Parse ``START:STOP:COUNT`` (bounds may carry units: "0.2 A:4 A:40").

    Raises :class:`~lossbudget.cli.BadInput` naming the option on any malformed part.
    """
    parts = text.split(":")
    if len(parts) != 3:
        raise BadInput(f'{option}: expected START:STOP:COUNT (e.g. "18 V:32 V:15"), got "{text}"')
    start = quantity(parts[0].strip(), dimension, f"{option} start", nonnegative=nonnegative)
    stop = quantity(parts[1].strip(), dimension, f"{option} stop", nonnegative=nonnegative)
    try:
        count = int(parts[2].strip())
    except ValueError:
        raise BadInput(
            f'{option}: expected an integer point count after the second ":", '
            f'got "{parts[2].strip()}"'
        ) from None
    if count > MAX_AXIS_POINTS:
        raise BadInput(
            f"{option}: expected at most {MAX_AXIS_POINTS:,} points on one axis, got {count:,}"
        )
    return float(start), float(stop), count


def _percent(text: str, option: str) -> tuple[float, float, int]:
    """A percent range: bare numbers are percent ("5:100:40"), "5 %" is read as 5 percent."""
    parts = text.split(":")
    if len(parts) != 3:
        raise BadInput(
            f"{option}: expected START:STOP:COUNT in percent of rated (e.g. "
            f'"5:100:40"), got "{text}"'
        )
    bounds = []
    for part, name in zip(parts[:2], ("start", "stop"), strict=True):
        value = quantity(part.strip(), "fraction", f"{option} {name}", nonnegative=True)
        bounds.append(value * 100.0 if "%" in part else value)
    _, _, count = parse_range(f"0:0:{parts[2]}", "fraction", option, nonnegative=True)
    return bounds[0], bounds[1], count


def vin_axis(design: Design, text: str | None) -> np.ndarray:
    """The input-voltage axis: from ``--vin`` or the design's range with 15 points. [V]"""
    op = design.operating
    if text is None:
        if op.vin.min == op.vin.max:
            return np.array([op.vin.min])
        return np.linspace(op.vin.min, op.vin.max, 15)
    start, stop, count = parse_range(text, "voltage", "--vin")
    if count < 1 or (count == 1 and start != stop):
        raise BadInput(
            f"--vin: expected 2 or more points between two voltages (1 point only "
            f'for START = STOP), got "{text}"'
        )
    if start <= 0 or stop <= 0:
        raise BadInput(f'--vin: expected input voltages above 0 V, got "{text}"')
    if stop < start:
        raise BadInput(f'--vin: expected START <= STOP (an ascending axis), got "{text}"')
    return np.linspace(start, stop, count)


def load_points(
    design: Design, *, load: str | None, load_pct: str | None, log_load: bool
) -> np.ndarray:
    """The load axis from ``--load`` or ``--load-pct`` (default 5 % to 100 %, 40 points). [A]"""
    from lossbudget.sweep import load_axis

    if load is not None and load_pct is not None:
        raise BadInput("give --load or --load-pct, not both")
    if load is not None:
        option, (start, stop, count), percent = (
            "--load",
            parse_range(load, "current", "--load", nonnegative=True),
            False,
        )
    else:
        option = "--load-pct"
        start, stop, count = (5.0, 100.0, 40) if load_pct is None else _percent(load_pct, option)
        percent = True
    try:
        return load_axis(design, start=start, stop=stop, count=count, log=log_load, percent=percent)
    except DesignError as exc:
        raise BadInput(f"{option}: " + "; ".join(exc.problems)) from None


# --------------------------------------------------------------------------------------------
# the job
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class MapRun:
    """What a map run produced: the budget, its summary, the weighted figures, the files."""

    budget: object
    summary: object
    weighted: tuple
    files: tuple[tuple[str, Path], ...]
    notes: tuple[str, ...]


def _progress(total_points: int):
    """A simple progress line on stderr for long sweeps (None for short ones)."""
    if total_points < PROGRESS_POINTS:
        return None
    tty = sys.stderr.isatty()

    def report(done: int, total: int) -> None:
        text = f"sweeping: {done}/{total} input-voltage rows ({done * 100 // total} %)"
        if tty:
            click.echo("\r" + text, err=True, nl=done == total)
        else:
            click.echo(text, err=True)

    return report


@dataclass(frozen=True, slots=True, kw_only=True)
class ExactRows:
    """The per-input-voltage figures' rows, solved at the design's exact input voltages.

    ``nominal``: min, nominal and max input voltage × the map's loads at the map's ambient,
    typical part values. ``hot``: the same rows at the maximum ambient with worst-case part
    values; ``hot_vin`` is the one of them with the least temperature margin to the design
    limits after derating.
    """

    vins: tuple[float, ...]
    nominal: object
    hot: object
    hot_vin: float
    hot_what: str
    design_limits: dict

    @classmethod
    def solve(cls, design: Design, *, load: np.ndarray, ambient: float | None) -> ExactRows:
        from lossbudget.sweep import sweep_rows

        op = design.operating
        vins = np.unique([op.vin.min, op.vin.nom, op.vin.max])
        limits = {part: value for part, (value, _) in temperature_design_limits(design).items()}
        nominal = sweep_rows(design, vin=vins, load=load, ambient=ambient)
        hot = sweep_rows(design, vin=vins, load=load, ambient=op.ambient.max, corner="worst")
        parts = [p for p in limits if p in hot.temperatures]
        with np.errstate(invalid="ignore"):
            excess = np.array([hot.temperatures[p] - limits[p] for p in parts])  # part, vin, load
            # no temperature limit given (a concept-stage design): no margin to rank by
            closest = (np.nanmax(excess, axis=(0, 2), initial=-np.inf) if parts
                       else np.full(vins.size, -np.inf))
        # the row with the most unsolved points (runaway) first, then the least margin
        unsolved = np.count_nonzero(hot.flagged, axis=1)
        row = int(np.lexsort((closest, unsolved))[-1])
        what = "hot corner|least temperature margin of min/nom/max, unsolved points first" if (
            vins.size > 1) else (
            "hot corner"
        )
        return cls(
            vins=tuple(float(v) for v in vins),
            nominal=nominal,
            hot=hot,
            hot_vin=float(vins[row]),
            hot_what=what,
            design_limits=limits,
        )


def mechanism_bars(design: Design, path: Path, *, ambient: float | None) -> Path:
    """Every loss mechanism at rated load: nominal point and worst case, as bars.

    Nominal: nominal input voltage, the map's ambient, typical part values. Worst case: the
    maximum ambient with worst-case part values at the input voltage (min, nom or max) of
    the highest total loss.
    """
    from lossbudget.output import plots
    from lossbudget.solver import solve

    op = design.operating
    amb = op.ambient.nom if ambient is None else float(ambient)
    nominal = solve(design, vin=op.vin.nom, load_fraction=1.0, ambient=amb)
    vins = np.unique([op.vin.min, op.vin.nom, op.vin.max])
    hot = solve(design, vin=vins, load_fraction=1.0, ambient=op.ambient.max, corner="worst")
    total = np.where(hot.flagged, np.inf, hot.total_loss)  # an unsolved one is the worst
    vin_worst = float(vins[int(np.argmax(total))])
    worst = solve(design, vin=vin_worst, load_fraction=1.0, ambient=op.ambient.max,
                  corner="worst")
    rated = format_quantity(op.iout_rated, "current")
    return plots.mechanism_bars(
        nominal,
        worst,
        path,
        nominal_what=f"nominal: vin {_v(op.vin.nom)}, {rated}, ambient "
        f"{_degc(amb)}, typical parts",
        worst_what=f"worst case: vin {_v(vin_worst)} (highest loss of min/nom/max), {rated}, "
        f"ambient {_degc(op.ambient.max)}, worst-case parts",
    )


def run_map(
    design: Design,
    *,
    vin: np.ndarray,
    load: np.ndarray,
    ambient: float | None,
    files: OutputSet,
    fmt: str,
    long_table: bool,
) -> MapRun:
    """Sweep, plot, tabulate and summarise a map into an output set (moved in by its owner).

    The tables are streamed to disk block by block; the files listed are where the set's
    files end up.
    """
    from lossbudget.output import plots
    from lossbudget.sweep import map_summary, sweep_rows, weighted_efficiency

    op = design.operating
    budget = sweep_rows(
        design, vin=vin, load=load, ambient=ambient, progress=_progress(vin.size * load.size)
    )
    summary = map_summary(budget, rated_load=op.iout_rated)
    weighted = weighted_efficiency(design, ambient=ambient)
    written: list[tuple[str, Path]] = []
    notes: list[str] = []
    rated = op.iout_rated
    target = {what: files.stage(f"{stem}.{fmt}") for what, stem in FILE_NAMES.items()}
    if vin.size >= 2 and load.size >= 2:
        written.append(
            (
                "efficiency map",
                plots.efficiency_map(budget, target["efficiency map"], rated_load=rated),
            )
        )
    else:
        files.drop(target["efficiency map"].name)  # not an earlier map's beside this set
        notes.append("efficiency map skipped: it needs 2 or more input voltages and loads")
    exact = ExactRows.solve(design, load=load, ambient=ambient)
    written.append(
        (
            "efficiency curves",
            plots.efficiency_curves(
                exact.nominal, target["efficiency curves"], vins=exact.vins, rated_load=rated
            ),
        )
    )
    written.append(
        (
            "loss breakdown",
            plots.loss_breakdown(
                exact.nominal, target["loss breakdown"], vin=op.vin.nom, rated_load=rated
            ),
        )
    )
    written.append(
        (
            "temperatures",
            plots.temperature_curves(
                exact.nominal,
                target["temperatures"],
                vin=op.vin.nom,
                rated_load=rated,
                design_limits=exact.design_limits,
                hot=exact.hot,
                hot_vin=exact.hot_vin,
                hot_what=exact.hot_what,
                what="nominal corner"
                if ambient is None or ambient == op.ambient.nom
                else "the map's ambient",
            ),
        )
    )
    written.append(("loss bars", mechanism_bars(design, target["loss bars"], ambient=ambient)))
    written.append(("point table", write_csv(files.stage("points.csv"),
                                             table_chunks(budget, "point_table"))))
    if summary.points <= LONG_TABLE_POINTS or long_table:
        written.append(("loss table", write_csv(files.stage("losses.csv"),
                                                table_chunks(budget, "loss_table"))))
    else:
        files.drop("losses.csv")  # no loss table of an earlier map beside these points
        notes.append(
            f"losses.csv skipped: {summary.points:,} points is above "
            f"{LONG_TABLE_POINTS:,} (add --long-table to write it)"
        )
    return MapRun(
        budget=budget,
        summary=summary,
        weighted=weighted,
        files=tuple((what, files.final(path)) for what, path in written),
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# the text
# --------------------------------------------------------------------------------------------


def _pct(x: float) -> str:
    return "n/a" if not math.isfinite(x) else f"{x * 100:.2f} %"


def _v(x: float) -> str:
    return format_quantity(x, "voltage")


def _degc(x: float) -> str:
    return format_quantity(x, "temperature").replace("degC", "°C")


def _a(x: float) -> str:
    return format_quantity(x, "current")


def map_report(design: Design, run: MapRun, *, cautions: bool = True, files: bool = True) -> str:
    """The one-screen summary of a map run."""
    s = run.summary
    b = run.budget
    rated = design.operating.iout_rated
    vin = np.asarray(b.coords["vin"])[:, 0]
    load = np.asarray(b.coords["load"])[0, :]
    amb = float(np.asarray(b.coords["ambient"]).ravel()[0])
    lines = [
        f"{design.name}: efficiency map, {vin.size} × {load.size} points "
        f"(vin {_v(vin.min())} to {_v(vin.max())}, load {_a(load.min())} to {_a(load.max())}), "
        f"ambient {format_quantity(amb, 'temperature')}, {b.provenance['corner']} part values",
    ]
    if math.isfinite(s.peak_efficiency):
        lines.append(
            f"  peak efficiency {_pct(s.peak_efficiency)} at vin {_v(s.peak_vin)}, "
            f"load {_a(s.peak_load)} ({s.peak_load / rated * 100:.0f} % of rated)"
        )
    else:
        lines.append("  no point of the map could be solved")
    lines.append(f"  DCM at {s.dcm_points} of {s.points} points; {s.flagged_points} flagged"
                 + (", by kind of reason:" if s.flagged_reasons else ""))
    lines.extend(_wrap(f"{n:>5} points: {r}", "    ") for r, n in s.flagged_reasons)
    lines.append("")
    at = (
        "at rated load"
        if math.isclose(s.rated_load, rated, rel_tol=1e-9)
        else f"at the map's load nearest rated ({_a(s.rated_load)}; rated {_a(rated)})"
    )
    idx = np.unique(
        np.round(np.linspace(0, s.rated_vin.size - 1, min(SUMMARY_ROWS, s.rated_vin.size))).astype(
            int
        )
    )
    shown = "" if idx.size == s.rated_vin.size else f", {idx.size} of {s.rated_vin.size} rows"
    lines.append(f"  efficiency {at} ({_a(s.rated_load)}) over the input range{shown}:")
    lines.append(
        aligned_table(
            ("vin", "efficiency"),
            [(_v(s.rated_vin[i]), _pct(s.rated_efficiency[i])) for i in idx],
            right=(True, True),
            indent="    ",
        )
    )
    lines.append("")
    lines.append(
        "  weighted efficiency (each load point solved, not interpolated; "
        f"ambient {format_quantity(amb, 'temperature')}):"
    )
    vins = list(dict.fromkeys(f.vin for f in run.weighted))
    names = list(dict.fromkeys(f.name for f in run.weighted))
    by = {(f.name, f.vin): f for f in run.weighted}
    rows = [[n, *(_pct(by[n, v].value) for v in vins)] for n in names]
    lines.append(
        aligned_table(
            ("figure", *(f"vin {_v(v)}" for v in vins)),
            rows,
            right=(False, *([True] * len(vins))),
            indent="    ",
        )
    )
    for f in run.weighted:
        if f.reason:
            lines.append(f"    n/a {f.name} at vin {_v(f.vin)}: {f.reason}")
    sources = {f.name: f.source for f in run.weighted}
    lines.append("    sources:")
    lines.extend(_wrap(f"{n}: {src}", "      ") for n, src in sources.items())
    if files:
        lines.append("")
        lines.append("  files:")
        lines.append(
            aligned_table(("what", "file"), [(w, str(p)) for w, p in run.files], indent="    ")
        )
    lines.extend(f"  note: {n}" for n in run.notes)
    # the DCM turn-on choice and the node ring's Q (SPEC §2.3: every output states them)
    lines.extend(f"  note: {n}" for n in b.provenance.get("notes", ()) if n.startswith("DCM "))
    if cautions:
        lines.append("")
        lines.extend(_wrap(f"caution: {text}", "  ") for text in CAUTIONS)
    return "\n".join(lines)


def _wrap(text: str, indent: str) -> str:
    return textwrap.fill(text, width=96, initial_indent=indent, subsequent_indent=indent + "  ")


def grid_options(command):
    """The grid options of the commands that sweep a map (map, export)."""
    options = [
        click.option(
            "--vin",
            "vin_range",
            metavar="START:STOP:COUNT",
            help='Input voltages, e.g. 18:32:15 or "18 V:32 V:15" [V]; default the '
            "design's vin min to max, 15 points.",
        ),
        click.option(
            "--load",
            "load_range",
            metavar="START:STOP:COUNT",
            help='Output currents, e.g. 0.2:4:40 or "0.2 A:4 A:40" [A].',
        ),
        click.option(
            "--load-pct",
            "load_pct_range",
            metavar="START:STOP:COUNT",
            help="Output currents in percent of rated, e.g. 5:100:40 [%]; the default.",
        ),
        click.option("--log-load", is_flag=True, help="Space the loads logarithmically."),
        click.option(
            "--ambient",
            help='Ambient temperature, e.g. "40 degC" [degC or K]; default the nominal.',
        ),
    ]
    for option in reversed(options):
        command = option(command)
    return command


# --------------------------------------------------------------------------------------------
# the commands
# --------------------------------------------------------------------------------------------


@click.command("map")
@design_argument
@grid_options
@click.option(
    "--out",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("lossbudget-map"),
    show_default=True,
    help="Folder for the plots and tables (created if missing).",
)
@click.option(
    "--format",
    "fmt",
    type=click.Choice(["png", "svg", "pdf"]),
    default="png",
    show_default=True,
    help="Plot file format.",
)
@click.option(
    "--long-table", is_flag=True, help=f"Write losses.csv even above {LONG_TABLE_POINTS:,} points."
)
@max_points_option
@reports_bad_input
def map_command(
    design: Path,
    vin_range,
    load_range,
    load_pct_range,
    log_load,
    ambient,
    out,
    fmt,
    long_table,
    max_points,
) -> None:
    """Efficiency map over input voltage × load: four plots, the point and loss tables
    (CSV), and a summary with the peak, the rated-load efficiency and weighted figures."""
    d = read_design(design)
    vin = vin_axis(d, vin_range)
    load = load_points(d, load=load_range, load_pct=load_pct_range, log_load=log_load)
    amb = quantity(ambient, "temperature", "--ambient")
    check_size(vin.size * load.size, output="map", max_points=max_points,
               shape=f"{vin.size:,} × {load.size:,}")
    with output_set(out, create=True) as files:
        run = run_map(d, vin=vin, load=load, ambient=amb, files=files, fmt=fmt,
                      long_table=long_table)
    click.echo(map_report(d, run))
    nothing_solved(run.summary.points, run.summary.flagged_points)


@click.command("demo")
@click.option(
    "--out",
    type=click.Path(file_okay=False, path_type=Path),
    default=Path("lossbudget-demo"),
    show_default=True,
    help="Folder for the plots, tables and workbook (created if missing).",
)
@reports_bad_input
def demo_command(out: Path) -> None:
    """The whole job on the embedded demo design (a warehouse cart's motor-bus boost):
    the breakdown at the nominal point, the map with its plots and tables, the limit check
    and the workbook."""
    from lossbudget.output import plots
    from lossbudget.solver import solve

    source = importlib.resources.files("lossbudget") / "data" / "demo.toml"
    with importlib.resources.as_file(source) as path:
        d = load_design(path)
    op = d.operating
    click.echo("== nominal point (vin nominal, rated load, nominal ambient) ==")
    click.echo(point_report(solve(d, vin=op.vin.nom, load_fraction=1.0), d))
    click.echo("")
    click.echo("== efficiency map ==")
    with output_set(out, create=True) as staged:
        run = run_map(
            d,
            vin=vin_axis(d, None),
            load=load_points(d, load=None, load_pct=None, log_load=False),
            ambient=None,
            files=staged,
            fmt="png",
            long_table=False,
        )
        click.echo(map_report(d, run, cautions=False, files=False))
        files = list(run.files)
        report = None
        click.echo("")
        try:
            from lossbudget.limits import check_limits
        except ImportError:
            click.echo("note: limit check skipped (lossbudget.limits is not available)")
        else:
            report = check_limits(d)
            click.echo(
                f"== limit check ({report.corner} part values, derating "
                f"{report.derating}): worst status {report.worst_status} =="
            )
            click.echo("\n".join(limit_table(report)))
            chart = plots.margin_chart(report, staged.stage("margins.png"))
            files.append(("margin chart", staged.final(chart)))
        try:
            from lossbudget.output.workbook import write_workbook
        except ImportError:
            click.echo("note: workbook skipped (lossbudget.output.workbook is not available)")
        else:
            workbook = write_workbook(
                staged.stage("budget.xlsx"),
                budget=run.budget,
                report=report,
                weighted=run.weighted,
                design=d,
            )
            files.append(("workbook", staged.final(workbook)))
    click.echo("")
    click.echo("files:")
    click.echo(aligned_table(("what", "file"), [(w, str(p)) for w, p in files], indent="  "))
    click.echo("")
    click.echo("\n".join(_wrap(f"caution: {text}", "") for text in CAUTIONS))
