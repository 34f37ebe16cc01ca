"""Ratings of every part, measured at every solved point (SPEC §2.10).

One list of rating measures serves both the solve, which flags every point where a part
passes an absolute rating (``flags["over_rating"]``, with the part and quantity named), and
the envelope check in :mod:`lossbudget.limits`, which derates the same measures into design
limits. A measure takes a :class:`~lossbudget.budget.Budget` and returns the value and the
absolute rating at every point: the junction or hot-spot temperature against its maximum, the
peak blocking voltage plus its allowance (``limits.v_spike``, or the derived turn-off
overshoot ``v_overshoot`` where ``switch.loop_inductance`` is given) against the voltage
rating, the peak current against the saturation current at the inductor's temperature, the
peak flux against ``b_sat``, and a capacitor's voltage, ripple current and temperature. A
rating the design does not give is listed as not checked, with the key that would enable it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from lossbudget.budget import Budget
from lossbudget.design import Corner, Design, Diode
from lossbudget.units import format_quantity

Measure = Callable[[Budget], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True, slots=True, kw_only=True)
class Rating:
    """One part's quantity against its absolute rating, measurable on any budget.

    ``kind`` is the derating part kind (None: no derating row, e.g. life); ``label`` says in
    words what is compared (for the reasons of the over-rating flag); ``per_point`` is False
    for limits that only the envelope check evaluates (life, the controller's current limit).
    """

    part: str
    quantity: str
    unit: str
    kind: str | None
    measure: Measure
    label: str
    lower_is_worse: bool = False
    note: Callable[[Budget, int], str] | None = None  # budget, flat index of the point
    tie: Callable[[Budget], np.ndarray] | None = None  # among equal worst values, the largest
    per_point: bool = True


def i_sat_at(t, *, points_t, points_i):
    """Saturation current at a temperature through the datasheet points.

    Parameters
    ----------
    t : array_like
        Inductor (hot-spot) temperature. [degC]
    points_t : sequence of float
        Temperatures of the datasheet points, ascending. [degC]
    points_i : sequence of float
        Saturation currents at those temperatures. [A]

    Returns
    -------
    ndarray
        Saturation current, never below zero. [A]

    Notes
    -----
    Linear between the points; below the coldest point it keeps the coldest value (no credit
    for cold), above the hottest it continues the last segment's slope (saturation keeps
    falling when hot). A single point is a constant.

    References
    ----------
    .. [1] Peak current against i_sat(T): R. W. Erickson, D. Maksimović, *Fundamentals of
       Power Electronics*, 2nd ed., 2001, inductor design chapter (B_max = L·I_max/(n·A_c));
       the interpolation is common practice.
    """
    t = np.asarray(t, dtype=float)
    pt = np.asarray(points_t, dtype=float)
    pi = np.asarray(points_i, dtype=float)
    if pt.ndim > 1 or pi.ndim > 1:
        # one table per point (design variants): the same rule, the points on the last axis
        if pt.shape[-1] == 1:
            return np.broadcast_to(np.maximum(pi[..., 0], 0.0), np.broadcast_shapes(
                t.shape, pi.shape[:-1])).copy()
        slope = (pi[..., -1] - pi[..., -2]) / (pt[..., -1] - pt[..., -2])
        below = t < pt[..., 0]
        seg = np.clip(np.sum(t[..., np.newaxis] >= pt, axis=-1) - 1, 0, pt.shape[-1] - 2)
        shape = np.broadcast_shapes(t.shape, pt.shape[:-1], pi.shape[:-1])

        def at(tab, k):
            full = np.broadcast_to(tab, (*shape, tab.shape[-1]))
            return np.take_along_axis(full, np.broadcast_to(k, shape)[..., np.newaxis],
                                      axis=-1)[..., 0]

        slopes = np.diff(pi, axis=-1) / np.diff(pt, axis=-1)
        inner = at(pi, seg) + at(slopes, seg) * (t - at(pt, seg))
        hot = pi[..., -1] + slope * (t - pt[..., -1])
        value = np.where(below, pi[..., 0], np.where(t > pt[..., -1], hot, inner))
        return np.maximum(value, 0.0)
    if pt.size == 1:
        return np.full(t.shape, pi[0])
    slope = (pi[-1] - pi[-2]) / (pt[-1] - pt[-2])
    hot = pi[-1] + slope * (t - pt[-1])
    return np.maximum(np.where(t > pt[-1], hot, np.interp(t, pt, pi)), 0.0)


def per_variant(x, b: Budget, trailing: int = 0) -> np.ndarray:
    """Per-variant values shaped to broadcast along a variant budget's first axis.

    A scalar (or, with ``trailing``, a table of that many axes) is returned as it is.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim == trailing:
        return x
    tail = x.shape[x.ndim - trailing:] if trailing else ()
    return x.reshape((x.shape[0],) + (1,) * (len(b.shape) - 1) + tail)


def full_where_solved(b: Budget, x: float) -> np.ndarray:
    """``x`` at every solved point of a budget, NaN where a point is flagged."""
    if np.ndim(x):  # one value per design variant, the budget's first axis
        return np.where(b.flagged, np.nan, per_variant(x, b))
    return np.where(b.flagged, np.nan, float(x))


def _q(x: float, dim: str) -> str:
    return format_quantity(x, dim, digits=4)


def voltage_allowance(b: Budget, part: str, v_spike: float) -> np.ndarray:
    """The allowance on a part's peak blocking voltage: its derived overshoot or v_spike. [V]"""
    if (part, "v_overshoot") in b.stresses:
        return b.stresses[part, "v_overshoot"]
    return full_where_solved(b, v_spike)


def part_ratings(design: Design, corner: Corner) -> tuple[list[Rating], list[tuple[str, str, str]]]:
    """Every rating measurable at a point, and those the design cannot check.

    Returns
    -------
    tuple
        The ratings, and (part, quantity, the key that would enable it) for each rating not
        given.
    """
    out: list[Rating] = []
    missing: list[tuple[str, str, str]] = []
    spike = design.limits.v_spike

    def blocking_note(part: str) -> Callable[[Budget, int], str]:
        def note(b: Budget, k: int) -> str:
            v = float(b.stress(part, "v_pk").ravel()[k])
            if (part, "v_overshoot") in b.stresses:
                o = float(b.stresses[part, "v_overshoot"].ravel()[k])
                return (f"peak blocking voltage {_q(v, 'voltage')} + derived turn-off "
                        f"overshoot L_loop·I/t_fi {_q(o, 'voltage')}")
            return (f"peak blocking voltage {_q(v, 'voltage')} + limits.v_spike "
                    f"{_q(spike, 'voltage')}")
        return note

    for part, dev in (("switch", design.switch), ("rectifier", design.rectifier)):
        diode = isinstance(dev, Diode)
        kind = "diode" if diode else "mosfet"
        if dev.tj_max is not None:
            out.append(Rating(
                part=part, quantity="t_j", unit="degC", kind=kind, label="junction over tj_max",
                measure=lambda b, p=part, lim=dev.tj_max: (
                    b.temperature(p), full_where_solved(b, lim)),
            ))
        else:
            missing.append((part, "t_j", f"{part}.tj_max"))
        rated = dev.vr_rated if diode else dev.vds_rated
        key = "vr_rated" if diode else "vds_rated"
        if rated is not None:
            out.append(Rating(
                part=part, quantity="v_pk", unit="V", kind=kind,
                label=f"blocking voltage plus allowance over {key}",
                measure=lambda b, p=part, lim=rated: (
                    b.stress(p, "v_pk") + voltage_allowance(b, p, spike),
                    full_where_solved(b, lim)),
                note=blocking_note(part),
            ))
        else:
            missing.append((part, "v_pk", f"{part}.{key}"))

    ind = design.inductor
    if ind.t_max is not None:
        out.append(Rating(
            part="inductor", quantity="t_hot", unit="degC", kind="inductor",
            label="hot spot over t_max",
            measure=lambda b: (b.temperature("inductor"), full_where_solved(b, ind.t_max)),
        ))
    else:
        missing.append(("inductor", "t_hot", "inductor.t_max"))
    if ind.i_sat is not None:
        pts_t, pts_i = ind.i_sat.t, ind.i_sat.pick(corner)

        def i_sat(b: Budget) -> np.ndarray:
            return i_sat_at(b.temperature("inductor"), points_t=per_variant(pts_t, b, 1),
                            points_i=per_variant(pts_i, b, 1))

        def sat_note(b: Budget, k: int, what: str) -> str:
            t = float(b.temperature("inductor").ravel()[k])
            extra = ", extrapolated above the hottest point" if t > np.max(pts_t) else ""
            return (f"{what} against i_sat at the inductor's {_q(t, 'temperature')} "
                    f"({corner}-case i_sat points, interpolated{extra})")

        out.append(Rating(
            part="inductor", quantity="i_pk", unit="A", kind="inductor",
            label="peak current over i_sat at its temperature",
            measure=lambda b: (b.stress("inductor", "i_pk"), i_sat(b)),
            note=lambda b, k: sat_note(b, k, "peak current per part"),
        ))
        if design.operating.i_limit is not None:
            i_lim = design.operating.i_limit / ind.count
            out.append(Rating(
                part="inductor", quantity="i_limit", unit="A", kind="inductor",
                label="controller current limit over i_sat", per_point=False,
                measure=lambda b: (full_where_solved(b, i_lim), i_sat(b)),
                tie=lambda b: b.temperature("inductor"),
                note=lambda b, k: sat_note(
                    b, k, f"operating.i_limit {_q(i_lim, 'current')} per part (reached in a "
                    "transient)"),
            ))
        else:
            missing.append(("inductor", "i_limit", "operating.i_limit"))
    else:
        missing.append(("inductor", "i_pk", "inductor.i_sat"))
    if ind.core is not None and ind.core.b_sat is not None:
        b_sat = ind.core.b_sat
        out.append(Rating(
            part="inductor", quantity="b_pk", unit="T", kind="inductor",
            label="peak flux over b_sat",
            measure=lambda b: (b.stress("inductor", "b_pk"), full_where_solved(b, b_sat)),
        ))
    else:
        missing.append(("inductor", "b_pk", "inductor.core.b_sat"))

    for cap in design.capacitors:
        kind = "electrolytic" if cap.life is not None else "capacitor"
        is_out = cap.position == "output"

        def v_cap(b: Budget, name=cap.name, is_out=is_out) -> np.ndarray:
            v = b.stress(name, "v_pk")
            return v + 0.5 * b.vout_pp if is_out else v

        if cap.v_rated is not None:
            out.append(Rating(
                part=cap.name, quantity="v_pk", unit="V", kind=kind,
                label="voltage over v_rated",
                measure=lambda b, f=v_cap, lim=cap.v_rated: (f(b), full_where_solved(b, lim)),
                note=lambda b, k, is_out=is_out: (
                    ("bank voltage plus half the output ripple" if is_out else "DC bank voltage")
                    + "; v_spike not added (the ringing is at the switch node)"),
            ))
        else:
            missing.append((cap.name, "v_pk", "capacitor.v_rated"))
        rr = cap.i_ripple_rated
        if rr is not None:
            at_f = _q(rr.at_f, "frequency") if np.isfinite(rr.at_f) else "an unstated frequency"
            at_t = _q(rr.at, "temperature") if np.isfinite(rr.at) else "an unstated temperature"
            text = (f"per part; rated {_q(rr.i, 'current')} at {at_f}, {at_t}; frequency and "
                    "temperature multipliers are vendor-specific and not applied")
            out.append(Rating(
                part=cap.name, quantity="i_rms", unit="A", kind=kind,
                label="ripple current over i_ripple_rated",
                measure=lambda b, name=cap.name, lim=rr.i: (b.stress(name, "i_rms"),
                                                            full_where_solved(b, lim)),
                note=lambda b, k, text=text: text,
            ))
        else:
            missing.append((cap.name, "i_rms", "capacitor.i_ripple_rated"))
        if cap.t_max is not None:
            out.append(Rating(
                part=cap.name, quantity="t_hot", unit="degC", kind=kind,
                label="hot spot over t_max",
                measure=lambda b, name=cap.name, lim=cap.t_max: (b.temperature(name),
                                                                 full_where_solved(b, lim)),
            ))
        else:
            missing.append((cap.name, "t_hot", "capacitor.t_max"))
    return out, missing


def over_rating(budget: Budget, ratings: list[Rating]) -> tuple[np.ndarray, np.ndarray]:
    """Points where a part passes an absolute rating, and the reason naming part and quantity.

    Returns
    -------
    tuple
        (bool array of the budget's shape, object array of reasons: "" where none).
    """
    shape = budget.shape
    code = np.zeros(shape, dtype=np.int64)
    used = [r for r in ratings if r.per_point]
    texts = []
    for k, r in enumerate(used):
        value, absolute = r.measure(budget)
        value = np.broadcast_to(value, shape)
        absolute = np.broadcast_to(absolute, shape)
        with np.errstate(invalid="ignore"):
            over = (value < absolute) if r.lower_is_worse else (value > absolute)
        code |= np.where(over & np.isfinite(value) & np.isfinite(absolute), 1 << k, 0)
        texts.append(f"{r.part} {r.quantity}: {r.label}")
    flag = (code != 0) & ~budget.flagged
    codes, inverse = np.unique(np.where(flag, code, 0), return_inverse=True)
    labels = np.empty(codes.size, dtype=object)
    for j, c in enumerate(codes.tolist()):
        labels[j] = "; ".join(texts[k] for k in range(len(used)) if c >> k & 1)
    return flag, labels[np.ravel(inverse)].reshape(shape)


__all__ = ["Rating", "full_where_solved", "i_sat_at", "over_rating", "part_ratings",
           "voltage_allowance"]
