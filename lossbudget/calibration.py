"""Calibration: scale factors on the model's loss groups fitted to bench measurements.

A model from datasheet values is a first estimate; :func:`calibrate` brings it to the bench.
It reads the measured points (a CSV file or a DataFrame), solves the model at all of them in
one vectorised call, and fits the free scale factors (``switching``, ``coss``, ``conduction``,
``copper``, ``core``, ``quiescent``, ``board[.position]``, ``rth.<sink>``; see
:class:`~lossbudget.design.ScaleFactors`) by bounded, weighted least squares
(:func:`scipy.optimize.least_squares`) on the loss residual of every point and the temperature
residual of every measured node. Standard errors and correlations come from the Jacobian at
the solution; a request whose factors the measurements cannot tell apart is refused, naming
them and the measurement that would separate them. The result carries the calibrated design
(a ``[calibration]`` table that the loader reads and every output echoes) and writes the
calibrated file with the original's keys and comments kept (tomlkit).

It sits after the solver and beside the limit check: design → solver → calibration.
"""

from __future__ import annotations

import csv
import difflib
import hashlib
import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from lossbudget.design import (
    GROUP_FACTORS,
    POSITIONS,
    Design,
    ScaleFactors,
    apply_calibration,
    board_resistor_name,
)
from lossbudget.errors import DesignError
from lossbudget.units import format_quantity

FACTOR_BOUNDS = (0.02, 50.0)
"""Bounds of a scale factor [-]: a fit outside them says the model misses a mechanism."""
BOARD_BOUNDS = (0.0, 1.0)
"""Bounds of an added board resistance. [ohm]"""
BOARD_SCALE = 0.01
"""Typical size of a board resistance, the fit's unit for it (10 mΩ). [ohm]"""
BOARD_START = 1e-3
"""Starting value of a board resistance the design does not hold yet. [ohm]"""
STEP = 1e-2
"""Finite-difference step of the Jacobian in the fit's units (1 % on a factor, 0.1 mΩ on a
board resistance) [-]: large against the 0.01 K tolerance of the coupled thermal solve, small
against the factors' uncertainty."""
CONDITION_LIMIT = 1e-2
"""Refuse when a singular value of the column-normalised Jacobian falls below this fraction of
the largest: the factors then move the residuals along (nearly) the same direction (for two
factors, a correlation of their effects above 0.99995). [-]"""
DETERMINED_LIMIT = 1.0
"""Refuse a factor whose standard error at the start exceeds this many of the fit's units
(± 100 % on a scale factor, ± 10 mΩ on a board resistance): the points do not determine it. [-]"""
EFFECT_LIMIT = 1e-3
"""Refuse a factor whose doubling moves no residual by more than this many standard
deviations: the measurements do not see it. [-]"""
PENALTY = 1e3
"""Residual standing for a point the model cannot solve at trial factors (runaway). [-]"""


@dataclass(frozen=True, slots=True, kw_only=True)
class Uncertainty:
    """Standard uncertainties of the bench readings (one standard deviation).

    Defaults: ``power_rel`` 0.1 % of reading on each of input and output power (from memory:
    the basic power accuracy of a bench power analyser is of order 0.05-0.1 % of reading; a
    pair of multimeters does worse, give their figure), ``power_floor`` 5 mW on the loss
    (offsets, ranges; common practice), ``temperature`` 1 K on a thermocouple reading (common
    practice for a bonded fine-wire thermocouple read against a reference junction).
    """

    power_rel: float = 1e-3
    power_floor: float = 5e-3
    temperature: float = 1.0

    def loss_sigma(self, pin: np.ndarray, pout: np.ndarray) -> np.ndarray:
        """Standard uncertainty of the loss P_in − P_out, the two readings independent. [W]"""
        return np.sqrt((self.power_rel * pin) ** 2 + (self.power_rel * pout) ** 2
                       + self.power_floor**2)


# --------------------------------------------------------------------------------------------
# the measured points
# --------------------------------------------------------------------------------------------

_UNITS = {
    "vin_v": "V",
    "vout_v": "V",
    "load_a": "A",
    "load_pct": "% of the rated output current",
    "efficiency": "a fraction 0-1",
    "input_power_w": "W",
    "output_power_w": "W",
    "ambient_degc": "degC",
}
_STEMS = {
    "vin": "vin_v",
    "vout": "vout_v",
    "load": "load_a or load_pct",
    "iout": "load_a or load_pct",
    "eff": "efficiency",
    "input_power": "input_power_w",
    "pin": "input_power_w",
    "output_power": "output_power_w",
    "pout": "output_power_w",
    "ambient": "ambient_degc",
}


@dataclass(frozen=True, kw_only=True)
class Bench:
    """Measured points in SI units (absolute temperatures in degC), one entry per point."""

    name: str
    sha256: str
    labels: tuple[str, ...]
    vin: np.ndarray
    load: np.ndarray
    vout: np.ndarray | None
    ambient: np.ndarray
    pin: np.ndarray
    pout: np.ndarray
    temperatures: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def loss(self) -> np.ndarray:
        """Measured loss P_in − P_out. [W]"""
        return self.pin - self.pout

    @property
    def efficiency(self) -> np.ndarray:
        """Measured efficiency P_out/P_in. [-]"""
        return self.pout / self.pin

    @property
    def size(self) -> int:
        return int(self.vin.size)


def node_column(node: str) -> str:
    """The bench (and point-table) column of a node's temperature: ``t_switch_case_degc``."""
    return f"t_{node.replace('.', '_')}_degc"


def _rows(measured: Any) -> tuple[str, str, list[str], list[tuple[str, list[str]]]]:
    """Name, sha256, header and (label, cells) rows of a CSV path or a DataFrame."""
    if isinstance(measured, str | Path):
        path = Path(measured)
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise DesignError(f"{path}: cannot read the bench file ({exc.strerror})") from None
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise DesignError(f"{path.name}: expected a UTF-8 text (CSV) file") from None
        name = path.name
        header: list[str] | None = None
        rows: list[tuple[str, list[str]]] = []
        for n, cells in enumerate(csv.reader(io.StringIO(text)), start=1):
            if not cells or not "".join(cells).strip() or cells[0].lstrip().startswith("#"):
                continue
            if header is None:
                header = [c.strip() for c in cells]
            else:
                rows.append((f"line {n}", [c.strip() for c in cells]))
        if header is None:
            raise DesignError(f"{name}: expected a header line of column names, found none")
        return name, hashlib.sha256(data).hexdigest(), header, rows
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover - pandas is a dependency
        pd = None
    if pd is not None and isinstance(measured, pd.DataFrame):
        text = measured.to_csv(index=False)
        rows = [
            (f"row {idx}", ["" if _missing(v) else str(v) for v in values])
            for idx, values in zip(measured.index, measured.itertuples(index=False), strict=True)
        ]
        header = [str(c).strip() for c in measured.columns]
        return "<DataFrame>", hashlib.sha256(text.encode()).hexdigest(), header, rows
    raise DesignError(
        f"<{type(measured).__name__}>: expected a bench CSV path or a pandas DataFrame"
    )


def _missing(v: Any) -> bool:
    return v is None or (isinstance(v, float) and math.isnan(v))


def read_bench(measured: Any, *, design: Design) -> Bench:
    """Read and check measured points: a CSV file (``#`` lines are comments) or a DataFrame.

    Columns: ``vin_v``; ``load_a`` or ``load_pct`` (percent of the rated output current);
    ``efficiency`` (a fraction) or ``input_power_w`` and ``output_power_w`` (both forms may be
    given: the powers are used and the efficiency must agree with them within 0.5 %);
    optional ``vout_v`` (signed as in the design), ``ambient_degc`` (else the design's
    nominal) and ``t_<node>_degc`` for any node of the thermal network.

    Raises
    ------
    DesignError
        One line per problem, naming the file, the line (or row) and column, and what was
        expected.
    """
    from lossbudget.solver import thermal_nodes

    name, sha, header, rows = _rows(measured)
    problems: list[str] = []
    nodes = thermal_nodes(design)
    t_cols = {node_column(n): n for n in nodes}
    known = (*_UNITS, *t_cols)
    for col in header:
        if col in known:
            continue
        stem = next((s for s in _STEMS if col.lower().startswith(s)), None)
        if col.startswith("t_") and col.endswith("_degc"):
            problems.append(f"{name}: column {col!r}: no thermal node of that name; nodes: "
                            f"{', '.join(t_cols)}")
        elif stem is not None:
            problems.append(f"{name}: column {col!r}: expected {_STEMS[stem]} (the unit is "
                            "part of the column name; convert the values)")
        else:
            near = difflib.get_close_matches(col, known, n=1, cutoff=0.5)
            hint = f" (did you mean {near[0]!r}?)" if near else ""
            problems.append(f"{name}: column {col!r}: unknown column{hint}; expected "
                            f"{', '.join(_UNITS)} or t_<node>_degc")
    dupes = sorted({c for c in header if header.count(c) > 1})
    for col in dupes:
        problems.append(f"{name}: column {col!r}: given more than once")
    has = set(header)
    if "vin_v" not in has:
        problems.append(f"{name}: column 'vin_v': missing required column (input voltage, V)")
    if ("load_a" in has) == ("load_pct" in has):
        problems.append(f"{name}: columns load_a, load_pct: expected exactly one of them "
                        f"(output current in A, or in % of rated), got "
                        f"{'both' if 'load_a' in has else 'neither'}")
    powers = {"input_power_w", "output_power_w"} & has
    if len(powers) == 1:
        other = ({"input_power_w", "output_power_w"} - powers).pop()
        problems.append(f"{name}: column {other!r}: missing (input_power_w and output_power_w "
                        "go together)")
    if not powers and "efficiency" not in has:
        problems.append(f"{name}: columns efficiency or input_power_w + output_power_w: "
                        "missing (the measured efficiency or both powers)")
    if not rows:
        problems.append(f"{name}: expected at least one measured point below the header")
    if problems:
        raise DesignError(problems)
    width = len(header)
    values: dict[str, list[float]] = {c: [] for c in header}
    for label, cells in rows:
        if len(cells) != width:
            problems.append(f"{name}: {label}: expected {width} cells (as the header), "
                            f"got {len(cells)}")
            continue
        for col, cell in zip(header, cells, strict=True):
            try:
                x = float(cell)
            except ValueError:
                x = math.nan
                what = "empty" if not cell else repr(cell)
                problems.append(f"{name}: {label}, column {col}: expected a number in "
                                f"{_UNITS.get(col, 'degC')}, got {what}")
            else:
                if not math.isfinite(x):
                    problems.append(f"{name}: {label}, column {col}: expected a finite number "
                                    f"in {_UNITS.get(col, 'degC')}, got {cell!r}")
            values[col].append(x)
    if problems:
        raise DesignError(problems)
    arr = {c: np.asarray(v, dtype=float) for c, v in values.items()}
    labels = tuple(label for label, _ in rows)

    def rule(col: str, bad: np.ndarray, expected: str) -> None:
        for k in np.flatnonzero(bad):
            problems.append(f"{name}: {labels[k]}, column {col}: expected {expected}, "
                            f"got {arr[col][k]:g}")

    rule("vin_v", arr["vin_v"] <= 0, "a positive input voltage (V)")
    if "load_a" in arr:
        rule("load_a", arr["load_a"] <= 0, "a positive output current (A)")
        load = arr["load_a"]
    else:
        rule("load_pct", arr["load_pct"] <= 0, "a positive load in % of rated")
        load = arr["load_pct"] / 100.0 * design.operating.iout_rated
    if "efficiency" in arr:
        eff = arr["efficiency"]
        rule("efficiency", eff <= 0, "an efficiency above 0 (a fraction)")
        rule("efficiency", eff >= 1, "an efficiency below 1 (a fraction: 0.952, not 95.2)")
    for col in powers:
        rule(col, arr[col] <= 0, "a positive power (W)")
    if "vout_v" in arr:
        sign = -1.0 if design.inverting else 1.0
        rule("vout_v", sign * arr["vout_v"] <= 0,
             "a negative output voltage (inverting stage)" if design.inverting
             else "a positive output voltage (V)")
    for col in [c for c in header if c in t_cols or c == "ambient_degc"]:
        rule(col, arr[col] < -273.15, "a temperature above absolute zero (degC)")
    if problems:
        raise DesignError(problems)
    vout = arr.get("vout_v")
    if powers:
        pin, pout = arr["input_power_w"], arr["output_power_w"]
        rule("output_power_w", pout >= pin, "an output power below the input power")
        if "efficiency" in arr:
            rule("efficiency", np.abs(arr["efficiency"] - pout / pin) > 5e-3,
                 "the efficiency output_power_w/input_power_w within 0.5 %")
    else:
        pout = (np.abs(vout) if vout is not None else abs(design.operating.vout.nom)) * load
        pin = pout / arr["efficiency"]
    if problems:
        raise DesignError(problems)
    ambient = arr.get("ambient_degc", np.full(load.shape, design.operating.ambient.nom))
    return Bench(
        name=name,
        sha256=sha,
        labels=labels,
        vin=arr["vin_v"],
        load=load,
        vout=vout,
        ambient=ambient,
        pin=pin,
        pout=pout,
        temperatures={t_cols[c]: arr[c] for c in header if c in t_cols},
    )


# --------------------------------------------------------------------------------------------
# the free factors
# --------------------------------------------------------------------------------------------

_HINTS = {
    "switching": "the edge energies grow with the current and the edge voltage: spread the "
    "points over load and input voltage",
    "coss": "the node-charge loss does not change with load: add light-load points, and "
    "points at other edge voltages",
    "conduction": "the channel loss grows as the current squared and with the FET's "
    "temperature: add a t_switch_degc reading",
    "copper": "the winding loss grows as the inductor current squared: add a "
    "t_inductor_degc reading",
    "core": "the core loss follows the flux swing (input voltage and duty), not the load: "
    "add points at other input voltages",
    "quiescent": "the bias loss is a constant power from its supply: add points at other "
    "input voltages and at light load",
    "board": "an added series resistance heats no part of the network: add temperature "
    "readings of the parts (t_<node>_degc) to tell it from their own losses",
}


def _parse_free(free: Any, design: Design) -> tuple[str, ...]:
    """The free factors by name, ``board`` completed with its default position."""
    from lossbudget.design import BOARD_POSITION

    if isinstance(free, str):
        free = [f for f in free.split(",") if f.strip()]
    names: list[str] = []
    problems: list[str] = []
    sinks = {s.name: s for s in design.sinks}
    known = [*GROUP_FACTORS, "board", *(f"board.{p}" for p in POSITIONS),
             *(f"rth.{s}" for s in sinks)]
    for raw in free:
        f = str(raw).strip()
        kind, _, where = f.partition(".")
        if f == "board":
            f = f"board.{BOARD_POSITION}"
        elif kind == "board" and where not in POSITIONS:
            problems.append(f"free: {f!r}: expected board.<position>, one of "
                            f"{', '.join(POSITIONS)}")
            continue
        elif kind == "rth":
            if where not in sinks:
                problems.append(f"free: {f!r}: no sink named {where!r} (sinks: "
                                f"{', '.join(sinks) or 'none'})")
                continue
            if sinks[where].rth_to_ambient is None:
                problems.append(f"free: {f!r}: sink {where!r} has no rth_to_ambient to scale")
                continue
        elif f not in GROUP_FACTORS and kind != "board":
            near = difflib.get_close_matches(f, known, n=1, cutoff=0.5)
            hint = f" (did you mean {near[0]!r}?)" if near else ""
            problems.append(f"free: {f!r}: unknown factor{hint}; expected one of "
                            f"{', '.join(GROUP_FACTORS)}, board[.position], rth.<sink>")
            continue
        if f in names:
            problems.append(f"free: {f!r}: named twice")
            continue
        names.append(f)
    if not names and not problems:
        problems.append("free: expected at least one factor to fit")
    if problems:
        raise DesignError(problems)
    return tuple(names)


def _unit_scale(name: str) -> float:
    return BOARD_SCALE if name.startswith("board.") else 1.0


def _bounds(name: str) -> tuple[float, float]:
    return BOARD_BOUNDS if name.startswith("board.") else FACTOR_BOUNDS


def _display(name: str, value: float) -> str:
    if name.startswith("board."):
        return format_quantity(value, "resistance", digits=4)
    return f"{value:.4g}"


# --------------------------------------------------------------------------------------------
# the result
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, kw_only=True)
class Calibration:
    """The fitted factors, their uncertainty, the residuals and the calibrated design.

    ``values`` and ``stderr`` are by factor name (scale factors [-], ``board.*`` in ohms);
    ``correlation`` is the correlation matrix of the estimates in the order of ``free``;
    ``residuals`` has one row per measured point: measured loss and efficiency, the model's
    before and after, the normalised loss residuals, and each measured temperature with the
    model's before and after. ``chi_square`` is the weighted sum of squares at the solution
    over ``dof`` degrees of freedom.
    """

    design: Design
    original: Design
    bench: Bench
    free: tuple[str, ...]
    values: dict[str, float]
    start: dict[str, float]
    stderr: dict[str, float]
    correlation: np.ndarray
    residuals: Any
    chi_square: float
    dof: int
    uncertainty: Uncertainty
    at_bound: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    evaluations: int = 0

    def correlation_frame(self):
        """The correlation matrix as a DataFrame labelled by factor."""
        import pandas as pd

        return pd.DataFrame(self.correlation, index=list(self.free), columns=list(self.free))

    def summary_rows(self) -> list[list[str]]:
        """Rows factor, before, fitted, standard error (display strings)."""
        rows = []
        for f in self.free:
            se = self.stderr[f]
            rows.append([f, _display(f, self.start[f]), _display(f, self.values[f]),
                         "at bound" if f in self.at_bound else _display(f, se)])
        return rows

    def to_toml(self) -> str:
        """The calibrated design file: the original's text with a ``[calibration]`` table.

        Every key and comment of the original is kept (tomlkit edits the document in place);
        an existing ``[calibration]`` table is replaced.
        """
        import tomlkit

        text = self.original.text
        if text is None:
            raise DesignError(f"{self.original.source}: the design was not read from a TOML "
                              "file, so there is no file to extend; load it from a file")
        doc = tomlkit.parse(text)
        doc["calibration"] = _calibration_table(self)
        return tomlkit.dumps(doc)

    def write(self, path: str | Path) -> Path:
        """Write :meth:`to_toml` to ``path`` atomically (nothing half-written on failure)."""
        from lossbudget.output.files import atomic_paths

        path = Path(path)
        text = self.to_toml()
        with atomic_paths([path]) as temps:
            temps[0].write_text(text, encoding="utf-8")
        return path


def _calibration_table(cal: Calibration):
    import tomlkit

    k = cal.design.calibration
    table = tomlkit.table()
    table.add(tomlkit.comment(
        f"Scale factors fitted to bench measurements ({cal.bench.name}) by lossbudget "
        "calibrate;"))
    table.add(tomlkit.comment("± one standard error from the fit, beside each fitted value."))
    for g in GROUP_FACTORS:
        value = getattr(k, g)
        if value == 1.0 and g not in cal.free:
            continue
        item = tomlkit.item(float(f"{value:.7g}"))
        if g in cal.free:
            item.comment(_se_comment(cal, g))
        table.add(g, item)
    if k.board:
        board = tomlkit.inline_table()
        for pos, r in k.board:
            board[pos] = format_quantity(r, "resistance", digits=7)
        table.add("board", board)
        fitted = [f"board.{p}" for p, _ in k.board if f"board.{p}" in cal.free]
        if fitted:
            table["board"].comment(" ".join(_se_comment(cal, f) for f in fitted))
    if k.rth:
        rth = tomlkit.inline_table()
        for sink, x in k.rth:
            rth[sink] = float(f"{x:.7g}")
        table.add("rth", rth)
        fitted = [f"rth.{s}" for s, _ in k.rth if f"rth.{s}" in cal.free]
        if fitted:
            table["rth"].comment(" ".join(_se_comment(cal, f) for f in fitted))
    source = tomlkit.inline_table()
    source["bench"] = cal.bench.name
    source["points"] = cal.bench.size
    source["sha256"] = cal.bench.sha256
    source["free"] = list(cal.free)
    table.add("source", source)
    return table


def _se_comment(cal: Calibration, name: str) -> str:
    if name in cal.at_bound:
        return f"{name}: at its bound, no standard error"
    prefix = f"{name} " if "." in name else ""
    return f"{prefix}± {_display(name, cal.stderr[name])}"


# --------------------------------------------------------------------------------------------
# the fit
# --------------------------------------------------------------------------------------------


class _Model:
    """The design at trial factors, solved at every measured point in one call."""

    def __init__(self, design: Design, bench: Bench, free: tuple[str, ...],
                 uncertainty: Uncertainty):
        self.design = design
        self.base = design.calibration or ScaleFactors()
        self.bench = bench
        self.free = free
        self.scale = np.array([_unit_scale(f) for f in free])
        self.sigma_loss = uncertainty.loss_sigma(bench.pin, bench.pout)
        self.sigma_t = uncertainty.temperature
        self.nodes = tuple(bench.temperatures)
        self.calls = 0
        self._cache: dict[bytes, Any] = {}

    def factors(self, p: np.ndarray) -> ScaleFactors:
        values = dict(zip(self.free, (p * self.scale).tolist(), strict=True))
        return self.base.with_values(values)

    def budget(self, p: np.ndarray):
        from lossbudget.solver import solve

        key = np.asarray(p, dtype=float).tobytes()
        if key not in self._cache:
            b = self.bench
            d = apply_calibration(self.design, self.factors(np.asarray(p, dtype=float)))
            self.calls += 1
            if len(self._cache) > 2 * len(self.free) + 2:
                self._cache.pop(next(iter(self._cache)))
            self._cache[key] = solve(d, vin=b.vin, load=b.load, vout=b.vout, ambient=b.ambient)
        return self._cache[key]

    def residuals(self, p: np.ndarray) -> np.ndarray:
        budget = self.budget(p)
        r = [(self.bench.loss - budget.total_loss) / self.sigma_loss]
        r += [(self.bench.temperatures[n] - budget.temperature(n)) / self.sigma_t
              for n in self.nodes]
        out = np.concatenate(r)
        return np.where(np.isfinite(out), out, PENALTY)

    def jacobian(self, p: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """Forward differences (backward at an upper bound), one solve per free factor."""
        r0 = self.residuals(p)
        jac = np.empty((r0.size, p.size))
        for j in range(p.size):  # a loop over the few free factors, not over points
            h = STEP if p[j] + STEP <= hi[j] else -STEP
            q = p.copy()
            q[j] = min(max(p[j] + h, lo[j]), hi[j])
            jac[:, j] = (self.residuals(q) - r0) / (q[j] - p[j])
        return jac


def calibrate(
    design: Design,
    measured: Any,
    *,
    free: Any,
    uncertainty: Uncertainty | None = None,
) -> Calibration:
    """Fit scale factors on the model's loss groups to bench measurements.

    Parameters
    ----------
    design : Design
        The design, from :func:`lossbudget.load_design` (its own ``[calibration]`` factors,
        if any, are the starting values and stay for the factors not freed).
    measured : str, Path or pandas.DataFrame
        The measured points (see :func:`read_bench` for the columns).
    free : sequence of str or str
        Factors to fit: ``switching``, ``coss``, ``conduction``, ``copper``, ``core``,
        ``quiescent``, ``board`` (an added series resistance at the DC input; ``board.<pos>``
        at another current position), ``rth.<sink>``; a comma-separated string works too.
    uncertainty : Uncertainty, optional
        Standard uncertainties of the readings (defaults in :class:`Uncertainty`).

    Returns
    -------
    Calibration

    Raises
    ------
    DesignError
        Bad measurements or names, a point the model cannot solve, or factors that the
        measurements cannot tell apart (named, with what measurement would separate them).

    Notes
    -----
    Weighted least squares: minimise Σ r², r = (L_meas − L_model)/σ_L per point and
    (T_meas − T_model)/σ_T per measured temperature, bounded, by the trust-region reflective
    method. The covariance of the estimates is (JᵀJ)⁻¹ with J the Jacobian of the weighted
    residuals at the solution, so the standard errors follow from the stated uncertainties
    (not rescaled by the residuals; a χ²/dof far above 1 is reported as a note).

    References
    ----------
    .. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery, Numerical Recipes,
       3rd ed., Cambridge University Press, 2007, §15.4-15.6 (general linear least squares,
       covariance of the estimates, confidence limits).
    .. [2] M. A. Branch, T. F. Coleman, Y. Li, "A subspace, interior, and conjugate gradient
       method for large-scale bound-constrained minimization problems", SIAM J. Sci.
       Comput. 21(1), 1999 (the trust-region reflective method of scipy's least_squares).
    """
    from scipy.optimize import least_squares

    unc = uncertainty or Uncertainty()
    names = _parse_free(free, design)
    bench = read_bench(measured, design=design)
    model = _Model(design, bench, names, unc)
    start = {f: model.base.value(f) for f in names}
    for f in names:
        if f.startswith("board.") and start[f] <= 0:
            start[f] = BOARD_START
    p0 = np.array([start[f] for f in names]) / model.scale
    lo = np.array([_bounds(f)[0] for f in names]) / model.scale
    hi = np.array([_bounds(f)[1] for f in names]) / model.scale
    before = model.budget(p0)
    _refuse_unsolved(bench, before)
    n_res = bench.size * (1 + len(model.nodes))
    if n_res < len(names):
        raise DesignError(f"{bench.name}: free: {len(names)} factors need at least as many "
                          f"readings; the bench file holds {n_res}")
    _refuse_indistinguishable(model.jacobian(p0, lo, hi), names, bench, start=True)
    fit = least_squares(
        model.residuals,
        p0,
        jac=lambda p: model.jacobian(p, lo, hi),
        bounds=(lo, hi),
        method="trf",
        x_scale=1.0,
        xtol=1e-10,
        ftol=1e-10,
        gtol=1e-10,
        max_nfev=100,
    )
    p = fit.x
    jac = fit.jac  # the Jacobian at the solution (trust-region reflective keeps it)
    at_bound = tuple(f for f, a in zip(names, fit.active_mask, strict=True) if a != 0)
    _refuse_indistinguishable(jac, names, bench)
    cov = np.linalg.inv(jac.T @ jac) * np.outer(model.scale, model.scale)
    se = np.sqrt(np.diag(cov))
    corr = cov / np.outer(se, se)
    r = model.residuals(p)
    chi2 = float(r @ r)
    dof = n_res - len(names)
    # a board resistance below the loader's 1 µΩ floor is none at all (the fit ran to 0)
    is_board = np.array([f.startswith("board.") for f in names])
    p = np.where(is_board & (p * model.scale < 1e-6), 0.0, p)
    values = dict(zip(names, (p * model.scale).tolist(), strict=True))
    factors = model.factors(p).with_values({}, bench=bench.name, points=bench.size,
                                           sha256=bench.sha256, free=names)
    calibrated = apply_calibration(design, factors)
    after = model.budget(p)
    notes = _notes(chi2, dof, at_bound, fit)
    return Calibration(
        design=calibrated,
        original=design,
        bench=bench,
        free=names,
        values=values,
        start=start,
        stderr=dict(zip(names, se.tolist(), strict=True)),
        correlation=corr,
        residuals=_residual_table(bench, before, after, model.sigma_loss),
        chi_square=chi2,
        dof=dof,
        uncertainty=unc,
        at_bound=at_bound,
        notes=notes,
        evaluations=model.calls,
    )


def _refuse_unsolved(bench: Bench, budget) -> None:
    bad = np.flatnonzero(np.ravel(budget.flagged))
    if bad.size:
        raise DesignError([
            f"{bench.name}: {bench.labels[k]}: the model cannot solve this point "
            f"({np.ravel(budget.reason)[k]}); correct or remove it" for k in bad
        ])


def _refuse_indistinguishable(
    jac: np.ndarray, names: tuple[str, ...], bench: Bench, *, start: bool = False
) -> None:
    """Refuse factors the measurements cannot see, cannot tell apart, or do not determine."""
    norms = np.linalg.norm(jac, axis=0)
    blind = [f for f, c in zip(names, norms, strict=True) if not c > EFFECT_LIMIT]
    if blind:
        raise DesignError(
            f"{bench.name}: free: the measurements do not see {_and(blind)} (doubling "
            f"{'it' if len(blind) == 1 else 'each'} moves no reading by a standard "
            f"deviation): {_hints(blind, bench)}"
        )
    if len(names) > 1:
        _, s, vt = np.linalg.svd(jac / norms, full_matrices=False)
        weak = s < CONDITION_LIMIT * s[0]
        if np.any(weak):
            involved = np.max(np.abs(vt[weak]), axis=0) > 0.1
            group = [f for f, w in zip(names, involved, strict=True) if w]
            raise DesignError(
                f"{bench.name}: free: {_and(group)} cannot be told apart by these "
                f"{bench.size} points ({_span(bench)}): their effects on the readings are "
                "(nearly) proportional; fix all but one, or measure to separate them: "
                f"{_hints(group, bench)}"
            )
    if not start:
        return
    se = np.sqrt(np.diag(np.linalg.inv(jac.T @ jac)))
    loose = [(f, x) for f, x in zip(names, se, strict=True) if x > DETERMINED_LIMIT]
    if loose:
        what = ", ".join(
            f"{f} ± {_display(f, x * _unit_scale(f))}"
            + ("" if f.startswith("board.") else f" ({x * 100:.0f} %)")
            for f, x in loose
        )
        raise DesignError(
            f"{bench.name}: free: these {bench.size} points ({_span(bench)}) do not determine "
            f"{what}: fix {'it' if len(loose) == 1 else 'them'}, or measure more: "
            f"{_hints([f for f, _ in loose], bench)}"
        )


def _and(items: list[str]) -> str:
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _span(bench: Bench) -> str:
    def rng(x: np.ndarray, dim: str) -> str:
        lo, hi = float(np.min(x)), float(np.max(x))
        if np.isclose(lo, hi, rtol=1e-3):
            return f"all at {format_quantity(lo, dim)}"
        return f"{format_quantity(lo, dim)} to {format_quantity(hi, dim)}"

    temps = ", ".join(node_column(n) for n in bench.temperatures) or "no temperatures"
    return f"vin {rng(bench.vin, 'voltage')}, load {rng(bench.load, 'current')}, {temps}"


def _hints(group: list[str], bench: Bench) -> str:
    out: list[str] = []
    kinds: set[str] = set()
    for f in group:
        kind = f.partition(".")[0]
        if kind == "rth":
            sink = f.partition(".")[2]
            out.append(f"{f}: a sink's resistance shows mainly in temperatures: add "
                       f"{node_column(sink)} or the temperature of a part mounted on {sink}")
        elif kind not in kinds:
            kinds.add(kind)
            out.append(f"{f}: {_HINTS[kind]}")
    return "; ".join(out)


def _notes(chi2: float, dof: int, at_bound: tuple[str, ...], fit) -> tuple[str, ...]:
    from scipy.stats import chi2 as chi2_dist

    notes = []
    if dof > 0 and chi2 > chi2_dist.ppf(0.999, dof):
        notes.append(
            f"the residuals are larger than the stated uncertainties explain (χ²/dof = "
            f"{chi2 / dof:.3g}): the standard errors are understated; the model misses a loss "
            "the free factors do not cover, or the readings are less accurate than stated"
        )
    for f in at_bound:
        notes.append(f"{f} ended at its bound: the best fit lies there or beyond; its standard "
                     "error is not meaningful (a mechanism may be missing from the model)")
    if not fit.success:
        notes.append(f"the fit stopped before converging: {fit.message}")
    return tuple(notes)


def _residual_table(bench: Bench, before, after, sigma_loss: np.ndarray):
    import pandas as pd

    cols: dict[str, Any] = {
        "point": list(bench.labels),
        "vin_v": bench.vin,
        "load_a": bench.load,
        "ambient_degc": bench.ambient,
        "loss_w": bench.loss,
        "loss_before_w": before.total_loss,
        "loss_after_w": after.total_loss,
        "efficiency": bench.efficiency,
        "efficiency_before": before.efficiency,
        "efficiency_after": after.efficiency,
        "residual_before": (bench.loss - before.total_loss) / sigma_loss,
        "residual_after": (bench.loss - after.total_loss) / sigma_loss,
    }
    for n, t in bench.temperatures.items():
        col = node_column(n)
        cols[col] = t
        cols[col.replace("_degc", "_before_degc")] = before.temperature(n)
        cols[col.replace("_degc", "_after_degc")] = after.temperature(n)
    return pd.DataFrame(cols)


__all__ = [
    "Bench",
    "Calibration",
    "Uncertainty",
    "board_resistor_name",
    "calibrate",
    "node_column",
    "read_bench",
]
