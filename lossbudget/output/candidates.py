"""Figures and workbook of a comparison of design variants (``lossbudget compare``).

Each ``*_figure`` function returns a matplotlib :class:`~matplotlib.figure.Figure` (Agg canvas,
no pyplot state) from the DataFrame of :func:`lossbudget.ranking.compare` and, for the curves,
a budget over variants × load; :func:`write_candidates_workbook` writes the candidates sheet.
Saving is the caller's: the command writes every file of a comparison as one atomic set
(:func:`lossbudget.output.files.atomic_paths`). Colours and markers follow the map plots
(Okabe–Ito, markers repeating the distinction in grey print); every figure carries the caution
line. matplotlib and openpyxl are imported inside the functions.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from lossbudget.budget import Budget
from lossbudget.output.plots import CAPTION, MARKERS, OKABE_ITO, _figure

STATUS_STYLE = {"ok": ("#009E73", "o"), "caution": ("#E69F00", "s"), "fail": ("#D55E00", "X")}


def _caption(fig, title: str, subtitle: str, ax) -> None:
    fig.suptitle(title, fontsize=12, fontweight="bold")
    ax.set_title(subtitle, fontsize=9, color="0.25")
    fig.text(0.01, 0.008, CAPTION, fontsize=7.5, color="0.3", ha="left", va="bottom",
             style="italic")
    ax.grid(True, color="0.85", linewidth=0.6)
    ax.set_axisbelow(True)


def _objective_axis(frame) -> tuple[np.ndarray, str]:
    objective = frame.attrs.get("objective", "european")
    if objective == "full_load":
        return frame["objective_loss"].to_numpy(float), "loss at rated load, nominal input (W)"
    return 100.0 * frame["objective_loss"].to_numpy(float), (
        f"weighted loss, 100 − {objective} efficiency (%)")


def pareto_figure(frame, *, design_name: str, against: str = "cost"):
    """Objective loss against cost (or board area) per variant, the Pareto front joined."""
    fig = _figure()
    ax = fig.add_subplot()
    y, ylabel = _objective_axis(frame)
    if against == "area":
        x = frame["area_m2"].to_numpy(float) * 1e6
        xlabel = "board area of the chosen parts (mm²)"
    else:
        x = frame["cost"].to_numpy(float)
        xlabel = "cost of the chosen parts (per unit)"
    status = frame["status"].to_numpy(object)
    for name, (colour, marker) in STATUS_STYLE.items():
        sel = status == name
        if sel.any():
            ax.scatter(x[sel], y[sel], s=28, color=colour, marker=marker, alpha=0.8,
                       label=f"limits {name} ({int(sel.sum())})", edgecolors="none")
    front = frame["pareto"].to_numpy(bool)
    if front.any():
        order = np.argsort(x[front])
        ax.plot(x[front][order], y[front][order], color="black", linewidth=1.2,
                drawstyle="steps-post", label="Pareto front (loss, cost, area)")
        ax.scatter(x[front], y[front], s=70, facecolors="none", edgecolors="black",
                   linewidths=1.2)
    if np.isfinite(x[0]) and np.isfinite(y[0]):
        ax.annotate("rank 1", (x[0], y[0]), xytext=(-6, 8), textcoords="offset points",
                    fontsize=8, ha="right")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.legend(fontsize=8, loc="best")
    _caption(fig, f"{design_name}: candidates", f"{len(frame)} variants; limits at "
             f"worst-case part values over the envelope; rank 1: {frame.iloc[0]['variant']}",
             ax)
    ax.title.set_wrap(True)
    return fig


def efficiency_figure(budget: Budget, *, labels, design_name: str, vin: float):
    """Efficiency against load of a few variants (a budget of shape (variants, loads))."""
    fig = _figure()
    ax = fig.add_subplot()
    load = np.asarray(budget.coords["load"])
    eff = budget.efficiency
    for k, label in enumerate(labels):
        ax.plot(load[k], 100.0 * eff[k], color=OKABE_ITO[k % len(OKABE_ITO)],
                marker=MARKERS[k % len(MARKERS)], markevery=max(1, load.shape[1] // 8),
                markersize=5, linewidth=1.6, label=f"{k + 1}. {label}")
    ax.set_xlabel("load, output current (A)")
    ax.set_ylabel("efficiency (%)")
    ax.legend(fontsize=7.5, loc="lower right")
    _caption(fig, f"{design_name}: efficiency of the best candidates",
             f"input {vin:g} V, nominal ambient, typical part values; flagged points are gaps",
             ax)
    return fig


def frequency_figure(frame, *, design_name: str, candidates):
    """Objective loss against switching frequency per candidate, the optimum marked."""
    fig = _figure()
    ax = fig.add_subplot()
    _, ylabel = _objective_axis(frame)
    by_id = frame.sort_values("variant_id")
    for k, (label, ids) in enumerate(candidates):
        rows = by_id.set_index("variant_id").loc[ids]
        f = rows["operating.fsw"].to_numpy(float)
        y, _ = _objective_axis(rows.reset_index())
        colour = OKABE_ITO[k % len(OKABE_ITO)]
        ax.plot(f / 1e3, y, color=colour, marker=MARKERS[k % len(MARKERS)], markersize=4,
                linewidth=1.4, label=label)
        if np.any(np.isfinite(y)):
            j = int(np.nanargmin(y))
            ax.scatter([f[j] / 1e3], [y[j]], s=80, facecolors="none", edgecolors=colour,
                       linewidths=1.5)
    ax.set_xlabel("switching frequency (kHz)")
    ax.set_ylabel(ylabel)
    ax.legend(fontsize=7, loc="best")
    _caption(fig, f"{design_name}: loss against switching frequency",
             "circles: the optimum of each candidate on the grid", ax)
    return fig


def save_figure(fig, temp: Path, target: Path) -> None:
    """Write a figure to a temporary file in the format of its target's suffix."""
    fig.savefig(temp, format=target.suffix[1:].lower(), dpi=150)


def write_candidates_workbook(temp: Path, frame, *, design_name: str, optimum=None,
                              cautions=()) -> None:
    """The candidates sheet (one row per variant, best first), limits and optimum sheets."""
    from openpyxl import Workbook
    from openpyxl.styles import Font, PatternFill

    wb = Workbook()
    ws = wb.active
    ws.title = "candidates"
    bold = Font(bold=True)
    fill = PatternFill("solid", start_color="DDEBF7", end_color="DDEBF7")

    def sheet(ws, df):
        cols = list(df.columns)
        ws.append(cols)
        for cell in ws[1]:
            cell.font = bold
            cell.fill = fill
        for row in df.itertuples(index=False):
            ws.append([_cell(v) for v in row])
        ws.freeze_panes = "A2"
        ws.auto_filter.ref = ws.dimensions
        for k, c in enumerate(cols, start=1):
            ws.column_dimensions[ws.cell(1, k).column_letter].width = min(
                max(10, len(str(c)) + 2), 60 if c == "variant" else 24)

    shown = frame.drop(columns=[c for c in frame.columns if c == "reason" and
                                not frame[c].astype(bool).any()])
    sheet(ws, shown)
    limits = frame.attrs.get("limits_table")
    if limits is not None:
        sheet(wb.create_sheet("limits"), limits)
    if optimum is not None:
        sheet(wb.create_sheet("optimum_fsw"), optimum)
    notes = wb.create_sheet("notes")
    notes.append([f"{design_name}: comparison of candidates"])
    notes["A1"].font = Font(bold=True, size=14)
    notes.append([f"objective: {frame.attrs.get('objective', '')}; derating: "
                  f"{frame.attrs.get('derating', '')}"])
    notes.append([frame.attrs.get("limits_grid", "")])
    notes.append([])
    for line in cautions:
        notes.append([line])
    wb.save(temp)


def _cell(v):
    if isinstance(v, float | np.floating):
        return None if not np.isfinite(v) else float(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return v
