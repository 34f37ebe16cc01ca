"""``lossbudget point``: one operating point, every loss, temperatures and stresses."""

from __future__ import annotations

from pathlib import Path

import click
import numpy as np

from lossbudget.cautions import CAUTIONS
from lossbudget.commands.common import (
    BadInput,
    NothingSolved,
    design_argument,
    load_percent,
    quantity,
    read_design,
    reports_bad_input,
)
from lossbudget.output.tables import aligned_table
from lossbudget.units import format_quantity


def _diverging(budget) -> list[str]:
    """The last iteration's temperatures of a point that ran away (none where it solved)."""
    last = {n: float(np.ravel(t)[0]) for n, t in budget.diverging_temperatures.items()}
    if not last or not all(np.isfinite(v) for v in last.values()):
        return []
    limits = {n: v for n, v in budget.temperature_limits.items()
              if v is not None and np.isfinite(v)}  # NaN: a limit not given
    rows = [[n, f"{t:.1f}", "" if limits.get(n) is None else f"{limits[n]:g}",
             "past its limit" if limits.get(n) is not None and t > limits[n] else ""]
            for n, t in last.items()]
    return ["  temperatures at the last iteration of the coupled solve: DIVERGING, not a "
            "solution",
            aligned_table(["node", "last iteration (degC)", "limit (degC)", ""], rows,
                          right=[False, True, True, False], indent="  "), ""]


def point_report(budget, design=None, *, derating: str | None = None) -> str:
    """The text report of a one-point budget (loss table, figures, temperatures, stresses).

    With the ``design`` it was solved from, every rating of the point is judged as ``check``
    judges it: the design limit after derating beside the absolute rating.
    """
    c = {k: float(np.asarray(v).ravel()[0]) for k, v in budget.coords.items()}
    lines = [
        f"{budget.design_name}: operating point, {budget.provenance['corner']} part values",
        f"  vin {format_quantity(c['vin'], 'voltage')}"
        f"   vout {format_quantity(c['vout'], 'voltage')}"
        f"   load {format_quantity(c['load'], 'current')}   ambient {c['ambient']:g} degC"
        f"   fsw {format_quantity(c['fsw'], 'frequency')}",
    ]
    if bool(np.asarray(budget.flagged).ravel()[0]):
        lines.append(f"  not solved: {np.asarray(budget.reason).ravel()[0]}")
        lines.append("")
        lines.extend(_diverging(budget))
        lines.extend(f"  caution: {text}" for text in CAUTIONS)
        return "\n".join(lines)
    eff = float(np.asarray(budget.efficiency).ravel()[0])
    total = float(np.asarray(budget.total_loss).ravel()[0])
    lines.append(
        f"  efficiency {eff * 100:.2f} %   loss {total:.3f} W"
        f"   output {float(budget.output_power.ravel()[0]):.2f} W"
        f"   duty {float(budget.duty.ravel()[0]):.4f}   D2 {float(budget.d2.ravel()[0]):.4f}"
        f"   mode {budget.mode.ravel()[0]}"
        + (
            "   (inductor current reverses)"
            if bool(budget.flags["reverse_current"].ravel()[0])
            else ""
        )
    )
    lines.append(f"  output ripple {float(budget.vout_pp.ravel()[0]) * 1e3:.1f} mV peak-to-peak")
    if ("inductor", "l") in budget.stresses:
        l_op = float(budget.stresses["inductor", "l"].ravel()[0])
        i_op = float(budget.stresses["inductor", "i_avg"].ravel()[0])
        lines.append(
            f"  inductance {format_quantity(l_op, 'inductance', digits=4)} per part, taken at "
            f"the mean inductor current {format_quantity(i_op, 'current', digits=4)} per part"
        )
    over = str(budget.rating_reasons.ravel()[0])
    if over:
        lines.append(f"  OVER RATING: {over}")
    lines.append("")
    rows = []
    for comp in budget.components:
        for mech in budget.mechanisms(comp):
            status = str(budget.status(comp, mech).ravel()[0])
            value = float(budget.loss(comp, mech).ravel()[0])
            shown = f"{value:.4f}" if status.startswith(("computed", "zero")) else "-"
            share = f"{value / total * 100:.1f} %" if shown != "-" else ""
            rows.append([comp, mech, shown, share, status])
    rows.append(["total", "", f"{total:.4f}", "100.0 %", ""])
    lines.append(
        aligned_table(
            ["component", "mechanism", "loss (W)", "share", "status"],
            rows,
            right=[False, False, True, True, False],
            indent="  ",
        )
    )
    lines.append("")
    lines.extend(_temperature_table(budget, design, derating))
    lines.append("")
    if design is not None:
        lines.extend(_ratings_table(budget, design, derating))
        lines.append("")
    comps: list[str] = []
    for comp, _ in budget.stresses:
        if comp not in comps:
            comps.append(comp)
    columns = [
        ("i_avg", "{:.3f}", "I avg (A/part)"),
        ("i_rms", "{:.3f}", "I rms (A/part)"),
        ("i_pk", "{:.3f}", "I pk (A/part)"),
        ("v_pk", "{:.2f}", "V pk (V)"),
        ("v_overshoot", "{:.2f}", "V overshoot (V)"),
        ("b_pk", "{:.4f}", "B pk (T)"),
        ("delta_b", "{:.4f}", "dB pp (T)"),
    ]
    # a quantity no part has (the overshoot without switch.loop_inductance) gets no column
    columns = [c for c in columns if any(q == c[0] for _, q in budget.stresses)]
    srows = []
    for comp in comps:
        row = [comp]
        for q, fmt, _ in columns:
            row.append(
                fmt.format(float(budget.stresses[comp, q].ravel()[0]))
                if (comp, q) in budget.stresses
                else ""
            )
        srows.append(row)
    lines.append(
        aligned_table(
            ["part", *(h for _, _, h in columns)],
            srows,
            right=[False] + [True] * len(columns),
            indent="  ",
        )
    )
    lines.append("  currents per part: a capacitor bank's (or parallel devices') current / count")
    missing = budget.not_modelled
    if missing:
        lines.append("")
        lines.append("  not modelled (the key that would enable each):")
        lines.extend(f"    {c} {m}: {key}" for c, m, key in missing)
    if budget.flags["extrapolated"].ravel()[0]:
        why = str(np.asarray(budget.reason).ravel()[0])
        lines.append(f"  note: extrapolated or clipped here: {why or 'a temperature law'}")
    notes = budget.provenance.get("notes", [])
    if notes:
        lines.append("")
        lines.extend(f"  note: {n}" for n in notes)
    warnings = budget.provenance.get("warnings", [])
    if warnings:
        lines.append("")
        lines.extend(f"  warning: {w}" for w in warnings)
    lines.append("")
    lines.extend(f"  caution: {text}" for text in CAUTIONS)
    return "\n".join(lines)


def _temperature_table(budget, design, derating) -> list[str]:
    """Node temperatures against the design limit after derating and the rated limit."""
    derated = {}
    if design is not None:
        from lossbudget.limits import temperature_design_limits

        derated = {k: v for k, (v, _) in temperature_design_limits(design,
                                                                    derating=derating).items()}
    rows = []
    for node, temp in budget.temperatures.items():
        rated = budget.temperature_limits.get(node)
        rated = None if rated is None or not np.isfinite(rated) else rated
        limit = derated.get(node, rated)
        t = float(temp.ravel()[0])
        status = ""
        if rated is not None:
            status = "OVER RATING" if t > rated else "over design limit" if t > limit else "ok"
        elif node in budget.temperature_limits:
            status = "not checked"
        rows.append([
            node,
            f"{t:.1f}",
            "" if limit is None else f"{limit:g}",
            "" if rated is None else f"{rated:g}",
            "" if limit is None else f"{limit - t:.1f}",
            status,
        ])
    label = "design limit (degC)" if design is not None else "limit (degC)"
    return [aligned_table(
        ["node", "temperature (degC)", label, "rated (degC)", "margin (K)", "status"],
        rows, right=[False, True, True, True, True, False], indent="  ",
    )] + (["  design limit: after derating, as check uses it; rated: the part's maximum"]
          if design is not None else [])


_DIMS = {"degC": "temperature", "V": "voltage", "A": "current", "T": "flux_density"}


def _fmt(x: float, unit: str) -> str:
    return format_quantity(x, _DIMS[unit], digits=4) if np.isfinite(x) else "-"


def _ratings_table(budget, design, derating) -> list[str]:
    """Every rating of the point: value, design limit after derating, rated limit, status."""
    from lossbudget.limits import point_ratings

    rows, missing = point_ratings(design, budget, derating=derating)
    table = []
    for r in rows:
        if r.unit == "degC":
            continue  # in the temperature table
        status = {"ok": "ok", "caution": "over design limit", "fail": "OVER RATING"}[r.status]
        table.append([r.part, r.quantity, _fmt(r.worst, r.unit), _fmt(r.design_limit, r.unit),
                      _fmt(r.absolute_limit, r.unit), f"{r.margin * 100:+.1f} %", status, r.note])
    out = [aligned_table(
        ["part", "quantity", "value", "design limit", "rated", "margin", "status", "what"],
        table, right=[False, False, True, True, True, True, False, False], indent="  ",
    )]
    out.append("  design limit: the rating after derating (as check uses it); margin: % of the "
               "design limit")
    if missing:
        out.append("  not checked (the key that would enable each): " + ", ".join(
            f"{p} {q} ({k})" for p, q, k in missing))
    return out


@click.command()
@design_argument
@click.option("--vin", help='Input voltage, e.g. "24 V" [V]; default the nominal.')
@click.option("--load", "load_", help='Output current, e.g. "4 A" [A]; default the rated.')
@click.option("--load-pct", type=float, help="Output current as percent of rated [%].")
@click.option("--ambient", help='Ambient temperature, e.g. "40 degC" [degC or K].')
@click.option("--fsw", help='Switching frequency, e.g. "250 kHz" [Hz]; default the nominal.')
@click.option(
    "--corner",
    type=click.Choice(["typ", "worst"]),
    default="typ",
    show_default=True,
    help="Part values: typical or worst case.",
)
@reports_bad_input
def point(design: Path, vin, load_, load_pct, ambient, fsw, corner) -> None:
    """One operating point: every loss by component and mechanism, efficiency, duty, mode,
    temperatures against each part's limit, and stresses."""
    from lossbudget.solver import solve

    if load_ is not None and load_pct is not None:
        raise BadInput("give --load or --load-pct, not both")
    d = read_design(design)
    op = d.operating
    budget = solve(
        d,
        vin=quantity(vin, "voltage", "--vin") if vin is not None else op.vin.nom,
        load=quantity(load_, "current", "--load"),
        load_fraction=load_percent(load_pct),
        ambient=quantity(ambient, "temperature", "--ambient"),
        fsw=quantity(fsw, "frequency", "--fsw"),
        corner=corner,
    )
    click.echo(point_report(budget, d))
    if bool(np.all(budget.flagged)):
        raise NothingSolved(f"the point could not be solved: {np.ravel(budget.reason)[0]}")
