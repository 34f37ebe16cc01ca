"""Ranking design variants: weighted efficiency, losses, limits, cost, area, the Pareto front.

:func:`compare` solves every variant of a :class:`~lossbudget.factorial.Variants` at the load
points of the weightings and at rated load over the input range (one vectorised solve over
variants × points), checks every variant's limits over the envelope at worst-case part values
(one vectorised sweep, :func:`lossbudget.limits.check_limits`), and returns one row per
variant, best first. It sits after ``limits`` and before ``output``: numbers in, a pandas
DataFrame out, no files.

The objective is a weighted efficiency (``european``, ``cec``, ``mean_25_100``, the weightings
of :mod:`lossbudget.sweep`, at the nominal input voltage) or ``full_load`` (the loss at rated
load and nominal input). ``pareto`` marks the variants no other variant beats on every one of
(objective loss, cost, area) at once while being better on one; a variant whose limit check
fails, or whose objective is not solved, is never on the front. ``rank`` orders the variants:
those whose limits hold (ok, then caution) before those that fail, each by the objective.
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from lossbudget.budget import Budget
from lossbudget.factorial import Variants
from lossbudget.solver import solve
from lossbudget.sweep import WEIGHTINGS

Objective = Literal["european", "cec", "mean_25_100", "full_load"]
OBJECTIVES: tuple[str, ...] = ("european", "cec", "mean_25_100", "full_load")
PARETO_BLOCK = 1000
STATUS_RANK = {"ok": 0, "caution": 1, "fail": 2}


def compare(
    variants: Variants, *, objective: Objective = "european", derating: str | None = None
):
    """One row per variant: efficiency, losses, limits, cost, area, Pareto flag and rank.

    Parameters
    ----------
    variants : Variants
        From :func:`lossbudget.factorial.variants`.
    objective : {"european", "cec", "mean_25_100", "full_load"}
        What ranks the variants: a weighted efficiency at nominal input (higher is better), or
        the loss at rated load and nominal input (lower is better).
    derating : str, optional
        Derating profile of the limit check; the design's own when omitted.

    Returns
    -------
    pandas.DataFrame
        Sorted best first. Columns: ``rank``, ``variant_id``, ``variant`` (label), one column
        per slot (the part's name) and per varied key (its value, SI), ``eff_european``,
        ``eff_cec``, ``eff_mean_25_100``, ``loss_full_w`` (rated load, nominal input),
        ``loss_rated_vin_min_w``, ``loss_rated_vin_nom_w``, ``loss_rated_vin_max_w``,
        ``objective_loss`` (1 − weighted efficiency, or ``loss_full_w``), ``status``,
        ``worst_limit``, ``worst_margin``, ``worst_margin_unit``, ``worst_headroom``,
        ``cost``, ``area_m2``, ``pareto``, ``reason`` (why a figure is not available).
    """
    import pandas as pd

    from lossbudget.limits import check_limits

    if objective not in OBJECTIVES:
        raise ValueError(f"objective: expected one of {', '.join(OBJECTIVES)}, got {objective!r}")
    base = variants.base
    op = base.operating
    vins = np.array(list(dict.fromkeys((op.vin.min, op.vin.nom, op.vin.max))))
    i_nom = int(np.flatnonzero(vins == op.vin.nom)[0])
    fractions = np.array(sorted({f for w in WEIGHTINGS for f in w.fractions} | {1.0}))
    b = solve(variants, vin=vins[:, None], load_fraction=fractions[None, :])
    figures = weighted_figures(b, fractions=fractions, column=i_nom)
    full = int(np.flatnonzero(fractions == 1.0)[0])
    loss_rated = b.total_loss[:, :, full]
    limits = check_limits(variants, derating=derating)
    cols: dict[str, object] = {
        "variant_id": np.arange(variants.size),
        "variant": variants.labels,
    }
    for slot in variants.slots:
        cols[slot] = variants.choice(slot)
    for key, vals in variants.values.items():
        cols[key] = vals
    for w in ("european", "cec", "mean_25_100"):
        cols[f"eff_{w}"] = figures[w]
    cols["loss_full_w"] = loss_rated[:, i_nom]
    by_vin = {"min": op.vin.min, "nom": op.vin.nom, "max": op.vin.max}
    for name, v in by_vin.items():
        cols[f"loss_rated_vin_{name}_w"] = loss_rated[:, int(np.flatnonzero(vins == v)[0])]
    goal = cols["loss_full_w"] if objective == "full_load" else 1.0 - figures[objective]
    cols["objective_loss"] = goal
    cols["status"] = limits.worst_status
    cols["worst_limit"] = limits.worst_limit
    cols["worst_margin"] = limits.worst_margin
    cols["worst_margin_unit"] = limits.worst_margin_unit
    cols["worst_headroom"] = limits.worst_headroom
    cost, area = variants.cost, variants.area
    cols["cost"] = cost
    cols["area_m2"] = area
    status_rank = np.array([STATUS_RANK[s] for s in limits.worst_status])
    eligible = np.isfinite(goal) & (status_rank < 2)
    criteria = [goal] + [x for x in (cost, area) if np.all(np.isfinite(x))]
    cols["pareto"] = pareto_front(np.stack(criteria, axis=1), eligible=eligible)
    cols["reason"] = figures["reason"]
    frame = pd.DataFrame(cols)
    order = np.lexsort((np.arange(variants.size), np.where(np.isfinite(goal), goal, np.inf),
                        status_rank))
    frame = frame.iloc[order].reset_index(drop=True)
    frame.insert(0, "rank", np.arange(1, variants.size + 1))
    frame.attrs["objective"] = objective
    frame.attrs["derating"] = limits.derating
    frame.attrs["limits_grid"] = limits.grid
    frame.attrs["limits_table"] = limits.table
    frame.attrs["cautions"] = limits.cautions
    return frame


def weighted_figures(b: Budget, *, fractions: np.ndarray, column: int) -> dict[str, np.ndarray]:
    """Weighted efficiencies per variant from a budget of shape (variants, vin, fractions).

    A figure that needs a flagged point is NaN; ``reason`` names the first such point.
    """
    eff = b.efficiency[:, column, :]
    flagged = b.flagged[:, column, :]
    out: dict[str, np.ndarray] = {}
    reason = np.full(eff.shape[0], "", dtype=object)
    for w in WEIGHTINGS:
        idx = np.searchsorted(fractions, w.fractions)
        out[w.name] = eff[:, idx] @ np.asarray(w.weights)
        bad = flagged[:, idx]
        first = np.argmax(bad, axis=1)
        some = bad.any(axis=1) & (reason == "")
        if some.any():
            texts = np.char.add(
                np.char.mod("%g %% load flagged: ", fractions[idx][first[some]] * 100),
                b.reason[:, column, :][some, idx[first[some]]].astype(str),
            )
            reason[some] = texts.astype(object)
    out["reason"] = reason
    return out


def pareto_front(criteria: np.ndarray, *, eligible: np.ndarray | None = None) -> np.ndarray:
    """Mark the points not dominated when every criterion is to be minimised.

    Parameters
    ----------
    criteria : ndarray, shape (n, k)
        One row per candidate, one column per criterion (lower is better).
    eligible : ndarray of bool, shape (n,), optional
        Candidates allowed on the front (and allowed to dominate); all by default.

    Returns
    -------
    ndarray of bool, shape (n,)
        True where no eligible candidate is at least as good on every criterion and better on
        one (Pareto dominance, common practice).
    """
    c = np.asarray(criteria, dtype=float)
    n = c.shape[0]
    ok = np.ones(n, dtype=bool) if eligible is None else np.asarray(eligible, dtype=bool)
    ok = ok & np.all(np.isfinite(c), axis=1)
    pool = c[ok]
    front = np.zeros(n, dtype=bool)
    rows = np.flatnonzero(ok)
    for s in range(0, rows.size, PARETO_BLOCK):  # blocks keep the pairwise table small
        blk = c[rows[s:s + PARETO_BLOCK]]
        le = np.all(pool[np.newaxis, :, :] <= blk[:, np.newaxis, :], axis=2)
        lt = np.any(pool[np.newaxis, :, :] < blk[:, np.newaxis, :], axis=2)
        front[rows[s:s + PARETO_BLOCK]] = ~np.any(le & lt, axis=1)
    return front


def optimum_frequency(variants: Variants, frame) -> object:
    """Per candidate (the variants alike but for ``operating.fsw``): the best frequency.

    Parameters
    ----------
    variants : Variants
        With ``operating.fsw`` among the varied keys.
    frame : pandas.DataFrame
        From :func:`compare` on the same variants.

    Returns
    -------
    pandas.DataFrame
        One row per candidate: its label without the frequency, ``fsw_opt_hz`` (the grid
        frequency of lowest objective loss), ``objective_loss`` there, ``at_edge`` (True where
        the optimum lies at the first or last frequency: widen the sweep), and ``n_solved``.
    """
    import pandas as pd

    key = "operating.fsw"
    if key not in variants.values:
        raise ValueError("optimum_frequency: operating.fsw is not varied")
    sizes = list(variants.shape)
    if int(np.prod(sizes)) != variants.size:
        raise ValueError("optimum_frequency: expected the full factorial from variants()")
    axis = len(variants.slots) + list(variants.values).index(key)
    by_id = frame.set_index("variant_id").sort_index()
    loss = by_id["objective_loss"].to_numpy(dtype=float).reshape(sizes)
    fsw = variants.values[key].reshape(sizes)
    loss_m = np.moveaxis(loss, axis, -1)
    fsw_m = np.moveaxis(fsw, axis, -1)
    finite = np.isfinite(loss_m)
    best = np.argmin(np.where(finite, loss_m, np.inf), axis=-1)
    f_opt = np.take_along_axis(fsw_m, best[..., None], axis=-1)[..., 0]
    l_opt = np.take_along_axis(loss_m, best[..., None], axis=-1)[..., 0]
    n = loss_m.shape[-1]
    labels = np.moveaxis(variants.labels_without(key).reshape(sizes), axis, -1)
    any_ok = finite.any(axis=-1)
    return pd.DataFrame({
        "candidate": labels[..., 0].ravel(),
        "fsw_opt_hz": np.where(any_ok, f_opt, np.nan).ravel(),
        "objective_loss": np.where(any_ok, l_opt, np.nan).ravel(),
        "at_edge": ((best == 0) | (best == n - 1)).ravel() & any_ok.ravel(),
        "n_solved": finite.sum(axis=-1).ravel(),
    })
