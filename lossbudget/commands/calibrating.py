"""``lossbudget calibrate``: fit the model's scale factors to bench measurements.

Prints the factors with their standard errors, the correlations, and the residuals before and
after at every measured point. ``-o`` writes the calibrated design file (the original's keys
and comments kept); ``--out`` writes the measured-versus-model figure, the residual table and
the limit check predicted with the calibrated design. All files of a run are written to
temporary files and renamed together, so a failure leaves nothing half-written.
"""

from __future__ import annotations

from pathlib import Path

import click
import numpy as np

from lossbudget.cautions import CAUTIONS
from lossbudget.commands.common import BadInput, design_argument, read_design, reports_bad_input
from lossbudget.output.tables import aligned_table
from lossbudget.units import format_quantity

FREE_HELP = (
    "Comma-separated factors to fit [-]: switching (edge energies), coss (node-charge "
    "energies), conduction (channel resistances), copper (winding resistance), core, quiescent "
    "(controller bias), board (an added series resistance in ohms, at the DC input; "
    "board.POSITION elsewhere: input, switch, rectifier, inductor, output, load), rth.SINK "
    "(a sink's resistance to ambient)."
)


def _w(x: float) -> str:
    return f"{x:.3f}" if np.isfinite(x) else "-"


def _pct(x: float) -> str:
    return f"{x * 100:.2f}" if np.isfinite(x) else "-"


def calibration_report(cal) -> str:
    """The text report of a :class:`~lossbudget.calibration.Calibration`."""
    b = cal.bench
    lines = [
        f"{cal.original.name}: calibrated against {b.name} ({b.size} points, sha256 "
        f"{b.sha256[:16]}…)",
        f"  weights: loss σ = {cal.uncertainty.power_rel * 100:g} % of each power reading "
        f"and {format_quantity(cal.uncertainty.power_floor, 'power')} floor; temperature σ = "
        f"{cal.uncertainty.temperature:g} K",
        "",
        aligned_table(["factor", "before", "fitted", "± std. error"], cal.summary_rows(),
                      right=[False, True, True, True], indent="  "),
    ]
    if len(cal.free) > 1:
        pairs = [
            f"{a}/{c} {cal.correlation[i, j]:+.2f}"
            for i, a in enumerate(cal.free)
            for j, c in enumerate(cal.free)
            if j > i
        ]
        lines.append("  correlations: " + ", ".join(pairs))
    lines.append(f"  χ² = {cal.chi_square:.3g} over {cal.dof} degrees of freedom "
                 f"({cal.evaluations} model solves)")
    lines.append("")
    r = cal.residuals
    header = ["point", "vin (V)", "load (A)", "loss (W)", "before (W)", "after (W)",
              "η meas (%)", "η before", "η after", "resid before (σ)", "resid after (σ)"]
    rows = [
        [p, f"{v:.3g}", f"{a:.3g}", _w(lm), _w(lb), _w(la), _pct(em), _pct(eb), _pct(ea),
         f"{rb:+.2f}", f"{ra:+.2f}"]
        for p, v, a, lm, lb, la, em, eb, ea, rb, ra in zip(
            r["point"], r["vin_v"], r["load_a"], r["loss_w"], r["loss_before_w"],
            r["loss_after_w"], r["efficiency"], r["efficiency_before"],
            r["efficiency_after"], r["residual_before"], r["residual_after"], strict=True)
    ]
    lines.append("  loss at each measured point (residual = measured − model, in standard "
                 "deviations of the reading):")
    lines.append(aligned_table(header, rows, right=[False] + [True] * 10, indent="  "))
    for node in b.temperatures:
        col = f"t_{node.replace('.', '_')}"
        lines.append("")
        lines.append(f"  temperature of {node} (degC):")
        trows = [
            [p, f"{m:.1f}", f"{tb:.1f}", f"{ta:.1f}", f"{m - tb:+.1f}", f"{m - ta:+.1f}"]
            for p, m, tb, ta in zip(r["point"], r[f"{col}_degc"], r[f"{col}_before_degc"],
                                    r[f"{col}_after_degc"], strict=True)
        ]
        lines.append(aligned_table(["point", "measured", "before", "after", "resid before (K)",
                                    "resid after (K)"], trows,
                                   right=[False] + [True] * 5, indent="  "))
    for note in cal.notes:
        lines.append(f"  note: {note}")
    lines.append("")
    lines.extend(f"  caution: {text}" for text in CAUTIONS)
    return "\n".join(lines)


@click.command("calibrate")
@design_argument
@click.argument("bench", metavar="BENCH.csv", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--free", required=True, help=FREE_HELP)
@click.option("-o", "--output", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the calibrated design file here (TOML; the keys and comments of "
              "DESIGN kept, a [calibration] table added).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              help="Folder (created if missing) for calibration.png (measured against model, "
              "before and after), residuals.csv and limits.csv/limits.txt (the limit check "
              "predicted with the calibrated design at worst-case part values).")
@reports_bad_input
def calibrate_command(design: Path, bench: Path, free: str, output: Path | None,
                      out_dir: Path | None) -> None:
    """Fit scale factors of DESIGN's loss groups to the measurements in BENCH.csv.

    BENCH.csv columns: vin_v; load_a or load_pct; efficiency (a fraction) or input_power_w
    and output_power_w; optional vout_v, ambient_degc and t_NODE_degc (a thermal node's
    measured temperature, e.g. t_switch_degc). Lines starting with # are comments. Exit
    status: 0 done; 2 bad input, or factors the measurements cannot tell apart (named, with
    the measurement that would separate them).
    """
    from lossbudget.calibration import calibrate
    from lossbudget.output.files import atomic_paths

    d = read_design(design)
    if output is not None and output.resolve() == design.resolve():
        raise BadInput(f"-o {output}: expected a new file name, not the design file itself")
    cal = calibrate(d, bench, free=free)
    click.echo(calibration_report(cal))
    targets: list[Path] = []
    report = None
    if output is not None:
        targets.append(output)
    if out_dir is not None:
        from lossbudget.commands.checking import check_report
        from lossbudget.limits import check_limits

        out_dir.mkdir(parents=True, exist_ok=True)
        targets += [out_dir / n for n in ("calibration.png", "residuals.csv", "limits.csv",
                                           "limits.txt")]
        report = check_limits(cal.design, corner="worst")
    if not targets:
        return
    with atomic_paths(targets) as temps:
        k = 0
        if output is not None:
            temps[0].write_text(cal.to_toml(), encoding="utf-8")
            k = 1
        if out_dir is not None:
            from lossbudget.output.bench import plot_calibration

            plot_calibration(cal, temps[k])
            cal.residuals.to_csv(temps[k + 1], index=False)
            report.to_frame().to_csv(temps[k + 2], index=False)
            temps[k + 3].write_text(
                f"{cal.design.calibration.describe()}\n\n{check_report(report)}\n",
                encoding="utf-8")
    if report is not None:
        click.echo("")
        click.echo("limits predicted with the calibrated design:")
        click.echo(check_report(report))
    click.echo("")
    for t in targets:
        click.echo(f"wrote {t}")
