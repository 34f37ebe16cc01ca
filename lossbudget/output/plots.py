"""Plots for a review: efficiency map, efficiency curves, loss breakdown, temperatures,
every mechanism at two points, and the margins of a limit check.

The map figures take a :class:`~lossbudget.budget.Budget` over input voltage (axis 0) × load
(axis 1), as :func:`lossbudget.sweep.sweep` or :func:`lossbudget.sweep.sweep_rows` returns it;
:func:`mechanism_bars` two one-point budgets; :func:`margin_chart` a limit report. Each
writes one figure to ``path``: PNG, SVG or PDF by the suffix, written to a temporary file
in the same folder and renamed, so a failed write leaves nothing half-written. matplotlib is
imported inside the functions and used through :class:`matplotlib.figure.Figure` with the Agg
canvas only, so no pyplot state is created or changed. Colours are the Okabe–Ito set (safe for
the common colour-vision deficiencies) and cividis for the map; line styles and markers
repeat the distinction for print in grey. Every figure carries the cautions on two lines
inside its lower edge.
"""

from __future__ import annotations

import functools
import textwrap
from pathlib import Path

import numpy as np

from lossbudget.budget import Budget
from lossbudget.output.files import atomic_paths
from lossbudget.units import format_quantity

FORMATS = (".png", ".svg", ".pdf")
CAPTION = ("Estimates, not measurements: verify on hardware.\n"
           "Hot parts and high voltages hurt people; follow safety standards, local codes and "
           "licensed practice.")
CAPTION_STRIP = 0.55  # height kept for the two caption lines at the bottom of a figure [in]
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


def _plain_text(draw):
    """Draw a figure with maths parsing off: every text is shown as written.

    Names come from the design file, and a "$" in one must not start matplotlib's mathtext
    (an unknown command there is an error); no figure here uses mathtext on purpose.
    """

    @functools.wraps(draw)
    def wrapper(*args, **kwargs):
        from matplotlib import rc_context

        with rc_context({"text.parse_math": False}):
            return draw(*args, **kwargs)

    return wrapper


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
    # keep a strip at the bottom for the two caption lines
    strip = CAPTION_STRIP / size[1]
    fig.get_layout_engine().set(rect=(0.0, strip, 1.0, 1.0 - strip))
    return fig


def _caption(fig) -> None:
    """The cautions, two lines at the bottom left, inside the figure."""
    fig.text(0.01, 0.008, CAPTION, fontsize=7.5, color="0.3", ha="left", va="bottom",
             style="italic", linespacing=1.3)


def _decorate(fig, ax, budget: Budget, what: str, *, vin: float | None = None) -> None:
    fig.suptitle(f"{budget.design_name}: {what}", fontsize=12, fontweight="bold")
    ax.set_title(_conditions(budget, vin=vin), fontsize=9, color="0.25")
    _caption(fig)
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
    """Legend text for flagged points: the reasons among ``budget.reason[mask]`` by kind,
    with their point counts (the two commonest kinds named)."""
    from lossbudget.sweep import group_reasons

    groups = group_reasons(np.asarray(budget.reason)[mask])
    if not groups:
        return "flagged, no result"
    shown = "\n".join(f"{count} × {textwrap.shorten(text, 70)}" for text, count in groups[:2])
    rest = sum(c for _, c in groups[2:])
    more = (f"\n+{rest} point{'s' * (rest > 1)} of {len(groups) - 2} other "
            f"kind{'s' * (len(groups) > 3)}" if len(groups) > 2 else "")
    return f"flagged, no result:\n{shown}{more}"


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


@_plain_text
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


@_plain_text
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
        Input voltages to draw; each is taken at the map row nearest it (no interpolation:
        the caller solves the input voltages it names as rows, as ``map`` does). By default
        up to four rows spread over the map. [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]

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


def _small_group(values: np.ndarray, total: np.ndarray, min_share: float) -> list[int]:
    """Rows of ``values`` that together stay below ``min_share`` of ``total`` at every load.

    The rows are taken smallest first (by their largest share at any load) for as long as
    the running sum stays under the share everywhere, so the group never hides more than
    ``min_share`` of the loss at any load.
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(total > 0, values / total, 0.0)
    share = np.nan_to_num(share, nan=0.0)
    peak = share.max(axis=1, initial=0.0)
    group: list[int] = []
    running = np.zeros(values.shape[1])
    for i in np.argsort(peak, kind="stable"):
        if (running + share[i]).max(initial=0.0) >= min_share:
            break
        running = running + share[i]
        group.append(int(i))
    return group


def _layer_style(n: int) -> tuple[str, str | None]:
    """Face colour and hatch of the n-th layer: the palette, then the palette hatched."""
    hatches = (None, "//", "..", "xx")
    return OKABE_ITO[n % len(OKABE_ITO)], hatches[(n // len(OKABE_ITO)) % len(hatches)]


@_plain_text
def loss_breakdown(budget: Budget, path, *, vin=None, rated_load: float | None = None,
                   min_share: float = 0.03) -> Path:
    """Stacked area of every component · mechanism loss versus load at one input voltage.

    The largest loss (summed over the load axis) is at the bottom of the stack. Only
    mechanisms that together stay below ``min_share`` of the total loss at every load are
    summed as "other" (the figure states the share), so the group never hides more than that;
    every other mechanism has a layer of its own (the palette, then the palette hatched).

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1).
    path : str or Path
        The file to write (.png, .svg or .pdf).
    vin : float, optional
        Input voltage; the map row nearest it (the middle row by default). The caller solves
        the input voltage exactly as a row when it matters (the title shows the row's value).
        [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]
    min_share : float
        Share of the total loss that the "other" group stays under at every load. [-]

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
    small = _small_group(values, total, min_share)
    if len(small) < 2:  # a group of one hides nothing: draw it as itself
        small = []
    order = [int(i) for i in np.argsort(-np.nansum(values, axis=1), kind="stable")
             if i not in small]
    ys = [values[i] for i in order]
    labels = [names[i] for i in order]
    styles = [_layer_style(n) for n in range(len(order))]
    if small:
        ys.append(values[small].sum(axis=0))
        labels.append(f"other: {len(small)} mechanisms\n(together under "
                      f"{min_share * 100:g} % of the loss at every load)")
        styles.append((OTHER_COLOUR, None))
    fig = _figure(size=(10.0, 6.0))
    ax = fig.add_subplot()
    base = np.zeros(load.size)
    handles = []
    from matplotlib.patches import Patch

    for y, label, (colour, hatch) in zip(ys, labels, styles, strict=True):
        top = base + np.nan_to_num(y, nan=0.0)
        top = np.where(np.isfinite(total), top, np.nan)
        ax.fill_between(load, np.where(np.isfinite(total), base, np.nan), top, facecolor=colour,
                        hatch=hatch, edgecolor="white", linewidth=0.5)
        handles.append(Patch(facecolor=colour, hatch=hatch, edgecolor="white", label=label))
        base = np.nan_to_num(top, nan=0.0)
    (line,) = ax.plot(load, total, color="black", linewidth=1.0, label="total loss")
    # legend top to bottom in the order the layers appear, total first
    ax.legend([line, *handles[::-1]], ["total loss", *labels[::-1]], loc="upper left",
              bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
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


def _temperature_panel(ax, budget: Budget, r: int, load: np.ndarray, parts: list[str],
                       colour: dict[str, str], derated: dict[str, float]) -> float:
    """One panel of part temperatures at map row ``r``; returns the highest value drawn."""
    for n, p in enumerate(parts):
        ax.plot(load, budget.temperatures[p][r], color=colour[p], linewidth=2.0,
                marker=MARKERS[n % len(MARKERS)], markevery=max(1, load.size // 10),
                markersize=5, label=p)
    # limit lines: parts sharing a limit alternate their dashes so every colour shows
    limits: dict[float, list[str]] = {}
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
        ax.text(1.0, value, label, transform=ax.get_yaxis_transform(), fontsize=8,
                va="center", ha="left", color="0.15")
    amb = np.asarray(budget.coords["ambient"])[r]
    ax.plot(load, amb, color="0.45", linewidth=1.0, linestyle="-.", label="ambient")
    hottest = np.nanmax(np.array([budget.temperatures[p][r] for p in parts] or [[0.0]]),
                        initial=0.0)
    if budget.flagged[r].any():
        ax.text(0.99, 0.02, _flag_text(budget, budget.flagged & _rows_mask(budget.shape[0], [r]))
                + " (gaps)", transform=ax.transAxes, fontsize=8, ha="right")
    ax.grid(True, color="0.85", linewidth=0.6)
    ax.set_axisbelow(True)
    return max([*limits, float(hottest)])


def _panel_title(budget: Budget, r: int, what: str) -> str:
    """Which corner, input voltage and ambient a panel shows.

    ``what`` may carry a note on the input voltage after a "|" ("hot corner|why this vin").
    """
    what, _, why = what.partition("|")
    vin = float(np.asarray(budget.coords["vin"])[r, 0])
    amb = np.asarray(budget.coords["ambient"])[r]
    corner = budget.provenance.get("corner", "typ")
    values = "worst-case part values" if corner == "worst" else "typical part values"
    why = f" ({why})" if why else ""
    return (f"{what}: vin {_q(vin, 'voltage')}{why}, ambient "
            f"{_constant(amb, 'temperature')}, {values}")


@_plain_text
def temperature_curves(budget: Budget, path, *, vin=None,
                       rated_load: float | None = None,
                       design_limits: dict[str, float] | None = None,
                       hot: Budget | None = None, hot_vin=None,
                       hot_what: str = "hot corner", what: str = "nominal corner") -> Path:
    """Each part's temperature versus load, with its limit dashed in the same colour.

    With ``hot`` a second panel below shows the same parts at another corner (for a review:
    the maximum ambient with worst-case part values); each panel's title names its input
    voltage, ambient and part values.

    Parameters
    ----------
    budget : Budget
        A map over input voltage (axis 0) × load (axis 1): the upper panel.
    path : str or Path
        The file to write (.png, .svg or .pdf).
    vin : float, optional
        Input voltage of the upper panel; the map row nearest it (the middle row by
        default). [V]
    rated_load : float, optional
        Rated output current, for a secondary axis in percent of rated. [A]
    design_limits : dict, optional
        Part -> temperature design limit after derating [degC]; drawn instead of the rated
        limits where given (the rated limit is then named in the line's label).
    hot : Budget, optional
        A second map over input voltage × load for the lower panel. [-]
    hot_vin : float, optional
        Input voltage of the lower panel; the row of ``hot`` nearest it. [V]
    hot_what : str
        What the lower panel shows, for its title; text after a "|" says why its input
        voltage was chosen. [-]
    what : str
        What the upper panel shows, for its title (with ``hot``). [-]

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
    derated = design_limits or {}
    colour = {p: OKABE_ITO[n % len(OKABE_ITO)] for n, p in enumerate(parts)}
    panels = [(budget, r, what if hot is not None else "temperatures")]
    if hot is not None:
        hot_axis, hot_load = _grid(hot)
        if not np.array_equal(hot_load, load):
            raise ValueError("the hot-corner map must share the load axis of the main map")
        panels.append((hot, _row(hot_axis, hot_vin), hot_what))
    fig = _figure(size=(9.5, 5.6 if hot is None else 9.6))
    axes = [fig.add_subplot(len(panels), 1, k + 1) for k in range(len(panels))]
    for ax in axes[1:]:
        ax.sharex(axes[0])
    tops = []
    for ax, (b, row, what) in zip(axes, panels, strict=True):
        tops.append(_temperature_panel(ax, b, row, load, parts, colour, derated))
        ax.set_ylabel("temperature (°C)")
        if hot is not None:
            ax.set_title(_panel_title(b, row, what), fontsize=9.5, loc="left")
    amb_low = min(float(np.min(np.asarray(b.coords["ambient"])[row])) for b, row, _ in panels)
    top, bottom = max(tops), min(0.0, amb_low - 5.0)
    for ax in axes:
        ax.set_ylim(bottom, top + 0.06 * (top - bottom))
        _load_axis(ax, load)
    _rated_axis(axes[0], rated_load)
    handles, _ = axes[-1].get_legend_handles_labels()
    handles.append(Line2D([], [], color="0.3", linestyle="--",
                          label=("design limit after derating" if derated else "rated limit")
                          + " (dashed, same colour)"))
    _legend_below(axes[-1], handles, ncols=4)
    fig.suptitle(f"{budget.design_name}: temperatures versus load", fontsize=12,
                 fontweight="bold")
    if hot is None:
        axes[0].set_title(_conditions(budget, vin=float(vin_axis[r])), fontsize=9, color="0.25")
    _caption(fig)
    return _save(fig, path)


def _one(value) -> float:
    return float(np.asarray(value, dtype=float).ravel()[0])


@_plain_text
def mechanism_bars(nominal: Budget, worst: Budget, path, *, nominal_what: str,
                   worst_what: str) -> Path:
    """Every loss mechanism at two operating points as sorted horizontal bars with values.

    Parameters
    ----------
    nominal : Budget
        One operating point (say, nominal input voltage and ambient, rated load, typical
        part values). [-]
    worst : Budget
        One operating point at the worst case (say, maximum ambient, worst-case part
        values). [-]
    path : str or Path
        The file to write (.png, .svg or .pdf).
    nominal_what, worst_what : str
        What each point is, for the legend (its corner, input voltage, load and ambient). [-]

    Returns
    -------
    Path
        The file written.

    Notes
    -----
    Every mechanism the budget computes is drawn (zero ones too), sorted by the worst-case
    value, largest at the top; each bar carries its value and its share of that point's
    total loss. A point that did not solve is named with its reason instead of bars.
    """
    from matplotlib.patches import Patch

    path = _check_path(path)
    keys = list(dict.fromkeys([*nominal.losses, *worst.losses]))
    points = []
    for b in (nominal, worst):
        total = _one(b.total_loss)
        values = np.array([_one(b.losses[k]) if k in b.losses else np.nan for k in keys])
        reason = str(np.asarray(b.reason).ravel()[0]) if bool(np.asarray(b.flagged).ravel()[0]) \
            else ""
        points.append((values, total, reason))
    key = np.nan_to_num(points[1][0], nan=-1.0) + 1e-9 * np.nan_to_num(points[0][0], nan=0.0)
    order = np.argsort(-key, kind="stable")
    n = len(keys)
    fig = _figure(size=(10.0, max(4.5, 1.6 + 0.36 * n)))
    ax = fig.add_subplot()
    y = np.arange(n)[::-1].astype(float)
    colours = (OKABE_ITO[0], OKABE_ITO[3])
    hatches = (None, "//")
    widest = max([np.nanmax(v, initial=0.0) for v, _, _ in points] + [1e-12])
    handles = []
    for k, ((values, total, reason), colour, hatch, what) in enumerate(zip(
            points, colours, hatches, (nominal_what, worst_what), strict=True)):
        offset = 0.2 if k == 0 else -0.2
        v = values[order]
        ax.barh(y + offset, np.nan_to_num(v, nan=0.0), height=0.38, color=colour, hatch=hatch,
                edgecolor="white", linewidth=0.5)
        for yy, value in zip(y + offset, v, strict=True):
            if np.isfinite(value):
                share = f" ({value / total * 100:.1f} %)" if total > 0 else ""
                ax.text(value + 0.01 * widest, yy, f"{value:.3g} W{share}", va="center",
                        fontsize=7.5)
        label = f"{what}: total {total:.3g} W" if not reason else f"{what}: not solved, {reason}"
        handles.append(Patch(facecolor=colour, hatch=hatch, edgecolor="white", label=label))
    ax.set_yticks(y, [f"{c} · {m}" for c, m in (keys[i] for i in order)], fontsize=8.5)
    ax.set_xlim(0.0, widest * 1.28)
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_xlabel("loss (W)")
    ax.grid(True, axis="x", color="0.85", linewidth=0.6)
    ax.set_axisbelow(True)
    _legend_below(ax, handles, ncols=1)
    fig.suptitle(f"{nominal.design_name}: every loss mechanism at rated load", fontsize=12,
                 fontweight="bold")
    ax.set_title("sorted by the worst-case value; each bar: loss and share of that point's "
                 "total", fontsize=9, color="0.25")
    _caption(fig)
    return _save(fig, path)


STATUS_STYLE = {"ok": (OKABE_ITO[2], None), "caution": (OKABE_ITO[1], ".."),
                "fail": (OKABE_ITO[3], "xx")}
"""Face colour and hatch of a margin bar by status (the hatch repeats it in grey print)."""


def _where_label(where: dict) -> str:
    dims = {"vin": "voltage", "vout": "voltage", "load": "current", "ambient": "temperature",
            "fsw": "frequency"}
    return " · ".join(f"{k} {_q(float(v), dims[k])}" for k, v in where.items() if k in dims)


@_plain_text
def margin_chart(report, path) -> Path:
    """One horizontal bar per limit row: the margin to the design limit after derating.

    Parameters
    ----------
    report : LimitReport
        A limit check (:func:`lossbudget.check_limits`). [-]
    path : str or Path
        The file to write (.png, .svg or .pdf).

    Returns
    -------
    Path
        The file written.

    Notes
    -----
    Temperatures (margin in kelvin) and the other limits (margin in percent of the design
    limit) are two panels, each sorted tightest first at the top; a bar's colour and hatch
    give its status and its label the part, the limit and the worst case's location. Rows
    without a margin (a stage that did not solve, a limit not evaluated) are listed under
    the chart with their status and reason.
    """
    from matplotlib.patches import Patch

    path = _check_path(path)
    groups = {"K": [], "fraction": []}
    others = []
    for row in report.rows:
        if np.isfinite(row.margin) and row.margin_unit in groups:
            groups[row.margin_unit].append(row)
        else:
            others.append(row)
    panels = [(u, sorted(rows, key=lambda r: r.margin)) for u, rows in groups.items() if rows]
    heights = [max(len(rows), 1) for _, rows in panels] or [1]
    extra = 0.22 * len(others)
    fig = _figure(size=(10.0, 2.2 + 0.5 * sum(heights) + extra))
    if extra:
        fig.get_layout_engine().set(rect=(0.0, (CAPTION_STRIP + extra + 0.1) / fig.get_figheight(),
                                          1.0, 1.0 - (CAPTION_STRIP + extra + 0.1)
                                          / fig.get_figheight()))
    grid = fig.add_gridspec(max(len(panels), 1), 1, height_ratios=heights)
    for k, (unit, rows) in enumerate(panels):
        ax = fig.add_subplot(grid[k])
        scale = 1.0 if unit == "K" else 100.0
        m = np.array([r.margin * scale for r in rows])
        y = np.arange(len(rows))[::-1].astype(float)
        for yy, value, r in zip(y, m, rows, strict=True):
            colour, hatch = STATUS_STYLE.get(r.status, ("0.5", None))
            ax.barh(yy, value, height=0.6, color=colour, hatch=hatch, edgecolor="0.25",
                    linewidth=0.5)
            text = f"{value:+.1f} K" if unit == "K" else f"{value:+.1f} %"
            ax.text(value, yy, f" {text} ({r.status})" if value >= 0 else f"{text} ({r.status}) ",
                    va="center", ha="left" if value >= 0 else "right", fontsize=8)
        ax.set_yticks(y, [f"{r.part} {r.quantity}\n{_where_label(r.where)}" for r in rows],
                      fontsize=8)
        lo, hi = min(0.0, float(m.min())), max(0.0, float(m.max()))
        span = (hi - lo) or 1.0
        ax.set_xlim(lo - 0.35 * span * (lo < 0), hi + 0.35 * span)
        ax.axvline(0.0, color="black", linewidth=1.0)
        ax.set_ylim(-0.6, len(rows) - 0.4)
        ax.set_xlabel("margin to the design limit after derating (K)" if unit == "K" else
                      "margin to the design limit after derating (% of the design limit)")
        ax.grid(True, axis="x", color="0.85", linewidth=0.6)
        ax.set_axisbelow(True)
        if k == 0:
            ax.set_title(f"derating {report.derating} · {report.corner}-case part values · "
                         "tightest first", fontsize=9, color="0.25")
            ax.legend(handles=[Patch(facecolor=c, hatch=h, edgecolor="0.25", label=s)
                               for s, (c, h) in STATUS_STYLE.items()],
                      loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8,
                      frameon=False, title="status", title_fontsize=8)
    if not panels:
        ax = fig.add_subplot(grid[0])
        ax.axis("off")
        ax.text(0.5, 0.5, "no limit row has a margin", ha="center", va="center")
    for n, r in enumerate(others):
        fig.text(0.01, (CAPTION_STRIP + 0.05 + 0.22 * (len(others) - 1 - n)) / fig.get_figheight(),
                 textwrap.shorten(f"{r.part} {r.quantity}: {r.status.upper()}, no margin: "
                                  f"{r.basis}", 150), fontsize=8, color="0.1", ha="left",
                 va="bottom")
    fig.suptitle(f"{report.design_name}: margins to the design limits", fontsize=12,
                 fontweight="bold")
    _caption(fig)
    return _save(fig, path)
