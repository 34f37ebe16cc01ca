"""``lossbudget compare``: rank candidate parts, frequencies and inductances of one design."""

from __future__ import annotations

import math
from pathlib import Path

import click
import numpy as np

from lossbudget.cautions import CAUTIONS
from lossbudget.commands.common import (
    BadInput,
    design_argument,
    nothing_solved,
    read_design,
    reports_bad_input,
)
from lossbudget.output.tables import aligned_table

FORMAT_CHOICES = ("png", "svg", "pdf")
SHOWN_ROWS = 25
BEST_CURVES = 5
CURVE_POINTS = 40


def parse_vary(texts: tuple[str, ...]) -> dict[str, np.ndarray]:
    """``KEY=START:STOP:COUNT`` options as key → evenly spaced values (SI)."""
    from lossbudget.commands.mapping import parse_range
    from lossbudget.factorial import _glossary_key
    from lossbudget.units import glossary_dimension

    out: dict[str, np.ndarray] = {}
    for text in texts:
        key, sep, rng = text.partition("=")
        key = key.strip()
        if not sep or not key:
            raise BadInput(f'--vary: expected KEY=START:STOP:COUNT (e.g. '
                           f'"operating.fsw=200 kHz:500 kHz:7"), got "{text}"')
        try:
            dim = glossary_dimension(_glossary_key(key))
        except KeyError:
            raise BadInput(f"--vary: {key}: not a key of the design file") from None
        start, stop, count = parse_range(rng, dim, f"--vary {key}")
        if count < 1:
            raise BadInput(f"--vary {key}: expected a point count of at least 1, got {count}")
        if key in out:
            raise BadInput(f"--vary: {key} given twice")
        out[key] = np.linspace(start, stop, count)
    return out


def _pct(x: float) -> str:
    return "-" if not math.isfinite(x) else f"{x * 100:.2f} %"


def _w(x: float) -> str:
    return "-" if not math.isfinite(x) else f"{x:.3f} W"


def _margin(x: float, unit: str) -> str:
    if not math.isfinite(x):
        return ""
    return f"{x:+.1f} K" if unit == "K" else f"{x * 100:+.1f} %"


def ranking_table(frame, *, rows: int = SHOWN_ROWS) -> str:
    """The aligned ranking table, best first (the failing limit beside each candidate)."""
    objective = frame.attrs.get("objective", "european")
    head = frame.head(rows)
    has_cost = bool(np.isfinite(frame["cost"]).any())
    has_area = bool(np.isfinite(frame["area_m2"]).any())
    body = []
    for r in head.itertuples(index=False):
        r = r._asdict()
        limit = r["worst_limit"] or "-"
        mark = {"ok": "ok", "caution": "caution", "fail": "FAIL"}[r["status"]]
        row = [r["rank"], r["variant"],
               _w(r["loss_full_w"]) if objective == "full_load" else _pct(r[f"eff_{objective}"]),
               _w(r["loss_rated_vin_min_w"]), _w(r["loss_rated_vin_nom_w"]),
               _w(r["loss_rated_vin_max_w"]), mark,
               f"{limit} {_margin(r['worst_margin'], r['worst_margin_unit'])}".strip()]
        if has_cost:
            row.append("-" if not math.isfinite(r["cost"]) else f"{r['cost']:.2f}")
        if has_area:
            row.append("-" if not math.isfinite(r["area_m2"]) else f"{r['area_m2'] * 1e6:.0f}")
        row.append("*" if r["pareto"] else "")
        body.append(row)
    header = ["rank", "candidate",
              "full-load loss" if objective == "full_load" else f"{objective} eff.",
              "loss vin min", "loss vin nom", "loss vin max", "limits",
              "worst limit, margin"]
    right = [True, False, True, True, True, True, False, False]
    if has_cost:
        header.append("cost")
        right.append(True)
    if has_area:
        header.append("area mm2")
        right.append(True)
    header.append("pareto")
    right.append(False)
    text = aligned_table(header, body, right=right, indent="  ")
    if len(frame) > rows:
        text += f"\n  ... {len(frame) - rows} more in the workbook (candidates sheet)"
    return text


@click.command("compare")
@design_argument
@click.option("--parts", "parts", type=click.Path(dir_okay=False, path_type=Path),
              help="Parts file (TOML): alternatives per slot (switch, rectifier, inductor, "
                   "capacitor.<bank>).")
@click.option("--vary", "vary", multiple=True, metavar="KEY=START:STOP:COUNT",
              help='A design key swept over evenly spaced values, units allowed '
                   '("operating.fsw=200 kHz:500 kHz:7", "inductor.l=15 uH:33 uH:4"); '
                   "repeat for more keys.")
@click.option("--objective", type=click.Choice(("european", "cec", "mean_25_100",
                                                 "full_load")),
              default="european", show_default=True,
              help="Ranking: a weighted efficiency at nominal input, or the loss (W) at rated "
                   "load and nominal input.")
@click.option("--against", type=click.Choice(("cost", "area")), default="cost",
              show_default=True, help="The Pareto plot's horizontal axis.")
@click.option("--derating", default=None,
              help="Derating profile of the limit check (none, moderate, conservative, "
                   "custom); the design's own by default.")
@click.option("--budget", "budget", type=int, default=10_000, show_default=True,
              help="Largest number of variants accepted (count of the full factorial).")
@click.option("--out", "out", type=click.Path(file_okay=False, path_type=Path),
              help="Folder for the workbook and the figures (written as one set).")
@click.option("--format", "fmt", type=click.Choice(FORMAT_CHOICES), default="png",
              show_default=True, help="Figure format.")
@reports_bad_input
def compare_command(design: Path, parts: Path | None, vary: tuple[str, ...], objective: str,
                    against: str, derating: str | None, budget: int, out: Path | None,
                    fmt: str) -> None:
    """Rank candidate parts and values of a design, best first.

    Every combination of the parts file's alternatives and the --vary values is one variant;
    all are solved together. Each is ranked by the objective, checked against its limits over
    the envelope at worst-case part values (failing candidates last, with the failing limit),
    and marked when on the Pareto front of loss, cost and area. With --out: candidates.xlsx,
    pareto, efficiency of the best five and, when operating.fsw varies, loss against fsw.
    """
    from lossbudget.factorial import variants as make_variants
    from lossbudget.ranking import compare, optimum_frequency

    if parts is None and not vary:
        raise BadInput("compare: give --parts PARTS.toml, --vary KEY=START:STOP:COUNT, or both")
    d = read_design(design)
    values = parse_vary(vary)
    vs = make_variants(d, parts=parts, vary=values, budget=budget)
    frame = compare(vs, objective=objective, derating=derating)
    click.echo(f"{d.name}: {len(vs)} candidates ({_sizes(vs)}), ranked by {objective}")
    click.echo(f"  limits: {frame.attrs['derating']} derating; {frame.attrs['limits_grid']}")
    click.echo("")
    click.echo(ranking_table(frame))
    click.echo("  * on the Pareto front (no other candidate has lower loss, cost and area at "
               "once); FAIL: a limit past its absolute rating or a thermal runaway")
    optimum = None
    if "operating.fsw" in vs.values:
        optimum = optimum_frequency(vs, frame)
        click.echo("")
        click.echo("  optimum switching frequency per candidate (lowest objective loss on the "
                   "grid):")
        rows = []
        for r in optimum.itertuples(index=False):
            f = "-" if not math.isfinite(r.fsw_opt_hz) else f"{r.fsw_opt_hz / 1e3:.0f} kHz"
            rows.append([r.candidate, f, "at the sweep's edge" if r.at_edge else ""])
        click.echo(aligned_table(["candidate", "fsw optimum", ""], rows, indent="    "))
    if out is not None:
        written = _write_outputs(vs, frame, optimum, out=out, fmt=fmt, against=against)
        click.echo("")
        for p in written:
            click.echo(f"  wrote {p}")
    click.echo("")
    for line in CAUTIONS:
        click.echo(f"  caution: {line}")
    nothing_solved(len(frame), int(np.sum(~np.isfinite(frame["objective_loss"].to_numpy()))))


def _sizes(vs) -> str:
    parts = [f"{len(a)} {s}" for s, a in vs.slots.items()]
    parts += [f"{x.size and np.unique(x).size} {k}" for k, x in vs.values.items()]
    return " × ".join(parts)


def _candidates(vs) -> list[tuple[str, np.ndarray]]:
    """Variant ids per candidate along operating.fsw (in the order of the frequencies)."""
    key = "operating.fsw"
    sizes = list(vs.shape)
    axis = len(vs.slots) + list(vs.values).index(key)
    ids = np.moveaxis(np.arange(vs.size).reshape(sizes), axis, -1).reshape(-1, sizes[axis])
    labels = vs.labels_without(key)
    return [(str(labels[row[0]]), row) for row in ids]


def _write_outputs(vs, frame, optimum, *, out: Path, fmt: str, against: str) -> list[Path]:
    from lossbudget.factorial import subset
    from lossbudget.output.candidates import (
        efficiency_figure,
        frequency_figure,
        pareto_figure,
        save_figure,
        write_candidates_workbook,
    )
    from lossbudget.output.files import output_set
    from lossbudget.solver import solve

    d = vs.base
    best = frame["variant_id"].to_numpy()[:BEST_CURVES]
    sub = subset(vs, best)
    fractions = np.linspace(0.02, 1.0, CURVE_POINTS)
    curves = solve(sub, vin=d.operating.vin.nom, load_fraction=fractions)
    figures = {
        f"pareto.{fmt}": pareto_figure(frame, design_name=d.name, against=against),
        f"efficiency_best.{fmt}": efficiency_figure(
            curves, labels=[str(x) for x in frame["variant"].to_numpy()[:BEST_CURVES]],
            design_name=d.name, vin=d.operating.vin.nom),
    }
    if optimum is not None:
        cands = _candidates(vs)
        rank_of = np.empty(vs.size, dtype=int)
        rank_of[frame["variant_id"].to_numpy()] = np.arange(vs.size)
        best_rank = rank_of[np.stack([ids for _, ids in cands])].min(axis=1)
        chosen = [cands[k] for k in np.argsort(best_rank, kind="stable")[:BEST_CURVES]]
        figures[f"loss_vs_fsw.{fmt}"] = frequency_figure(
            frame, design_name=d.name, candidates=chosen)
    written = []
    with output_set(out, create=True) as files:
        write_candidates_workbook(files.stage("candidates.xlsx"), frame, design_name=d.name,
                                  optimum=optimum, cautions=CAUTIONS)
        written.append(out / "candidates.xlsx")
        for name, fig in figures.items():
            save_figure(fig, files.stage(name), out / name)
            written.append(out / name)
    return written
