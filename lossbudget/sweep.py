"""Sweeps over the operating envelope: grids, load axes, weighted efficiency, map summaries.

One axis convention for every map: the axes given appear in the order vin, vout, load,
ambient, fsw, each along its own array axis (a map over input voltage and load has axis 0 the
input voltage and axis 1 the load).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields, replace

import numpy as np

from lossbudget.budget import Budget, MechanismStatus
from lossbudget.design import Corner, Design
from lossbudget.errors import DesignError
from lossbudget.solver import _solve


def sweep(design: Design, *, vin, load=None, load_fraction=None, vout=None, ambient=None,
          fsw=None, corner: Corner = "typ") -> Budget:
    """Solve the loss budget over the outer grid of the given axes.

    Parameters
    ----------
    design : Design or Variants
        A design from :func:`lossbudget.load_design`, or variants from
        :func:`lossbudget.variants` (the budget then leads with the variant axis).
    vin : array_like
        Input voltages (1-D). [V]
    load : array_like, optional
        Output currents (1-D), positive magnitudes. [A]
    load_fraction : array_like, optional
        Output currents as fractions of the rated current, instead of ``load``. [-]
    vout, ambient, fsw : array_like, optional
        Further axes (1-D); the nominal values where omitted. [V], [degC], [Hz]
    corner : {"typ", "worst"}
        Part values.

    Returns
    -------
    Budget
        Arrays of shape (len(vin), [len(vout),] len(load), [len(ambient),] [len(fsw)]).
    """
    return _solve(design, vin=vin, load=load, load_fraction=load_fraction, vout=vout,
                  ambient=ambient, fsw=fsw, corner=corner, outer=True)


# --------------------------------------------------------------------------------------------
# load axes
# --------------------------------------------------------------------------------------------


def load_axis(design: Design, *, start, stop, count, log: bool = False,
              percent: bool = False) -> np.ndarray:
    """Build a load axis: output currents from ``start`` to ``stop``, both included.

    Parameters
    ----------
    design : Design
        The design (its rated output current scales a percent axis).
    start, stop : float
        First and last load: output current [A], or percent of the rated output current
        when ``percent`` is true [%].
    count : int
        Number of points (1 gives the single point ``start``, which must equal ``stop``).
    log : bool
        Space the points geometrically (equal ratios) instead of linearly.
    percent : bool
        ``start`` and ``stop`` are percent of ``operating.iout_rated``.

    Returns
    -------
    ndarray
        Output currents, ascending. [A]

    Raises
    ------
    DesignError
        When the count is not a positive integer, a bound is negative or not finite, the
        bounds descend, a logarithmic axis touches zero, or one point is asked for between
        two different loads.
    """
    what = "load axis (percent of rated)" if percent else "load axis"
    problems = []
    if isinstance(count, bool) or not isinstance(count, int | np.integer) or count < 1:
        problems.append(f"{what}: expected a point count of at least 1, got {count!r}")
    lo, hi = float(start), float(stop)
    if not (math.isfinite(lo) and math.isfinite(hi)):
        problems.append(f"{what}: expected finite bounds, got {start!r}:{stop!r}")
    elif lo < 0 or hi < 0:
        problems.append(f"{what}: expected loads of 0 or more, got {start!r}:{stop!r}")
    elif hi < lo:
        problems.append(f"{what}: expected start <= stop (an ascending axis), "
                        f"got {start!r}:{stop!r}")
    elif log and (lo <= 0 or hi <= 0):
        problems.append(f"{what}: expected bounds above 0 on a logarithmic axis, "
                        f"got {start!r}:{stop!r}")
    if not problems and count == 1 and lo != hi:
        problems.append(f"{what}: expected 2 or more points between two different loads, "
                        f"got 1 point for {start!r}:{stop!r}")
    if problems:
        raise DesignError(problems)
    scale = design.operating.iout_rated / 100.0 if percent else 1.0
    axis = np.geomspace(lo, hi, count) if log else np.linspace(lo, hi, count)
    return axis * scale


# --------------------------------------------------------------------------------------------
# maps swept in blocks of input-voltage rows (for a progress indication)
# --------------------------------------------------------------------------------------------


def sweep_rows(design: Design, *, vin, load, ambient=None, corner: Corner = "typ",
               rows: int | None = None, progress=None) -> Budget:
    """Sweep a map of input voltage × load in blocks of input-voltage rows.

    The result equals ``sweep(design, vin=vin, load=load, ambient=ambient, corner=corner)``
    (axis 0 input voltage, axis 1 load); solving in blocks lets a caller show progress.

    Parameters
    ----------
    design : Design
        A design from :func:`lossbudget.load_design`.
    vin : array_like
        Input voltages (1-D). [V]
    load : array_like
        Output currents (1-D). [A]
    ambient : float, optional
        Ambient temperature (a scalar: the map stays 2-D); the nominal if omitted. [degC]
    corner : {"typ", "worst"}
        Part values.
    rows : int, optional
        Input-voltage rows per block; by default about 25,000 points a block.
    progress : callable, optional
        Called as ``progress(done_rows, total_rows)`` after each block.

    Returns
    -------
    Budget
        Arrays of shape (len(vin), len(load)).
    """
    vin = np.atleast_1d(np.asarray(vin, dtype=float)).ravel()
    load = np.atleast_1d(np.asarray(load, dtype=float)).ravel()
    amb = design.operating.ambient.nom if ambient is None else float(ambient)
    if rows is None:
        rows = max(1, 25_000 // max(load.size, 1))
    parts = []
    for s in range(0, vin.size, rows):
        block = vin[s:s + rows]
        parts.append(_solve(design, vin=block[:, None], load=load[None, :], load_fraction=None,
                            vout=None, ambient=amb, fsw=None, corner=corner, outer=False))
        if progress is not None:
            progress(min(s + rows, vin.size), vin.size)
    return parts[0] if len(parts) == 1 else _stack_rows(parts)


def _stack_rows(parts: list[Budget]) -> Budget:
    """Join budgets solved over consecutive blocks of axis 0 into one budget."""

    def join(values):
        first = values[0]
        if isinstance(first, np.ndarray) and first.ndim == len(parts[0].shape):
            return np.concatenate(values, axis=0)
        if isinstance(first, MechanismStatus):
            if first.zero_reason is None:
                return first
            return replace(first, zero_reason=np.concatenate([v.zero_reason for v in values]))
        return first

    out = {}
    for f in fields(Budget):
        values = [getattr(p, f.name) for p in parts]
        if isinstance(values[0], dict) and f.name not in ("provenance", "temperature_limits"):
            out[f.name] = {k: join([v[k] for v in values]) for k in values[0]}
        else:
            out[f.name] = join(values)
    return Budget(**out)


# --------------------------------------------------------------------------------------------
# weighted efficiency
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class WeightedFigure:
    """A weighted efficiency figure at one input voltage.

    ``value`` is a fraction (0–1), NaN where a load point it needs is flagged; ``reason`` then
    says which point and why. ``source`` names the document that defines the weighting.
    """

    name: str
    vin: float
    value: float
    reason: str
    source: str


@dataclass(frozen=True, slots=True, kw_only=True)
class _Weighting:
    name: str
    fractions: tuple[float, ...]
    weights: tuple[float, ...]
    source: str


WEIGHTINGS: tuple[_Weighting, ...] = (
    _Weighting(
        name="european",
        fractions=(0.05, 0.10, 0.20, 0.30, 0.50, 1.00),
        weights=(0.03, 0.06, 0.13, 0.10, 0.48, 0.20),
        source="European weighting (JRC-Ispra), EN 50530:2010 + A1:2013, Overall efficiency "
               "of grid connected photovoltaic inverters",
    ),
    _Weighting(
        name="cec",
        fractions=(0.10, 0.20, 0.30, 0.50, 0.75, 1.00),
        weights=(0.04, 0.05, 0.12, 0.21, 0.53, 0.05),
        source="CEC weighting: Bower, Whitaker, Erdman, Behnke, Fitzgerald, Performance Test "
               "Protocol for Evaluating Inverters Used in Grid-Connected Photovoltaic Systems, "
               "Sandia National Laboratories, 2004/2005",
    ),
    _Weighting(
        name="mean_25_100",
        fractions=(0.25, 0.50, 0.75, 1.00),
        weights=(0.25, 0.25, 0.25, 0.25),
        source="average active-mode efficiency: 10 CFR Part 430, Subpart B, Appendix Z; EU Code "
               "of Conduct on Energy Efficiency of External Power Supplies, Version 5, 2013",
    ),
    _Weighting(
        name="at_10pct",
        fractions=(0.10,),
        weights=(1.0,),
        source="10 % load efficiency: EU Code of Conduct on Energy Efficiency of External Power "
               "Supplies, Version 5, 2013",
    ),
)
"""The weightings: load points as fractions of the rated output current, and their weights."""


def weighted_efficiency(design: Design, *, vin=None, vout=None, ambient=None,
                        corner: Corner = "typ") -> tuple[WeightedFigure, ...]:
    """Weighted efficiency figures, each load point solved exactly.

    Parameters
    ----------
    design : Design
        A design from :func:`lossbudget.load_design`.
    vin : float or array_like, optional
        Input voltages; the design's minimum, nominal and maximum when omitted. [V]
    vout : float, optional
        Output voltage; the nominal when omitted. [V]
    ambient : float, optional
        Ambient temperature; the nominal when omitted. [degC]
    corner : {"typ", "worst"}
        Part values.

    Returns
    -------
    tuple of WeightedFigure
        For each input voltage in turn: ``european``, ``cec``, ``mean_25_100``, ``at_10pct``.

    Notes
    -----
    Every load point of every weighting is solved in one vectorised call (never interpolated
    from a map), at fractions of the rated output current. The inverter weightings (European,
    CEC) are defined at fractions of rated *power*; at a fixed output voltage these equal the
    fractions of rated output current. A point that is flagged (infeasible, runaway, not
    converged) makes each figure that needs it NaN, with the point and its reason.

    References
    ----------
    .. [1] EN 50530:2010 + A1:2013 (European weighting, JRC-Ispra).
    .. [2] W. Bower et al., Performance Test Protocol for Evaluating Inverters Used in
       Grid-Connected Photovoltaic Systems, Sandia National Laboratories, 2004/2005 (CEC).
    .. [3] 10 CFR Part 430, Subpart B, Appendix Z; EU Code of Conduct on External Power
       Supplies, Version 5, 2013 (four-point average, 10 % point).
    """
    op = design.operating
    if vin is None:
        vins = np.array(list(dict.fromkeys((op.vin.min, op.vin.nom, op.vin.max))))
    else:
        vins = np.atleast_1d(np.asarray(vin, dtype=float)).ravel()
    fractions = np.array(sorted({f for w in WEIGHTINGS for f in w.fractions}))
    budget = _solve(design, vin=vins[:, None], load=None, load_fraction=fractions[None, :],
                    vout=vout, ambient=ambient, fsw=None, corner=corner, outer=False)
    eff = budget.efficiency
    flagged = budget.flagged
    figures = []
    for i, v in enumerate(vins):
        for w in WEIGHTINGS:
            cols = np.searchsorted(fractions, w.fractions)
            value = float(np.dot(eff[i, cols], np.asarray(w.weights)))
            notes = [f"{fractions[c] * 100:g} % load flagged: {budget.reason[i, c]}"
                     for c in cols if flagged[i, c]]
            figures.append(WeightedFigure(name=w.name, vin=float(v), value=value,
                                          reason="; ".join(notes), source=w.source))
    return tuple(figures)


# --------------------------------------------------------------------------------------------
# one-screen summary of a map
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class MapSummary:
    """Key figures of a map: the peak, efficiency at (or nearest) rated load, flagged points.

    Efficiencies are fractions; NaN where flagged. ``rated_vin`` and ``rated_efficiency`` run
    over the input voltages of the map at the load ``rated_load`` (the map's load nearest the
    rated current asked for, or its largest load).
    """

    points: int
    peak_efficiency: float
    peak_vin: float
    peak_load: float
    rated_load: float
    rated_vin: np.ndarray
    rated_efficiency: np.ndarray
    dcm_points: int
    flagged_points: int
    flagged_reasons: tuple[tuple[str, int], ...]


_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?")


def group_reasons(reasons) -> tuple[tuple[str, int], ...]:
    """Group flag reasons by kind (the text with its numbers set aside), most frequent first.

    Reasons that differ only in their numbers ("loop gain 1.012 >= 1", "loop gain 1.284 >= 1")
    are one kind; each number that varies within a kind is shown as its span
    ("loop gain 1.012 to 1.284 >= 1"). Returns (text, count) pairs.
    """
    kinds: dict[tuple[str, ...], list[list[float]]] = {}
    texts: dict[tuple[str, ...], list[str]] = {}
    for reason in np.asarray(reasons).astype(str).ravel().tolist():
        parts = tuple(_NUMBER.split(reason))
        kinds.setdefault(parts, []).append([float(x) for x in _NUMBER.findall(reason)])
        texts.setdefault(parts, []).append(reason)
    out = []
    for parts, numbers in kinds.items():
        values = np.array(numbers, dtype=float).reshape(len(numbers), len(parts) - 1)
        first = _NUMBER.findall(texts[parts][0])
        shown = []
        for j in range(len(parts) - 1):
            lo, hi = values[:, j].min(), values[:, j].max()
            shown.append(first[j] if lo == hi else f"{lo:.4g} to {hi:.4g}")
        text = "".join(p + (shown[j] if j < len(shown) else "") for j, p in enumerate(parts))
        out.append((text, len(numbers)))
    return tuple(sorted(out, key=lambda rc: -rc[1]))


def map_summary(budget: Budget, *, rated_load: float | None = None) -> MapSummary:
    """Summarise a map: peak efficiency and where, efficiency at rated load over the input.

    Parameters
    ----------
    budget : Budget
        A map, e.g. from :func:`sweep` over input voltage and load.
    rated_load : float, optional
        Rated output current; the map's load nearest it is used (no interpolation). The
        map's largest load when omitted. [A]

    Returns
    -------
    MapSummary
    """
    eff = np.ravel(budget.efficiency)
    vin = np.ravel(budget.coords["vin"])
    load = np.ravel(budget.coords["load"])
    flagged = np.ravel(budget.flagged)
    if np.all(np.isnan(eff)):
        k, peak = 0, math.nan
    else:
        k = int(np.nanargmax(eff))
        peak = float(eff[k])
    loads = np.unique(load)
    chosen = loads[-1] if rated_load is None else loads[np.argmin(np.abs(loads - rated_load))]
    at = load == chosen
    order = np.argsort(vin[at], kind="stable")
    ranked = group_reasons(np.ravel(budget.reason)[flagged])
    return MapSummary(
        points=eff.size,
        peak_efficiency=peak,
        peak_vin=float(vin[k]) if math.isfinite(peak) else math.nan,
        peak_load=float(load[k]) if math.isfinite(peak) else math.nan,
        rated_load=float(chosen),
        rated_vin=vin[at][order],
        rated_efficiency=eff[at][order],
        dcm_points=int(np.count_nonzero(np.ravel(budget.dcm) & ~flagged)),
        flagged_points=int(np.count_nonzero(flagged)),
        flagged_reasons=tuple(ranked),
    )
