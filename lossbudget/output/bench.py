"""The measured-versus-model figure of a calibration.

Left: efficiency against load at each measured input voltage, the bench points as markers and
the model as curves, before (dashed) and after (solid) calibration. Right, where temperatures
were measured: each reading against the model's, before (hollow) and after (filled), with the
line of agreement. matplotlib is imported inside the function and used through
:class:`matplotlib.figure.Figure` with the Agg canvas only; colours are the Okabe–Ito set of
:mod:`lossbudget.output.plots`, markers repeat the distinction in grey.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from lossbudget.output.plots import CAPTION, MARKERS, OKABE_ITO
from lossbudget.units import format_quantity

CURVE_POINTS = 60


def _voltage_groups(vin: np.ndarray) -> list[tuple[float, np.ndarray]]:
    """Measured input voltages grouped within 1 %: (the group's mean, its point mask)."""
    order = np.sort(np.unique(vin))
    groups: list[list[float]] = []
    for v in order:
        if groups and v <= groups[-1][0] * 1.01:
            groups[-1].append(v)
        else:
            groups.append([v])
    return [(float(np.mean(g)), (vin >= g[0]) & (vin <= g[-1])) for g in groups]


def plot_calibration(cal: Any, path: str | Path, *, fmt: str = "png") -> Path:
    """Write the measured-versus-model figure of a :class:`~lossbudget.calibration.Calibration`.

    ``path`` is written directly (the caller makes the write atomic); ``fmt`` is png, svg or
    pdf. The model curves are solved at the median measured ambient; the points are at their
    own.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D

    from lossbudget.sweep import sweep

    bench = cal.bench
    temps = bench.temperatures
    fig = Figure(figsize=(12.0 if temps else 8.0, 5.8), layout="constrained")
    FigureCanvasAgg(fig)
    fig.get_layout_engine().set(rect=(0.0, 0.035, 1.0, 0.965))
    axes = fig.subplots(1, 2, width_ratios=(1.6, 1.0)) if temps else [fig.subplots()]
    ax = axes[0]
    groups = _voltage_groups(bench.vin)
    amb = float(np.median(bench.ambient))
    top = float(np.max(bench.load)) * 1.08
    loads = np.linspace(top / CURVE_POINTS, top, CURVE_POINTS)
    vins = np.array([v for v, _ in groups])
    curves = {
        label: sweep(design, vin=vins, load=loads, ambient=amb)
        for label, design in (("before", cal.original), ("after", cal.design))
    }
    handles = []
    for k, (v, mask) in enumerate(groups):
        colour = OKABE_ITO[k % len(OKABE_ITO)]
        marker = MARKERS[k % len(MARKERS)]
        ax.plot(loads, curves["before"].efficiency[k] * 100, color=colour, linestyle="--",
                linewidth=1.2, alpha=0.8)
        ax.plot(loads, curves["after"].efficiency[k] * 100, color=colour, linewidth=1.8)
        ax.plot(bench.load[mask], bench.efficiency[mask] * 100, linestyle="none",
                marker=marker, markersize=7, markerfacecolor=colour, markeredgecolor="black",
                markeredgewidth=0.6)
        handles.append(Line2D([], [], color=colour, marker=marker, markeredgecolor="black",
                              label=f"vin {format_quantity(v, 'voltage')}"))
    handles += [
        Line2D([], [], color="0.3", linestyle="none", marker="o", markerfacecolor="0.6",
               markeredgecolor="black", label="measured"),
        Line2D([], [], color="0.3", linestyle="--", label="model before"),
        Line2D([], [], color="0.3", linewidth=1.8, label="model calibrated"),
    ]
    finite = np.concatenate([bench.efficiency * 100,
                             *(np.ravel(b.efficiency[np.isfinite(b.efficiency)]) * 100
                               for b in curves.values())])
    low = np.percentile(finite, 3)
    ax.set_ylim(max(low - 1.0, 0.0), min(float(np.max(finite)) + 0.8, 100.0))
    ax.set_xlim(0.0, top)
    ax.set_xlabel("output current (A)")
    ax.set_ylabel("efficiency (%)")
    ax.set_title(f"efficiency against load; curves at ambient "
                 f"{format_quantity(amb, 'temperature').replace('degC', '°C')}",
                 fontsize=9, color="0.25")
    ax.grid(True, color="0.85", linewidth=0.6)
    ax.legend(handles=handles, loc="lower right", fontsize=8, frameon=True, framealpha=0.9)
    if temps:
        tx = axes[1]
        res = cal.residuals
        lo_t, hi_t = np.inf, -np.inf
        for k, node in enumerate(temps):
            col = f"t_{node.replace('.', '_')}"
            meas = res[f"{col}_degc"].to_numpy()
            colour = OKABE_ITO[k % len(OKABE_ITO)]
            marker = MARKERS[k % len(MARKERS)]
            for when, face in (("before", "none"), ("after", colour)):
                model = res[f"{col}_{when}_degc"].to_numpy()
                tx.plot(meas, model, linestyle="none", marker=marker, markersize=7,
                        markerfacecolor=face, markeredgecolor=colour, markeredgewidth=1.2,
                        label=f"{node}, {'model before' if when == 'before' else 'calibrated'}")
                lo_t = min(lo_t, np.nanmin(meas), np.nanmin(model))
                hi_t = max(hi_t, np.nanmax(meas), np.nanmax(model))
        pad = 0.05 * (hi_t - lo_t) + 1.0
        tx.plot([lo_t - pad, hi_t + pad], [lo_t - pad, hi_t + pad], color="black",
                linewidth=0.8, label="agreement")
        tx.set_xlim(lo_t - pad, hi_t + pad)
        tx.set_ylim(lo_t - pad, hi_t + pad)
        tx.set_aspect("equal")
        tx.set_xlabel("measured temperature (°C)")
        tx.set_ylabel("model temperature (°C)")
        tx.set_title("temperatures: model against measured", fontsize=9, color="0.25")
        tx.grid(True, color="0.85", linewidth=0.6)
        tx.legend(loc="upper left", fontsize=7.5, frameon=True, framealpha=0.9)
    fig.suptitle(f"{cal.original.name}: measured against model ({bench.name}, "
                 f"{bench.size} points)", fontsize=12, fontweight="bold")
    fig.text(0.01, 0.008, CAPTION, fontsize=7.5, color="0.3", ha="left", va="bottom",
             style="italic")
    path = Path(path)
    fig.savefig(path, format=fmt, dpi=150)
    return path
