"""Plots of a map: efficiency map, efficiency curves, loss breakdown, temperatures.

Each function takes a :class:`~lossbudget.budget.Budget` over input voltage (axis 0) × load
(axis 1), as :func:`lossbudget.sweep.sweep` or :func:`lossbudget.sweep.sweep_rows` returns it,
and writes one figure to ``path``: PNG, SVG or PDF by the suffix, written to a temporary file
in the same folder and renamed, so a failed write leaves nothing half-written. matplotlib is
imported inside the functions and used through :class:`matplotlib.figure.Figure` with the Agg
canvas only, so no pyplot state is created or changed. Colours are the Okabe–Ito set (safe for
the common colour-vision deficiencies) and cividis for the map; line styles and markers
repeat the distinction for print in grey. Every figure carries the caption line
"Estimates — verify on hardware".
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from lossbudget.budget import Budget
from lossbudget.output.files import atomic_paths
from lossbudget.units import format_quantity

FORMATS = (".png", ".svg", ".pdf")
CAPTION = ("Estimates, not measurements: verify on hardware. Hot parts and high voltages "
           "hurt people; follow safety standards, local codes and licensed practice.")
# Okabe & Ito, "Color Universal Design", 2008: blue, orange, bluish green, vermillion,
# reddish purple, sky blue, yellow (black kept for lines of reference).
OKABE_ITO = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#F0E442")
OTHER_COLOUR = "#BBBBBB"
MARKERS = ("o", "s", "^", "D", "v", "P", "X")
FLAGGED_FACE = "#D9D9D9"
FLAGGED_HATCH = "///"
OVER_RATING_HATCH = "xx"
OVER_RATING_EDGE = "#D55E00"  # Okabe–Ito vermillion


# --------------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------------


def _check_path(path) -> Path:
    path = Path(path)
    if path.suffix.lower() not in FORMATS:
        raise ValueError(f"{path}: expected a .png, .svg or .pdf file name, got "
                         f"{path.suffix or 'no suffix'!r}")
    return path


def _grid(budget: Budget) -> tuple[np.ndarray, np.ndarray]:
    """The input-voltage and load axes of a 2-D map (axis 0 vin, axis 1 load)."""
    if len(budget.shape) != 2:
        raise ValueError(f"expected a map over input voltage × load (2-D), got shape "
                         f"{budget.shape}")
    vin = np.asarray(budget.coords["vin"])
    load = np.asarray(budget.coords["load"])
    if not (np.all(vin == vin[:, :1]) and np.all(load == load[:1, :])):
        raise ValueError("expected axis 0 input voltage and axis 1 load (as sweep builds them)")
    return vin[:, 0], load[0, :]


def _is_log(load: np.ndarray) -> bool:
    """True where the load axis is spaced geometrically rather than linearly."""
    if load.size < 3 or np.any(load <= 0):
        return False
    steps = np.diff(np.log(load))
    return bool(np.allclose(steps, steps[0], rtol=1e-6)
                and not np.allclose(np.diff(load), load[1] - load[0], rtol=1e-6))


def _q(value: float, dimension: str) -> str:
    """A quantity for display on a figure (degrees as °C)."""
    return format_quantity(value, dimension).replace("degC", "°C")


def _constant(values: np.ndarray, dimension: str) -> str:
    lo, hi = float(np.min(values)), float(np.max(values))
    if lo == hi:
        return _q(lo, dimension)
    return f"{_q(lo, dimension)}–{_q(hi, dimension)}"


def _conditions(budget: Budget, *, vin: float | None = None) -> str:
    """The fixed conditions of a figure, one line."""
    c = budget.coords
    parts = []
    if vin is not None:
        parts.append(f"vin {_q(vin, 'voltage')}")
    parts += [
        f"vout {_constant(np.asarray(c['vout']), 'voltage')}",  # signed, as in the design
        f"ambient {_constant(np.asarray(c['ambient']), 'temperature')}",
        f"fsw {_constant(np.asarray(c['fsw']), 'frequency')}",
        f"corner {budget.provenance.get('corner', 'typ')}",
    ]
    return f"{budget.topology} · " + " · ".join(parts)


def _figure(*, size=(8.0, 5.6)):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    # keep a strip at the bottom for the caption line
    fig.get_layout_engine().set(rect=(0.0, 0.035, 1.0, 0.965))
    return fig


def _decorate(fig, ax, budget: Budget, what: str, *, vin: float | None = None) -> None:
    fig.suptitle(f"{budget.design_name}: {what}", fontsize=12, fontweight="bold")
    ax.set_title(_conditions(budget, vin=vin), fontsize=9, color="0.25")
    fig.text(0.01, 0.008, CAPTION, fontsize=7.5, color="0.3", ha="left", va="bottom",
             style="italic")
    ax.grid(True, color="0.85", linewidth=0.6)
    ax.set_axisbelow(True)


def _save(fig, path: Path) -> Path:
    """Write the figure atomically: a temporary file in the target folder, then a rename."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with atomic_paths([path]) as temps:
        fig.savefig(temps[0], format=path.suffix[1:].lower(), dpi=150)
    return path


def _rated_axis(ax, rated_load: float | None) -> None:
    """A secondary x axis in percent of the rated output current."""
    if rated_load is None or not rated_load > 0:
        return
    top = ax.secondary_xaxis(
        "top", functions=(lambda a: a / rated_load * 100.0, lambda p: p * rated_load / 100.0)
    )
    top.set_xlabel(f"load (% of rated {_q(rated_load, 'current')})", fontsize=9)
    top.tick_params(labelsize=8)
    if ax.get_xscale() == "log":
        _plain_log(top.xaxis)


def _plain_log(axis) -> None:
    """Plain numbers (0.1, 0.2, 0.5, 1, 2) on a logarithmic axis instead of powers of ten."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter, NullLocator

    axis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    axis.set_minor_locator(NullLocator())
    axis.set_minor_formatter(NullFormatter())


def _load_axis(ax, load: np.ndarray) -> None:
    if _is_log(load):
        ax.set_xscale("log")
        _plain_log(ax.xaxis)
    ax.set_xlim(load[0], load[-1]) if load[-1] > load[0] else None
    ax.set_xlabel("output current (A)")


def _legend_below(ax, handles, *, ncols: int = 2) -> None:
    """A legend under the x axis (inside the layout, clear of the caption strip)."""
    ax.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.11),
              ncols=min(ncols, len(handles)), fontsize=8.5, frameon=False)


def _row(vin_axis: np.ndarray, vin: float | None) -> int:
    """Index of the map row nearest the asked input voltage (the middle row by default)."""
    if vin is None:
        return vin_axis.size // 2
    return int(np.argmin(np.abs(vin_axis - float(vin))))


def _over_rating_text(budget: Budget, mask: np.ndarray) -> str:
    """Legend text for points past a rating: the parts and quantities, in short."""
    named: list[str] = []
    for text in np.unique(np.asarray(budget.rating_reasons)[mask].astype(str)):
        for item in text.split("; "):
            name = item.split(":")[0]
            if name and name not in named:
                named.append(name)
    shown = ", ".join(named[:4]) + (f" (+{len(named) - 4} more)" if len(named) > 4 else "")
    return f"over a part's rating: {shown}"


def _flag_text(budget: Budget, mask: np.ndarray) -> str:
    """Legend text for flagged points: the commonest reason among ``budget.reason[mask]``."""
    reasons, counts = np.unique(np.asarray(budget.reason)[mask].astype(str),
                                return_counts=True)
    top = reasons[np.argmax(counts)] if reasons.size else ""
    more = f" (+{reasons.size - 1} other reasons)" if reasons.size > 1 else ""
    return f"flagged, no result: {top}{more}"


def _rows_mask(n: int, rows) -> np.ndarray:
    """A column mask selecting map rows ``rows`` of ``n``."""
    return np.isin(np.arange(n), rows)[:, None]


def _nice_floor(x: float, step: float) -> float:
    return float(np.floor(x / step) * step)


_NICE = np.concatenate([np.arange(1.0, 3.0, 0.1), np.arange(3.0, 5.0, 0.25),
                        np.arange(5.0, 10.01, 0.5)])


def _efficiency_levels(eff: np.ndarray) -> np.ndarray:
    """Contour levels (%) spaced so that each band covers a similar share of the map.

    The levels are quantiles of the map's loss fraction (100 − η) rounded to a series of
    round numbers (steps of 0.1 from 1 to 3, 0.25 to 5, 0.5 to 10 in each decade), so the
    bands stay fine near the peak, where most of a map usually lies, and coarse at light load,
    where efficiency falls steeply. The lowest 3 % of the map falls
    below the first level (drawn as the colour bar's lower extension).
    """
    loss = 100.0 - eff
    q = np.quantile(loss, np.linspace(0.0, 0.97, 15))
    q = np.maximum(q, 1e-6)
    decade = 10.0 ** np.floor(np.log10(q))
    series = _NICE[None, :] * decade[:, None]
    nice = series[np.arange(q.size), np.argmin(np.abs(series - q[:, None]), axis=1)]
    levels = np.unique(np.round(100.0 - nice, 6))
    top = float(eff.max())
    if levels[-1] < top:  # close the top band just above the peak
        step = 10.0 ** np.floor(np.log10(max(100.0 - top, 1e-6))) / 10.0
        levels = np.append(levels, np.ceil(top / step) * step + (0 if top % step else step))
    if levels.size < 2:
        levels = np.array([levels[0] - 0.1, levels[0] + 0.1])
    return levels


def _dcm_field(budget: Budget) -> tuple[np.ndarray, float]:
    """A field whose contour is the CCM/DCM boundary, and its level.

    Where the inductor's average and peak currents are known and the sign of the valley
    current 2·I_avg − I_pk (triangular ripple) matches the DCM mask at every point, that
    continuous field is used, so the boundary is interpolated between grid points; otherwise
    the mask itself (0/1) is contoured at 0.5.
    """
    dcm = budget.dcm.astype(float)
    mask = np.where(budget.flagged, np.nan, dcm)
    try:
        valley = 2.0 * budget.stress("inductor", "i_avg") - budget.stress("inductor", "i_pk")
    except KeyError:
        return mask, 0.5
    ok = ~budget.flagged
    if np.array_equal((valley < 0)[ok], budget.dcm[ok]):
        return np.where(ok, valley, np.nan), 0.0
    return mask, 0.5


# --------------------------------------------------------------------------------------------
# the figures
# --------------------------------------------------------------------------------------------


def efficiency_map(budget: Budget, path, *, rated_load: float | None = None) -> Path:
    """Filled efficiency contours over load × input voltage.

    Iso-efficiency lines are labelled, the CCM/DCM boundary (the contour of the DCM mask) is
    drawn dashed, the peak is marked and annotated, and flagged points are shown hatched grey
    with their reason in the legend.

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1).
    path : str or Path
        The file to write (.png, .svg or .pdf).
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]

    Returns
    -------
    Path
        The file written.
    """
    from matplotlib import patheffects
    from matplotlib.colors import BoundaryNorm
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    path = _check_path(path)
    vin, load = _grid(budget)
    if vin.size < 2 or load.size < 2:
        raise ValueError("an efficiency map needs at least 2 input voltages and 2 loads")
    eff = budget.efficiency * 100.0
    flagged = budget.flagged
    fig = _figure(size=(8.4, 6.0))
    ax = fig.add_subplot()
    ax.set_facecolor(FLAGGED_FACE)  # flagged holes show grey under their hatching
    handles = []
    finite = eff[np.isfinite(eff)]
    if finite.size:
        levels = _efficiency_levels(finite)
        extend = "min" if finite.min() < levels[0] else "neither"
        norm = BoundaryNorm(levels, ncolors=256, extend=extend)
        filled = ax.contourf(load, vin, eff, levels=levels, cmap="cividis", norm=norm,
                             extend=extend)
        bar = fig.colorbar(filled, ax=ax, pad=0.02, spacing="uniform")
        bar.set_label("efficiency (%)")
        bar.set_ticks(levels, labels=[f"{v:g}" for v in levels])
        lines = ax.contour(load, vin, eff, levels=levels[:-1], colors="black",
                           linewidths=0.6, alpha=0.8)
        # every other line labelled (counted down from the peak), the colour bar names the rest
        ax.clabel(lines, levels=lines.levels[::-2], fmt=lambda v: f"{v:g} %", fontsize=7.5,
                  inline=True)
        k = np.unravel_index(np.nanargmax(eff), eff.shape)
        pv, pl, pe = vin[k[0]], load[k[1]], eff[k]
        ax.plot(pl, pv, marker="*", markersize=16, markerfacecolor="white",
                markeredgecolor="black", markeredgewidth=1.2, linestyle="none", zorder=5,
                clip_on=False)
        right = pl > np.sqrt(load[0] * load[-1]) if _is_log(load) else pl > load.mean()
        upper = pv > vin.mean()
        ax.annotate(
            f"peak {pe:.2f} %\n{_q(pv, 'voltage')}, {_q(pl, 'current')}",
            xy=(pl, pv), xytext=(-70 if right else 30, -34 if upper else 26),
            textcoords="offset points", fontsize=9, ha="center",
            bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": "0.3", "alpha": 0.92},
            arrowprops={"arrowstyle": "-", "color": "0.2", "linewidth": 0.8}, zorder=6,
        )
        handles.append(Line2D([], [], marker="*", markersize=12, markerfacecolor="white",
                              markeredgecolor="black", linestyle="none",
                              label="peak efficiency"))
    ok = ~flagged
    if budget.dcm[ok].any() and not budget.dcm[ok].all():
        field, level = _dcm_field(budget)
        halo = [patheffects.withStroke(linewidth=3.5, foreground="white")]
        boundary = ax.contour(load, vin, field, levels=[level], colors="black",
                              linewidths=1.8, linestyles="--")
        boundary.set_path_effects(halo)
        handles.append(Line2D([], [], color="black", linestyle="--", linewidth=1.8,
                              path_effects=halo, label="CCM/DCM boundary (DCM at lighter load)"))
    if flagged.any():
        hatch = ax.contourf(load, vin, flagged.astype(float), levels=[0.5, 1.5],
                            colors="none", hatches=[FLAGGED_HATCH])
        hatch.set_edgecolor("0.35")
        hatch.set_linewidth(0.0)
        handles.append(Patch(facecolor=FLAGGED_FACE, edgecolor="0.35", hatch=FLAGGED_HATCH,
                             label=_flag_text(budget, flagged)))
    elif not finite.size:
        ax.text(0.5, 0.5, "no feasible point", transform=ax.transAxes, ha="center")
    over = budget.flags.get("over_rating")
    if over is not None and over.any():
        # solved points where a part passes an absolute rating (SPEC §2.10)
        shade = ax.contourf(load, vin, over.astype(float), levels=[0.5, 1.5], colors="none",
                            hatches=[OVER_RATING_HATCH])
        shade.set_edgecolor(OVER_RATING_EDGE)
        shade.set_linewidth(0.0)
        handles.append(Patch(facecolor="none", edgecolor=OVER_RATING_EDGE,
                             hatch=OVER_RATING_HATCH, label=_over_rating_text(budget, over)))
    _load_axis(ax, load)
    ax.set_ylim(vin[0], vin[-1])
    ax.set_ylabel("input voltage (V)")
    _rated_axis(ax, rated_load)
    _decorate(fig, ax, budget, "efficiency map")
    ax.grid(False)
    if handles:
        _legend_below(ax, handles)
    return _save(fig, path)


def efficiency_curves(budget: Budget, path, *, vins=None,
                      rated_load: float | None = None) -> Path:
    """Efficiency versus load at chosen input voltages.

    Each curve is drawn solid where the stage runs in CCM and dotted where it runs in DCM;
    flagged points are gaps, marked with a cross on the lower edge.

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1).
    path : str or Path
        The file to write (.png, .svg or .pdf).
    vins : sequence of float, optional
        Input voltages to draw; each is taken at the map row nearest it (no interpolation).
        By default up to four rows spread over the map. [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]
    design_limits : dict, optional
        Part -> temperature design limit after derating [degC]; drawn instead of the rated
        limits where given (the rated limit is then named in the line's label).

    Returns
    -------
    Path
        The file written.
    """
    from matplotlib.lines import Line2D

    path = _check_path(path)
    vin, load = _grid(budget)
    if vins is None:
        rows = np.unique(np.round(np.linspace(0, vin.size - 1, min(vin.size, 4))).astype(int))
    else:
        rows = np.unique([_row(vin, v) for v in np.atleast_1d(vins)])
    eff = budget.efficiency * 100.0
    dcm = budget.dcm & ~budget.flagged
    fig = _figure()
    ax = fig.add_subplot()
    every = max(1, load.size // 10)
    any_dcm = any_flag = False
    handles = []
    for n, r in enumerate(rows):
        colour, marker = OKABE_ITO[n % len(OKABE_ITO)], MARKERS[n % len(MARKERS)]
        y = eff[r]
        ccm = ~dcm[r]
        # the CCM trace reaches one point into DCM so that the two traces meet
        joined = ccm | np.concatenate([ccm[1:], [False]]) | np.concatenate([[False], ccm[:-1]])
        ax.plot(load, np.where(joined, y, np.nan), color=colour, linewidth=2.0)
        ax.plot(load, y, color=colour, marker=marker, markevery=every, markersize=5,
                linestyle="none")
        handles.append(Line2D([], [], color=colour, linewidth=2.0, marker=marker, markersize=5,
                              label=f"vin {_q(vin[r], 'voltage')}"))
        if dcm[r].any():
            any_dcm = True
            ax.plot(load, y, color=colour, linewidth=1.6, linestyle=":")
        if budget.flagged[r].any():
            any_flag = True
            ax.plot(load[budget.flagged[r]], np.zeros(int(budget.flagged[r].sum())),
                    marker="x", color=colour, linestyle="none", clip_on=False,
                    transform=ax.get_xaxis_transform())
    finite = eff[rows][np.isfinite(eff[rows])]
    if finite.size:
        lo = _nice_floor(float(finite.min()) - 0.3, 1.0)
        ax.set_ylim(lo, min(100.0, float(finite.max()) + 0.6))
    if any_dcm:
        handles.append(Line2D([], [], color="0.3", linestyle=":", label="dotted: DCM"))
    if any_flag:
        handles.append(Line2D([], [], color="0.3", marker="x", linestyle="none",
                              label=_flag_text(budget, budget.flagged & _rows_mask(vin.size,
                                                                            rows))))
    ax.legend(handles=handles, loc="lower right", fontsize=8.5, framealpha=0.92)
    _load_axis(ax, load)
    ax.set_ylabel("efficiency (%)")
    _rated_axis(ax, rated_load)
    _decorate(fig, ax, budget, "efficiency versus load")
    return _save(fig, path)


def loss_breakdown(budget: Budget, path, *, vin=None, rated_load: float | None = None,
                   min_share: float = 0.03) -> Path:
    """Stacked area of every component · mechanism loss versus load at one input voltage.

    The largest loss (summed over the load axis) is at the bottom of the stack; losses whose
    share of the total stays below ``min_share`` at every load, and any beyond the seventh,
    are summed as "other".

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1).
    path : str or Path
        The file to write (.png, .svg or .pdf).
    vin : float, optional
        Input voltage; the map row nearest it (the middle row by default). [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]
    min_share : float
        Share of the total loss below which a mechanism joins "other". [-]

    Returns
    -------
    Path
        The file written.
    """
    path = _check_path(path)
    vin_axis, load = _grid(budget)
    r = _row(vin_axis, vin)
    total = budget.total_loss[r]
    names, values = [], []
    for (component, mechanism), value in budget.losses.items():
        names.append(f"{component} · {mechanism}")
        values.append(value[r])
    values = np.array(values).reshape(len(names), load.size)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.nanmax(np.where(total > 0, values / total, 0.0), axis=1, initial=0.0)
    order = np.argsort(-np.nansum(values, axis=1), kind="stable")
    big = [i for i in order if share[i] >= min_share][: len(OKABE_ITO)]
    small = [i for i in order if i not in big]
    ys = [values[i] for i in big]
    labels = [names[i] for i in big]
    colours = list(OKABE_ITO[: len(big)])
    if small:
        ys.append(values[small].sum(axis=0))
        labels.append(f"other ({len(small)} smaller mechanisms)")
        colours.append(OTHER_COLOUR)
    fig = _figure(size=(9.0, 5.6))
    ax = fig.add_subplot()
    ax.stackplot(load, np.array(ys), labels=labels, colors=colours, edgecolor="white",
                 linewidth=0.5)
    ax.plot(load, total, color="black", linewidth=1.0, label="total loss")
    handles, labs = ax.get_legend_handles_labels()
    # legend top to bottom in the order the layers appear, total first
    handles = [handles[-1], *handles[-2::-1]]
    labs = [labs[-1], *labs[-2::-1]]
    ax.legend(handles, labs, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8.5,
              frameon=False)
    _load_axis(ax, load)
    ax.set_ylim(bottom=0.0)
    ax.set_ylabel("loss (W)")
    _rated_axis(ax, rated_load)
    if budget.flagged[r].any():
        ax.text(0.01, 0.98, _flag_text(budget, budget.flagged & _rows_mask(vin_axis.size, [r]))
                + " (gaps)",
                transform=ax.transAxes, fontsize=8, va="top")
    _decorate(fig, ax, budget, "loss breakdown versus load", vin=float(vin_axis[r]))
    return _save(fig, path)


def temperature_curves(budget: Budget, path, *, vin=None,
                       rated_load: float | None = None,
                       design_limits: dict[str, float] | None = None) -> Path:
    """Each part's temperature versus load, with its limit dashed in the same colour.

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1).
    path : str or Path
        The file to write (.png, .svg or .pdf).
    vin : float, optional
        Input voltage; the map row nearest it (the middle row by default). [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]
    design_limits : dict, optional
        Part -> temperature design limit after derating [degC]; drawn instead of the rated
        limits where given (the rated limit is then named in the line's label).

    Returns
    -------
    Path
        The file written.
    """
    from matplotlib.lines import Line2D

    path = _check_path(path)
    vin_axis, load = _grid(budget)
    r = _row(vin_axis, vin)
    parts = [p for p in budget.temperature_limits if p in budget.temperatures]
    fig = _figure(size=(9.0, 5.6))
    ax = fig.add_subplot()
    colour = {p: OKABE_ITO[n % len(OKABE_ITO)] for n, p in enumerate(parts)}
    for n, p in enumerate(parts):
        ax.plot(load, budget.temperatures[p][r], color=colour[p], linewidth=2.0,
                marker=MARKERS[n % len(MARKERS)], markevery=max(1, load.size // 10),
                markersize=5, label=p)
    # limit lines: parts sharing a limit alternate their dashes so every colour shows
    limits: dict[float, list[str]] = {}
    derated = design_limits or {}
    for p in parts:
        if np.isfinite(budget.temperature_limits[p]):  # a part without its limit: no line
            limits.setdefault(float(derated.get(p, budget.temperature_limits[p])), []).append(p)
    for value, group in limits.items():
        k = len(group)
        for i, p in enumerate(group):
            ax.axhline(value, color=colour[p], linewidth=1.4,
                       linestyle=(5.0 * i, (5.0, 5.0 * (k - 1) + 1e-9 if k > 1 else 3.0)))
        rated = {_q(float(budget.temperature_limits[p]), "temperature") for p in group}
        label = f" {', '.join(group)}: {_q(value, 'temperature')}"
        if any(p in derated for p in group):
            label += f" (rated {', '.join(sorted(rated))})"
        ax.text(1.0, value, label,
                transform=ax.get_yaxis_transform(), fontsize=8, va="center", ha="left",
                color="0.15")
    amb = np.asarray(budget.coords["ambient"])[r]
    ax.plot(load, amb, color="0.45", linewidth=1.0, linestyle="-.", label="ambient")
    handles, _ = ax.get_legend_handles_labels()
    handles.append(Line2D([], [], color="0.3", linestyle="--",
                          label=("design limit after derating" if derated else "rated limit")
                          + " (dashed, same colour)"))
    _legend_below(ax, handles, ncols=4)
    hottest = np.nanmax(np.array([budget.temperatures[p][r] for p in parts] or [[0.0]]),
                        initial=0.0)
    top = max([*limits, float(hottest)])
    bottom = min(0.0, float(np.min(amb)) - 5.0)
    ax.set_ylim(bottom, top + 0.06 * (top - bottom))
    _load_axis(ax, load)
    ax.set_ylabel("temperature (°C)")
    _rated_axis(ax, rated_load)
    if budget.flagged[r].any():
        ax.text(0.99, 0.02, _flag_text(budget, budget.flagged & _rows_mask(vin_axis.size, [r]))
                + " (gaps)",
                transform=ax.transAxes, fontsize=8, ha="right")
    _decorate(fig, ax, budget, "temperatures versus load", vin=float(vin_axis[r]))
    return _save(fig, path)
