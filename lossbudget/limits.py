"""Limit and derating checks of every part over the operating envelope.

Sits after :mod:`lossbudget.sweep` in the data flow. Each part carries its absolute limits
(junction or hot-spot temperature, voltage rating against the peak blocking voltage plus the
ringing allowance ``limits.v_spike``, saturation current against the peak current and the
controller's current limit, peak flux, capacitor voltage, ripple current and temperature,
electrolytic life). A derating profile, kept as data in ``data/derating.toml`` with the
document and status behind every number, or the design's own ``[limits.margins]``, turns them
into design limits. The envelope (input voltage × output voltage × load up to rated × ambient,
and the switching frequency where it has a range) is solved at the worst-case part values on
one vectorised grid; each part's worst point is then refined on a zoomed local grid where it
lies inside an axis. The result is a :class:`LimitReport`.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from importlib import resources
from typing import Any, Literal

import numpy as np

from lossbudget.budget import AXES, AXIS_COLUMNS, Budget
from lossbudget.cautions import CAUTIONS
from lossbudget.design import DERATING_PROFILES, MARGIN_QUANTITIES, Corner, Design, Diode
from lossbudget.errors import DesignError
from lossbudget.ratings import Rating, full_where_solved, i_sat_at, part_ratings, per_variant
from lossbudget.solver import solve
from lossbudget.sweep import sweep
from lossbudget.units import format_quantity

Status = Literal["ok", "caution", "fail"]
STATUS_ORDER: tuple[Status, ...] = ("ok", "caution", "fail")

PART_KINDS = ("mosfet", "diode", "inductor", "capacitor", "electrolytic")
KIND_QUANTITIES: dict[str, tuple[str, ...]] = MARGIN_QUANTITIES
BASIS_STATUSES = ("published", "common practice", "from memory (verify)", "absolute rating")

# The envelope grid: load fractions of the rated output current, points per axis.
VARIANT_BLOCK_POINTS = 250_000  # operating points per sweep of the variants' envelope check
LOAD_FRACTIONS = (0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0)
VIN_POINTS = 7
REFINE_TOLERANCE = 0.01  # of each axis's span (load: of the rated current)
REFINE_POINTS = {1: 11, 2: 7, 3: 5}  # local grid points per axis by the number refined
REFINE_ROUNDS = 8
ONSET_POINTS = 21  # load points between the last good and the first runaway grid load

_DIMENSION = {"degC": "temperature", "V": "voltage", "A": "current", "T": "flux_density",
              "h": "duration"}


# --------------------------------------------------------------------------------------------
# derating profiles (data)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class Margin:
    """One derating row: how far below a part's absolute limit the design limit sits.

    Temperatures: ``below_k`` kelvin below the limit and, where given, at most
    ``at_most_degc``. Voltages, currents and flux: ``of_rating``, the fraction of the rating
    allowed. ``document`` and ``status`` say where the number comes from.
    """

    kind: str
    quantity: str
    below_k: float | None = None
    at_most_degc: float | None = None
    of_rating: float | None = None
    document: str
    status: str
    caveat: str = ""

    def design_limit(self, absolute: np.ndarray) -> np.ndarray:
        """The design limit from the absolute limit (same unit)."""
        absolute = np.asarray(absolute, dtype=float)
        if self.of_rating is not None:
            return absolute * self.of_rating
        limit = absolute - (self.below_k or 0.0)
        if self.at_most_degc is not None:
            limit = np.minimum(limit, self.at_most_degc)
        return limit

    @property
    def basis(self) -> str:
        """The document and status behind the number, in one line."""
        text = f"{self.document} — {self.status}"
        return f"{text}; {self.caveat}" if self.caveat else text


def derating_profiles() -> dict[str, dict[tuple[str, str], Margin]]:
    """Read every derating profile from ``lossbudget/data/derating.toml``.

    Returns
    -------
    dict
        Profile name -> {(part kind, quantity): Margin}.
    """
    text = resources.files("lossbudget").joinpath("data/derating.toml").read_text("utf-8")
    raw = tomllib.loads(text)
    where = "lossbudget/data/derating.toml"
    out: dict[str, dict[tuple[str, str], Margin]] = {}
    for name, prof in raw.items():
        rows: dict[tuple[str, str], Margin] = {}
        for kind, table in prof.items():
            if kind == "summary":
                continue
            if kind not in KIND_QUANTITIES:
                raise DesignError(f"{where}: {name}.{kind}: expected a part kind, one of "
                                  f"{', '.join(PART_KINDS)}")
            for qty, row in table.items():
                path = f"{where}: {name}.{kind}.{qty}"
                if qty not in KIND_QUANTITIES[kind]:
                    raise DesignError(f"{path}: expected one of "
                                      f"{', '.join(KIND_QUANTITIES[kind])}")
                if row.get("status") not in BASIS_STATUSES or not row.get("document"):
                    raise DesignError(f"{path}: expected a document and a status, one of "
                                      f"{', '.join(BASIS_STATUSES)}")
                temperature = qty.startswith("t")
                if temperature == ("of_rating" in row) or (
                        not temperature and not 0 < row["of_rating"] <= 1):
                    raise DesignError(f"{path}: expected below_k for a temperature, of_rating "
                                      "in (0, 1] otherwise")
                rows[kind, qty] = Margin(
                    kind=kind, quantity=qty, below_k=row.get("below_k"),
                    at_most_degc=row.get("at_most_degc"), of_rating=row.get("of_rating"),
                    document=row["document"], status=row["status"], caveat=row.get("caveat", ""),
                )
        out[name] = rows
    return out


def _margins_for(design: Design, derating: str | None) -> tuple[str, dict[tuple[str, str], Margin]]:
    """The design limits' rows: a named profile's, or (``custom``) the design's own rows.

    ``custom`` takes the design's ``[limits.margins]`` rows (validated by the loader) and the
    moderate profile for the rows they do not name. A named profile (``none``, ``moderate``,
    ``conservative``) uses its own rows only, whatever the design's table holds.
    """
    name = derating if derating is not None else design.limits.derating
    allowed = (*DERATING_PROFILES, "custom")
    if name not in allowed:
        raise ValueError(f"derating: expected one of {', '.join(allowed)}, got {name!r}")
    if name == "custom" and not design.limits.margins:
        raise DesignError(f"{design.source}: limits.margins: --derating custom needs the "
                          "design's [limits.margins] table")
    profiles = derating_profiles()
    if name != "custom":
        return name, dict(profiles[name])
    rows = dict(profiles["moderate"])
    for m in design.limits.margins:
        key = f"limits.margins.{m.kind}.{m.quantity}"
        if m.use_up_to is None:
            text = f"{m.below_max:g} K below the limit"
            if m.at_most is not None:
                text += f", at most {m.at_most:g} degC"
            rows[m.kind, m.quantity] = Margin(
                kind=m.kind, quantity=m.quantity, below_k=m.below_max,
                at_most_degc=m.at_most, document=f"{key}: {text} (design file)",
                status="the design's own margin")
        else:
            rows[m.kind, m.quantity] = Margin(
                kind=m.kind, quantity=m.quantity, of_rating=m.use_up_to,
                document=f"{key}: use up to {m.use_up_to * 100:g} % of the rating "
                "(design file)", status="the design's own margin")
    return "custom (moderate for the rows not named)", rows


# --------------------------------------------------------------------------------------------
# the models of the limits
# --------------------------------------------------------------------------------------------


def temperature_design_limits(design: Design, *, derating: str | None = None
                              ) -> dict[str, tuple[float, str]]:
    """Each part's temperature design limit after derating, with the basis of its margin.

    Returns
    -------
    dict
        Part name (thermal node) -> (design limit [degC], the document and status behind it).
    """
    _, rows = _margins_for(design, derating)
    parts: list[tuple[str, str, str, float]] = [
        ("switch", "diode" if isinstance(design.switch, Diode) else "mosfet", "t_j",
         design.switch.tj_max),
        ("rectifier", "diode" if isinstance(design.rectifier, Diode) else "mosfet", "t_j",
         design.rectifier.tj_max),
        ("inductor", "inductor", "t_hot", design.inductor.t_max),
    ]
    for cap in design.capacitors:
        kind = "electrolytic" if cap.life is not None else "capacitor"
        parts.append((cap.name, kind, "t_hot", cap.t_max))
    out: dict[str, tuple[float, str]] = {}
    for name, kind, qty, absolute in parts:
        if absolute is None:
            continue  # no limit given: not checked
        margin = rows.get((kind, qty))
        if margin is None:
            out[name] = (absolute, "absolute limit (no margin in the profile)")
        else:
            out[name] = (float(margin.design_limit(absolute)), margin.basis)
    return out


def electrolytic_life_10k(t_hot, *, rated, at):
    """Electrolytic capacitor life at a hot-spot temperature by the 10-kelvin rule.

    Parameters
    ----------
    t_hot : array_like
        Hot-spot (core) temperature, ripple self-heating included. [degC]
    rated : float
        Rated life at the rated temperature. [h]
    at : float
        Temperature the life is rated at. [degC]

    Returns
    -------
    ndarray
        Expected life. [h]

    Notes
    -----
    L = L0 · 2^((T0 − T)/10 K): the life doubles for every 10 K below the rated temperature,
    an Arrhenius approximation. Not valid above the rated temperature; voltage and ripple
    factors are vendor-specific and not applied.

    References
    ----------
    .. [1] The "10-kelvin rule" of aluminium electrolytic capacitors: common practice, with
       no single published source (project reference note, electrolytic lifetime).
    """
    t_hot = np.asarray(t_hot, dtype=float)
    return rated * np.exp2((at - t_hot) / 10.0)


# --------------------------------------------------------------------------------------------
# results
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class LimitRow:
    """One part and limit over the envelope.

    ``worst`` is the worst value found (the highest; for ``life`` the lowest) and ``where``
    the operating point (axis -> value: vin [V], vout [V], load [A], ambient [degC], fsw [Hz]).
    ``margin`` is ``design_limit - worst`` in kelvin for temperatures, and as a fraction of
    the design limit for the others (``margin_unit`` says which); negative past the limit.
    """

    part: str
    quantity: str
    unit: str
    worst: float
    where: dict[str, float]
    design_limit: float
    absolute_limit: float
    margin: float
    margin_unit: str
    status: Status
    basis: str
    note: str = ""


@dataclass(frozen=True, slots=True, kw_only=True)
class LimitReport:
    """Every part's limits over the envelope, at one corner and derating profile."""

    design_name: str
    derating: str
    corner: Corner
    rows: tuple[LimitRow, ...]
    worst_status: Status
    cautions: tuple[str, ...] = CAUTIONS
    grid: str = ""
    not_checked: tuple[tuple[str, str, str], ...] = ()
    envelope: dict[str, tuple[float, ...]] = field(default_factory=dict, repr=False)
    calibration: str = ""

    @property
    def varying_axes(self) -> tuple[str, ...]:
        """The axes of the envelope with more than one value, in the order of the axes."""
        return tuple(a for a in AXES if len(self.envelope.get(a, ())) > 1)

    def to_frame(self):
        """The rows as a pandas DataFrame (one column per axis of ``where``)."""
        import pandas as pd

        records = []
        for r in self.rows:
            rec: dict[str, Any] = {"part": r.part, "quantity": r.quantity, "unit": r.unit,
                                   "worst": r.worst}
            for a in AXES:
                if a in r.where:
                    rec[f"where_{AXIS_COLUMNS[a]}"] = r.where[a]
            rec.update(design_limit=r.design_limit, absolute_limit=r.absolute_limit,
                       margin=r.margin, margin_unit=r.margin_unit, status=r.status,
                       basis=r.basis, note=r.note)
            records.append(rec)
        return pd.DataFrame.from_records(records)


# --------------------------------------------------------------------------------------------
# the checks
# --------------------------------------------------------------------------------------------

def _argworst(check: Rating, key: np.ndarray, b: Budget, part: slice = slice(None)) -> int:
    """Flat index (within ``part``) of the worst point; ties go to the largest ``tie`` value."""
    k = key[part]
    j = int(np.nanargmax(k))
    if check.tie is None:
        return j
    top = np.flatnonzero(k >= k[j] - 1e-12 * abs(k[j]))
    second = np.broadcast_to(check.tie(b), b.shape).ravel()[part][top]
    return int(top[np.nanargmax(second)]) if np.any(np.isfinite(second)) else j


def _key(check: Rating, value: np.ndarray, absolute: np.ndarray) -> np.ndarray:
    """Ranking of the points for one check: larger is worse; NaN where not evaluated."""
    with np.errstate(invalid="ignore", divide="ignore"):
        if check.lower_is_worse:
            return absolute / value
        if check.unit == "degC":
            return value - absolute
        return value / absolute


def _q(x: float, dim: str) -> str:
    if dim == "duration":
        return f"{x:,.0f} h"
    return format_quantity(x, dim, digits=4)


def _checks(design: Design, corner: Corner) -> tuple[list[Rating], list[tuple[str, str, str]]]:
    """The checks of a design and the limits it cannot check (part, quantity, missing key).

    The ratings measured at every point (:func:`lossbudget.ratings.part_ratings`) and each
    electrolytic's life.
    """
    checks, missing = part_ratings(design, corner)
    for cap in design.capacitors:
        life = cap.life
        if life is not None and life.required is not None:

            def life_note(b: Budget, k: int, name=cap.name, life=life) -> str:
                t = float(b.temperature(name).ravel()[k])
                text = (f"L = L0·2^((T0 − T)/10 K) at the hot spot {_q(t, 'temperature')}; "
                        f"rated {_q(life.rated, 'duration')} at {_q(life.at, 'temperature')}")
                if t > life.at:
                    text += "; above the rated temperature, where the rule does not hold"
                return text

            checks.append(Rating(
                part=cap.name, quantity="life", unit="h", kind=None, lower_is_worse=True,
                label="life under life.required", per_point=False,
                measure=lambda b, name=cap.name, life=life: (
                    electrolytic_life_10k(b.temperature(name), rated=per_variant(life.rated, b),
                                          at=per_variant(life.at, b)),
                    full_where_solved(b, life.required)),
                note=life_note,
            ))
        elif life is not None:
            missing.append((cap.name, "life", "capacitor.life.required"))
    return checks, missing


LIFE_BASIS = ("10-kelvin rule, life.required as the limit (no derating margin on life) "
              "— common practice")


# --------------------------------------------------------------------------------------------
# the envelope
# --------------------------------------------------------------------------------------------


def _envelope(design: Design) -> dict[str, np.ndarray]:
    o = design.operating

    def three(r) -> np.ndarray:
        return np.unique([r.min, r.nom, r.max])

    vin = np.linspace(o.vin.min, o.vin.max, VIN_POINTS) if o.vin.max > o.vin.min \
        else np.array([o.vin.min])
    return {
        "vin": vin,
        "vout": three(o.vout),
        "load": o.iout_rated * np.asarray(LOAD_FRACTIONS),
        "ambient": three(o.ambient),
        "fsw": three(o.fsw),
    }


def _tolerance(design: Design, axes: dict[str, np.ndarray]) -> dict[str, float]:
    tol = {a: REFINE_TOLERANCE * float(x.max() - x.min()) for a, x in axes.items()}
    tol["load"] = REFINE_TOLERANCE * design.operating.iout_rated
    return tol


@dataclass(slots=True)
class _Search:
    """The state of one check's refinement."""

    check: Rating
    key: float
    point: dict[str, float]
    value: float
    absolute: float
    note: str
    brackets: dict[str, tuple[float, float]]  # axes still refined: (low, high)


def _evaluate(check: Rating, b: Budget) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    value, absolute = check.measure(b)
    value = np.broadcast_to(value, b.shape).ravel()
    absolute = np.broadcast_to(absolute, b.shape).ravel()
    return value, absolute, _key(check, value, absolute).ravel()


def _flat_coords(b: Budget) -> dict[str, np.ndarray]:
    return {a: np.broadcast_to(b.coords[a], b.shape).ravel() for a in AXES}


def _refine(design: Design, searches: list[_Search], axes: dict[str, np.ndarray],
            tol: dict[str, float], corner: Corner, seen: list[Budget]) -> int:
    """Zoom local grids around each check's worst point; one solve per round for all checks.

    Returns the number of operating points solved.
    """
    solved = 0
    for _ in range(REFINE_ROUNDS):
        active = [s for s in searches if s.brackets]
        if not active:
            break
        blocks, spans = [], []
        for s in active:
            names = list(s.brackets)
            n = REFINE_POINTS.get(len(names), 4)
            grids = [np.linspace(*s.brackets[a], n) for a in names]
            mesh = [g.ravel() for g in np.meshgrid(*grids, indexing="ij")]
            m = mesh[0].size
            pts = {a: np.full(m, s.point[a]) for a in AXES}
            for a, g in zip(names, mesh, strict=True):
                pts[a] = g
            blocks.append(pts)
            spans.append(m)
        flat = {a: np.concatenate([blk[a] for blk in blocks]) for a in AXES}
        b = solve(design, corner=corner, **flat)
        seen.append(b)
        solved += flat["vin"].size
        start = 0
        for s, m in zip(active, spans, strict=True):
            value, absolute, key = _evaluate(s.check, b)
            sl = slice(start, start + m)
            start += m
            k_local = key[sl]
            if np.any(np.isfinite(k_local)):
                j = _argworst(s.check, key, b, sl)
                if k_local[j] > s.key:
                    k = sl.start + j
                    s.key = float(k_local[j])
                    s.value, s.absolute = float(value[k]), float(absolute[k])
                    s.point = {a: float(flat[a][k]) for a in AXES}
                    s.note = s.check.note(b, k) if s.check.note else ""
            n = REFINE_POINTS.get(len(s.brackets), 4)
            new = {}
            for a, (lo, hi) in s.brackets.items():
                step = (hi - lo) / (n - 1)
                if step > tol[a]:
                    x = s.point[a]
                    new[a] = (max(x - step, axes[a].min()), min(x + step, axes[a].max()))
            s.brackets = new
    return solved


def _judged(check: Rating, value: float, absolute: float,
            margins: dict[tuple[str, str], Margin]) -> dict[str, Any]:
    """The design limit after derating, its basis, the margin and the status of one value."""
    if check.kind is None:
        design_limit, basis = absolute, LIFE_BASIS
    else:
        m = margins[check.kind, check.quantity]
        design_limit, basis = float(m.design_limit(absolute)), m.basis
    with np.errstate(invalid="ignore", divide="ignore"):
        if check.unit == "degC":
            margin, margin_unit = design_limit - value, "K"
        elif check.lower_is_worse:
            margin, margin_unit = (value - design_limit) / design_limit, "fraction"
        else:
            margin, margin_unit = (design_limit - value) / design_limit, "fraction"
    return {"design_limit": design_limit, "basis": basis, "margin": float(margin),
            "margin_unit": margin_unit,
            "status": _status(check, value, design_limit, absolute)}


def point_ratings(design: Design, budget: Budget, *, index: int = 0,
                  derating: str | None = None) -> tuple[list[LimitRow], list[tuple[str, str, str]]]:
    """Every rating of one solved point, judged as the envelope check judges it.

    Parameters
    ----------
    design : Design
        The design the budget was solved from.
    budget : Budget
        A solved budget; ``index`` picks the point (flat index).
    derating : str, optional
        Derating profile; the design's ``limits.derating`` when omitted.

    Returns
    -------
    tuple
        A :class:`LimitRow` per rating measured at points (value, design limit after
        derating, absolute rating, margin, status, basis, note), and the ratings the design
        does not give (part, quantity, the key that would enable it).
    """
    _, margins = _margins_for(design, derating)
    ratings, missing = part_ratings(design, budget.provenance.get("corner", "typ"))
    coords = _flat_coords(budget)
    rows = []
    for r in ratings:
        if not r.per_point:
            continue
        value, absolute, _ = _evaluate(r, budget)
        v, a = float(value[index]), float(absolute[index])
        rows.append(LimitRow(
            part=r.part, quantity=r.quantity, unit=r.unit, worst=v,
            where={ax: float(coords[ax][index]) for ax in AXES}, absolute_limit=a,
            note=r.note(budget, index) if r.note else "", **_judged(r, v, a, margins),
        ))
    return rows, missing


def _status(check: Rating, worst: float, design_limit: float, absolute: float) -> Status:
    if not np.isfinite(worst):
        return "fail"
    if check.lower_is_worse:
        return "fail" if worst < absolute else "caution" if worst < design_limit else "ok"
    return "fail" if worst > absolute else "caution" if worst > design_limit else "ok"


def _where_text(point: dict[str, float], axes: tuple[str, ...]) -> str:
    dims = {"vin": "voltage", "vout": "voltage", "load": "current", "ambient": "temperature",
            "fsw": "frequency"}
    return ", ".join(f"{a} {_q(point[a], dims[a])}" for a in axes)


def _unsolved(row: LimitRow) -> LimitRow:
    """A part row beside a stage with points that did not solve (runaway, no convergence).

    Its worst value covers only the points that solved, so it is not ``ok``: it becomes a
    ``caution`` saying so (the stage row itself is the ``fail``).
    """
    if row.status != "ok" or row.part == "stage":
        return row
    why = ("worst over the solved points only: no steady temperature where the stage runs "
           "away (see the stage row)" if row.unit == "degC" else
           "worst over the solved points only: not evaluated where the stage did not solve "
           "(see the stage row)")
    note = f"{row.note}; {why}" if row.note else why
    return LimitRow(part=row.part, quantity=row.quantity, unit=row.unit, worst=row.worst,
                    where=row.where, design_limit=row.design_limit,
                    absolute_limit=row.absolute_limit, margin=row.margin,
                    margin_unit=row.margin_unit, status="caution", basis=row.basis, note=note)


def _stage_rows(design: Design, budgets: list[Budget], grid: Budget, corner: Corner,
                varying: tuple[str, ...]) -> list[LimitRow]:
    """Rows for thermal runaway or non-convergence (fail) and infeasible points (caution)."""
    rows: list[LimitRow] = []
    n_grid = grid.output_power.size

    def gather(flag_names: tuple[str, ...]):
        pts, reasons = [], []
        for b in budgets:
            c = _flat_coords(b)
            mask = np.zeros(b.shape, dtype=bool)
            for f in flag_names:
                mask |= b.flags[f]
            mask = mask.ravel()
            idx = np.flatnonzero(mask)
            pts.extend({a: float(c[a][i]) for a in AXES} for i in idx)
            reasons.extend(str(r) for r in b.reason.ravel()[idx])
        return pts, reasons

    def shown(point: dict[str, float]) -> dict[str, float]:
        return {a: point[a] for a in AXES if a != "fsw" or "fsw" in varying}

    def extent(pts: list[dict[str, float]]) -> str:
        dims = {"vin": "voltage", "vout": "voltage", "load": "current",
                "ambient": "temperature", "fsw": "frequency"}
        parts = []
        for a in varying:
            lo, hi = min(p[a] for p in pts), max(p[a] for p in pts)
            parts.append(f"{a} {_q(lo, dims[a])}" if lo == hi
                         else f"{a} {_q(lo, dims[a])} to {_q(hi, dims[a])}")
        return ", ".join(parts)

    def grid_count(flag_names: tuple[str, ...]) -> int:
        return int(sum(grid.flags[f].sum() for f in flag_names))

    nan = float("nan")
    # thermal runaway or no convergence: the onset (lowest load) located in load
    th_pts, th_reasons = gather(("runaway", "not_converged"))
    if th_pts:
        j = min(range(len(th_pts)), key=lambda i: (th_pts[i]["load"], th_pts[i]["vin"]))
        onset, reason = dict(th_pts[j]), th_reasons[j]
        located = ""
        loads = np.asarray(LOAD_FRACTIONS) * design.operating.iout_rated
        below = loads[loads < onset["load"] - 1e-12]
        if below.size:
            lo = float(below.max())
            scan = np.linspace(lo, onset["load"], ONSET_POINTS)
            pts = {a: np.full(scan.size, onset[a]) for a in AXES}
            pts["load"] = scan
            b = solve(design, corner=corner, **pts)
            budgets.append(b)
            th_pts, _ = gather(("runaway", "not_converged"))
            bad = (b.flags["runaway"] | b.flags["not_converged"]).ravel()
            if bad.any() and not bad.all():
                k = int(np.argmax(bad))
                onset["load"] = float(scan[k])
                reason = str(b.reason.ravel()[k])
                located = (f"; onset located in load to within "
                           f"{_q(float(scan[1] - scan[0]), 'current')}")
        rows.append(LimitRow(
            part="stage", quantity="thermal", unit="", worst=nan, where=shown(onset),
            design_limit=nan, absolute_limit=nan, margin=nan, margin_unit="", status="fail",
            basis=f"{reason} — the coupled solve has no steady state here",
            note=(f"runaway or not converged at {grid_count(('runaway', 'not_converged'))} of "
                  f"{n_grid} grid points, over {extent(th_pts)} among every point solved; "
                  f"shown at the lowest load{located}; the other rows cover only the points "
                  "that solved"),
        ))
    # infeasible points, one row per reason
    inf_pts, inf_reasons = gather(("infeasible",))
    grid_reasons = grid.reason.ravel()[grid.flags["infeasible"].ravel()]
    for reason in dict.fromkeys(inf_reasons):
        pts = [p for p, r in zip(inf_pts, inf_reasons, strict=True) if r == reason]
        count = int(np.sum(grid_reasons == reason))
        rows.append(LimitRow(
            part="stage", quantity="regulation", unit="", worst=nan, where=shown(pts[0]),
            design_limit=nan, absolute_limit=nan, margin=nan, margin_unit="",
            status="caution",
            basis=f"{reason} — the stage cannot regulate there",
            note=(f"at {count} of {n_grid} grid points, over {extent(pts)} among every point "
                  "solved; the region's edge is not refined"),
        ))
    return rows


def check_limits(design: Design, *, derating: str | None = None,
                 corner: Corner = "worst") -> LimitReport:
    """Check every part's limits over the operating envelope.

    Parameters
    ----------
    design : Design
        A design from :func:`lossbudget.load_design`.
    derating : {"none", "moderate", "conservative", "custom"}, optional
        Derating profile; the design's ``limits.derating`` when omitted. ``"custom"`` uses
        the design's ``[limits.margins]`` rows and the moderate profile for the rows not
        named; a named profile uses its own rows only. A design row is
        ``{ use_up_to = "75 %" }`` (the design limit is 75 % of the rating) or, for a
        temperature, ``{ below_max = "25 K" }`` (25 K below the absolute limit).
    corner : {"worst", "typ"}
        Part values; the check is meant for ``"worst"``.

    Returns
    -------
    LimitReport
        A row per part and limit, the worst status, the cautions and the grid described.
        Given a :class:`~lossbudget.factorial.Variants` instead of a design: a
        :class:`VariantLimits`, every variant checked on the envelope grid in one vectorised
        sweep (without the local refinement), with its worst status, limit and margin.

    Notes
    -----
    The envelope grid: 7 input voltages from min to max × the output voltage's min, nom, max
    × 12 loads (2 % to 100 % of rated) × the ambient's min, nom, max (× the switching
    frequency's min, nom, max where it has a range), solved in one vectorised sweep. Where a
    check's worst point lies inside an axis, a local grid around it is zoomed until its spacing
    is within 1 % of the axis span (load: 1 % of the rated current); a worst point at an axis
    edge stays at the edge.
    """
    if corner not in ("typ", "worst"):
        raise ValueError(f"corner: expected 'typ' or 'worst', got {corner!r}")
    from lossbudget.factorial import Variants

    if isinstance(design, Variants):
        return _variant_limits(design, derating=derating, corner=corner)
    label, margins = _margins_for(design, derating)
    checks, missing = _checks(design, corner)
    axes = _envelope(design)
    tol = _tolerance(design, axes)
    grid = sweep(design, corner=corner, **axes)
    coords = _flat_coords(grid)
    varying = tuple(a for a in AXES if axes[a].size > 1)

    searches: list[_Search] = []
    unevaluated: list[Rating] = []
    for check in checks:
        value, absolute, key = _evaluate(check, grid)
        if not np.any(np.isfinite(key)):
            unevaluated.append(check)
            continue
        k = _argworst(check, key, grid)
        idx = np.unravel_index(k, grid.shape)
        brackets = {}
        for dim, a in enumerate(AXES):
            x, i = axes[a], int(idx[dim])
            if x.size >= 3 and 0 < i < x.size - 1:
                brackets[a] = (float(x[i - 1]), float(x[i + 1]))
        searches.append(_Search(
            check=check, key=float(key[k]), point={a: float(coords[a][k]) for a in AXES},
            value=float(value[k]), absolute=float(absolute[k]),
            note=check.note(grid, k) if check.note else "", brackets=brackets,
        ))
    budgets: list[Budget] = [grid]
    refined = _refine(design, searches, axes, tol, corner, budgets)

    rows: list[LimitRow] = []
    for s in searches:
        c = s.check
        rows.append(LimitRow(
            part=c.part, quantity=c.quantity, unit=c.unit, worst=s.value,
            where={a: s.point[a] for a in AXES if a != "fsw" or "fsw" in varying},
            absolute_limit=s.absolute, note=s.note,
            **_judged(c, s.value, s.absolute, margins),
        ))
    nan = float("nan")
    for c in unevaluated:
        rows.append(LimitRow(
            part=c.part, quantity=c.quantity, unit=c.unit, worst=nan, where={},
            design_limit=nan, absolute_limit=nan, margin=nan, margin_unit="", status="fail",
            basis="not evaluated: no point of the envelope solved", note="",
        ))
    stage = _stage_rows(design, budgets, grid, corner, varying)
    if any(r.quantity == "thermal" for r in stage):
        rows = [_unsolved(r) for r in rows]
    rows.extend(stage)
    worst = max((r.status for r in rows), key=STATUS_ORDER.index, default="ok")


    dims = {"vin": "voltage", "vout": "voltage", "load": "current", "ambient": "temperature",
            "fsw": "frequency"}
    sizes = " × ".join(f"{axes[a].size} {a}" for a in AXES)
    ranges = "; ".join(
        f"{a} {_q(float(axes[a].min()), dims[a])}"
        + (f" to {_q(float(axes[a].max()), dims[a])}" if axes[a].size > 1 else "")
        for a in AXES)
    tol_dims = {**dims, "ambient": "temperature_difference"}
    tol_text = ", ".join(f"{a} {_q(tol[a], tol_dims[a])}" for a in varying)
    text = (f"envelope grid {sizes} = {grid.output_power.size} points ({ranges}; load "
            f"{LOAD_FRACTIONS[0] * 100:g} % to 100 % of rated) at the {corner}-case part values; "
            f"where a worst point lies inside an axis, a local grid around it is zoomed until "
            f"its spacing is within {REFINE_TOLERANCE * 100:g} % of the axis span (load: of the "
            f"rated current): {tol_text}; a worst point at an axis edge stays at the edge "
            f"({refined} refinement points solved)")
    return LimitReport(
        design_name=design.name, derating=label, corner=corner, rows=tuple(rows),
        worst_status=worst, cautions=CAUTIONS, grid=text, not_checked=tuple(missing),
        envelope={a: tuple(float(v) for v in axes[a]) for a in AXES},
        calibration=design.calibration.describe() if design.calibration else "",
    )


# --------------------------------------------------------------------------------------------
# design variants: the envelope check of every variant in one vectorised sweep
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True, eq=False)
class VariantLimits:
    """The envelope check of every design variant: arrays over the variants.

    ``table`` holds one row per variant and limit (``variant``, ``part``, ``quantity``,
    ``worst``, ``design_limit``, ``absolute_limit``, ``margin``, ``margin_unit``, ``headroom``,
    ``status``). ``headroom`` puts the margins on one scale: the fraction of the design limit
    left (voltages, currents, flux, life), and for temperatures the fraction of the allowed
    rise above the hottest ambient left, (T_design − T_worst)/(T_design − T_ambient,max).
    Per variant: ``worst_status``, the ``worst_limit`` (part.quantity of the lowest headroom
    among the rows of the worst status, or the stage's runaway or regulation) and its
    ``worst_margin`` and ``worst_headroom``.
    """

    labels: tuple[str, ...]
    derating: str
    corner: Corner
    worst_status: np.ndarray
    worst_limit: np.ndarray
    worst_margin: np.ndarray
    worst_margin_unit: np.ndarray
    worst_headroom: np.ndarray
    table: Any
    grid: str
    cautions: tuple[str, ...] = CAUTIONS


def _variant_limits(variants, *, derating: str | None, corner: Corner) -> VariantLimits:
    """Envelope check of design variants: one sweep over variants × the envelope grid."""
    import pandas as pd

    from lossbudget.factorial import stacked_design, subset

    base = variants.base
    label, margins = _margins_for(base, derating)
    axes = _envelope(base)
    per_variant_fsw = "operating.fsw" in variants.values
    if per_variant_fsw:
        # each variant at its own switching frequency (its nominal)
        axes = {a: x for a, x in axes.items() if a != "fsw"}
    n = variants.size
    t_amb = float(axes["ambient"].max())
    labels = tuple(str(x) for x in variants.labels)
    records = []
    order = np.zeros(n, dtype=int)  # status index of the worst row
    head = np.full(n, np.inf)
    w_limit = np.full(n, "", dtype=object)
    w_margin = np.full(n, np.nan)
    w_unit = np.full(n, "", dtype=object)
    grid_points = int(np.prod([x.size for x in axes.values()]))
    block = max(1, VARIANT_BLOCK_POINTS // grid_points)
    # structure groups, each one vectorised sweep over blocks of its variants (a block of
    # variants × the envelope is a few hundred thousand points, so memory stays bounded)
    blocks = [g[s:s + block] for g in variants.groups() for s in range(0, g.size, block)]
    for members in blocks:
        sub = subset(variants, members)
        sd = stacked_design(sub, np.arange(members.size))
        b = sweep(sub, corner=corner, **axes)
        m = members.size
        checks, _ = _checks(sd, corner)
        rows = []
        for c in checks:
            value, absolute = c.measure(b)
            value = np.broadcast_to(value, b.shape).reshape(m, -1)
            absolute = np.broadcast_to(absolute, b.shape).reshape(m, -1)
            key = _key(c, value, absolute)
            finite = np.isfinite(key)
            k = np.argmax(np.where(finite, key, -np.inf), axis=1)
            pick = np.arange(m)
            worst = np.where(finite.any(axis=1), value[pick, k], np.nan)
            absl = np.where(finite.any(axis=1), absolute[pick, k], np.nan)
            if c.kind is None:
                design_limit = absl
            else:
                design_limit = margins[c.kind, c.quantity].design_limit(absl)
            with np.errstate(invalid="ignore", divide="ignore"):
                if c.unit == "degC":
                    margin, unit = design_limit - worst, "K"
                    headroom = margin / (design_limit - t_amb)
                elif c.lower_is_worse:
                    margin, unit = (worst - design_limit) / design_limit, "fraction"
                    headroom = margin
                else:
                    margin, unit = (design_limit - worst) / design_limit, "fraction"
                    headroom = margin
                if c.lower_is_worse:
                    status = np.where(worst < absl, 2, np.where(worst < design_limit, 1, 0))
                else:
                    status = np.where(worst > absl, 2, np.where(worst > design_limit, 1, 0))
            status = np.where(np.isfinite(worst), status, 2)
            rows.append((f"{c.part}.{c.quantity}", c, worst, design_limit, absl, margin, unit,
                         headroom, status))
        bad = {f: b.flags[f].reshape(m, -1).any(axis=1) for f in b.flags}
        thermal = bad["runaway"] | bad["not_converged"]
        regulation = bad["infeasible"]
        nan = np.full(m, np.nan)
        rows.append(("stage.thermal", None, nan, nan, nan, nan, "", np.where(thermal, -np.inf,
                                                                              np.nan),
                     np.where(thermal, 2, 0)))
        rows.append(("stage.regulation", None, nan, nan, nan, nan, "",
                     np.where(regulation, -np.inf, np.nan), np.where(regulation, 1, 0)))
        for name, c, worst, dl, absl, margin, unit, headroom, status in rows:
            part, qty = name.split(".", 1)
            records.append(pd.DataFrame({
                "variant_id": members, "variant": np.asarray(labels, dtype=object)[members],
                "part": part, "quantity": qty, "unit": c.unit if c is not None else "",
                "worst": worst, "design_limit": dl, "absolute_limit": absl, "margin": margin,
                "margin_unit": unit, "headroom": headroom,
                "status": np.asarray(STATUS_ORDER, dtype=object)[status],
            }))
            g_order, g_head = order[members], head[members]
            h = np.where(np.isnan(headroom), np.inf, headroom)
            better = (status > g_order) | ((status == g_order) & (h < g_head))
            take = better & ((status > 0) | np.isfinite(h))
            idx = members[take]
            order[idx] = status[take]
            head[idx] = h[take]
            w_limit[idx] = name
            w_margin[idx] = margin[take]
            w_unit[idx] = unit
    table = pd.concat(records, ignore_index=True).sort_values(
        ["variant_id"], kind="stable").reset_index(drop=True)
    sizes = " × ".join(f"{axes[a].size} {a}" for a in AXES if a in axes)
    if per_variant_fsw:
        sizes += " at each variant's own fsw"
    text = (f"envelope grid {sizes} per variant at the {corner}-case part values, one "
            "vectorised sweep over the variants; each limit's worst point is the worst grid "
            "point (the single-design check's local refinement is not run per variant)")
    return VariantLimits(
        labels=labels, derating=label, corner=corner,
        worst_status=np.asarray(STATUS_ORDER, dtype=object)[order],
        worst_limit=w_limit, worst_margin=w_margin, worst_margin_unit=w_unit,
        worst_headroom=np.where(np.isfinite(head), head, np.nan), table=table, grid=text,
    )


__all__ = ["LimitReport", "LimitRow", "Margin", "VariantLimits", "check_limits",
           "derating_profiles", "electrolytic_life_10k", "i_sat_at", "point_ratings"]
