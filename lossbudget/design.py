"""The design file: TOML (or a dict of the same shape) into frozen, validated dataclasses.

Every quantity is read through :mod:`lossbudget.units` by the dimension the glossary gives its
key, so the values here are SI (absolute temperatures in degC). The loader walks the whole
file, gathers every problem (missing or unknown keys, wrong types or units, non-physical
values, contradictions, ranges that no point could meet) and raises one
:class:`~lossbudget.errors.DesignError` listing them, each line naming the source, the key path
and what was expected against what came. Nothing in a file is evaluated: it is data only.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from lossbudget.errors import DesignError
from lossbudget.plausible import far_outside
from lossbudget.units import (
    GLOSSARY,
    check_range,
    echo_value,
    format_quantity,
    glossary_dimension,
    parse_quantity,
    printable,
)

Topology = Literal["boost", "buck", "buck-boost"]
RectifierKind = Literal["diode", "sync"]
LightLoad = Literal["forced-continuous", "diode-emulation"]
Corner = Literal["typ", "worst"]
DriverSupply = Literal["vin", "vout", "aux"]
DcmTurnOn = Literal["ring", "averaged", "valley"]
Position = Literal["input", "switch", "rectifier", "inductor", "output", "load"]

TOPOLOGIES = ("boost", "buck", "buck-boost")
RECTIFIER_KINDS = ("diode", "sync")
LIGHT_LOADS = ("forced-continuous", "diode-emulation")
SUPPLIES = ("vin", "vout", "aux")
DCM_TURN_ONS = ("ring", "averaged", "valley")
DCM_TURN_ONS_REPLACED = ("settled", "peak")
POSITIONS = ("input", "switch", "rectifier", "inductor", "output", "load")
DERATING_PROFILES = ("none", "moderate", "conservative")
# [limits.margins]: the quantities of each part kind a derating row may set (the same table
# the profiles in data/derating.toml use), and the one form of each row: a temperature
# { below_max = "25 K" } (kelvin below the absolute limit, optionally at_most = "125 degC"),
# any other { use_up_to = "75 %" } (the share of the rating the design may use).
MARGIN_QUANTITIES: dict[str, tuple[str, ...]] = {
    "mosfet": ("t_j", "v_pk"),
    "diode": ("t_j", "v_pk"),
    "inductor": ("t_hot", "i_pk", "i_limit", "b_pk"),
    "capacitor": ("v_pk", "i_rms", "t_hot"),
    "electrolytic": ("v_pk", "i_rms", "t_hot"),
}
RESERVED_NAMES = ("switch", "rectifier", "inductor", "driver", "controller", "ambient")
T_REF_DEFAULT = 25.0
INTEGER_MAXIMA: dict[str, tuple[int, str]] = {
    "count": (1000, "identical parts in parallel on one stage"),
    "turns": (10_000, "turns on one core"),
    "layers": (100, "winding layers on one core"),
}
"""Largest accepted whole number per key, with the reason stated in the error message."""
CT_MAX = 100.0
"""Largest magnitude of a core temperature-factor coefficient (core.ct)."""
RAC_RDC_MAX = 1000.0
"""Largest measured AC-to-DC resistance ratio of a winding (winding.rac_rdc)."""


# --------------------------------------------------------------------------------------------
# value types
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class Value:
    """A parameter with its typical and worst-case value (worst = typ when none is given)."""

    typ: float
    worst: float

    def pick(self, corner: Corner) -> float:
        """The value at a corner: ``typ`` or ``worst``."""
        return self.worst if corner == "worst" else self.typ


@dataclass(frozen=True, slots=True, kw_only=True)
class Curve:
    """A temperature-dependent parameter through datasheet points (degC, sorted)."""

    t: tuple[float, ...]
    typ: tuple[float, ...]
    worst: tuple[float, ...]

    def pick(self, corner: Corner) -> tuple[float, ...]:
        """The point values at a corner."""
        return self.worst if corner == "worst" else self.typ

    @property
    def single(self) -> bool:
        """True when the curve holds one point (a constant, or a fixed law through it)."""
        return len(self.t) == 1


@dataclass(frozen=True, slots=True, kw_only=True)
class Range:
    """An operating axis: minimum, nominal and maximum."""

    min: float
    nom: float
    max: float


@dataclass(frozen=True, slots=True, kw_only=True)
class AtVoltage:
    """A charge or energy figure given at a voltage (qoss, eoss, qc)."""

    value: Value
    at: float


@dataclass(frozen=True, slots=True, kw_only=True)
class ReferenceEnergy:
    """A datasheet switching energy at a test voltage and current."""

    e: Value
    at_v: float
    at_i: float
    includes: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True, kw_only=True)
class Recovery:
    """Reverse-recovery charge given at a current and a temperature."""

    q: Value
    at_i: float
    at: float


@dataclass(frozen=True, slots=True, kw_only=True)
class Leakage:
    """Reverse leakage current at a temperature and a voltage, doubling every few kelvin."""

    i: Value
    at: float
    at_v: float
    doubles_every: float


@dataclass(frozen=True, slots=True, kw_only=True)
class PartThermal:
    """Thermal paths of one part (each optional; at least one reaches ambient)."""

    rth_jc: float | None = None
    rth_cs: float | None = None
    rth_jb: float | None = None
    rth_ja: float | None = None
    rth_ha: float | None = None
    sink: str | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class BodyDiode:
    """The body diode of a MOSFET used as synchronous rectifier."""

    vsd: Curve
    qrr: Recovery | None = None
    erec: Value | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Mosfet:
    """A MOSFET: the main switch, or the synchronous rectifier."""

    kind: Literal["mosfet"] = "mosfet"
    count: int = 1
    vds_rated: float | None = None
    rds_on: Curve
    rds_on_v_gs: float | None = None
    v_th: float | None = None
    v_plateau: float | None = None
    qg: Value | None = None
    qgs: Value | None = None
    qgd: Value | None = None
    qgs2: Value | None = None
    rg: float = 0.0
    loop_inductance: float | None = None
    qoss: AtVoltage | None = None
    eoss: AtVoltage | None = None
    eon: ReferenceEnergy | None = None
    eoff: ReferenceEnergy | None = None
    body_diode: BodyDiode | None = None
    tj_max: float | None = None
    thermal: PartThermal

    @property
    def has_gate_timing(self) -> bool:
        """True when the gate charges give the transition times (SPEC §2.3)."""
        return (
            self.v_plateau is not None
            and self.qgd is not None
            and (self.qgs2 is not None or (self.qgs is not None and self.v_th is not None))
        )


@dataclass(frozen=True, slots=True, kw_only=True)
class Diode:
    """A rectifier diode (PN, Schottky or SiC)."""

    kind: Literal["diode"] = "diode"
    count: int = 1
    vr_rated: float | None = None
    vf0: Curve
    rd: Curve
    qc: AtVoltage | None = None
    qrr: Recovery | None = None
    erec: Value | None = None
    leakage: Leakage | None = None
    tj_max: float | None = None
    thermal: PartThermal


@dataclass(frozen=True, slots=True, kw_only=True)
class Driver:
    """Gate driver and controller bias."""

    v_drive: float = math.nan
    r_source: float = math.nan
    r_sink: float = math.nan
    rg_on: float = 0.0
    rg_off: float = 0.0
    supply: DriverSupply = "aux"
    v_aux: float | None = None
    quiescent: float = math.nan
    dead_time: float | None = None

    @property
    def given(self) -> bool:
        """True when the drive voltage and the driver's resistances are given."""
        return all(math.isfinite(x) for x in (self.v_drive, self.r_source, self.r_sink))


@dataclass(frozen=True, slots=True, kw_only=True)
class Core:
    """Core geometry and Steinmetz parameters (k in W/m3 with f in Hz and peak B in T)."""

    ve: float
    ae: float
    turns: int
    k: float
    alpha: float
    beta: float
    ct: tuple[float, float, float] | None = None
    fit_f: tuple[float, float] | None = None
    fit_b: tuple[float, float] | None = None
    b_sat: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Winding:
    """Winding description for the AC resistance (Dowell) or a measured Rac/Rdc."""

    layers: int | None = None
    wire_diameter: float | None = None
    porosity: float | None = None
    rac_rdc: float | None = None
    litz: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class Inductor:
    """The power inductor."""

    count: int = 1
    l: Value
    l_at_i: tuple[float, ...] = ()
    l_points: tuple[Value, ...] = ()
    dcr: Value
    dcr_at: float
    i_sat: Curve | None = None
    t_max: float | None = None
    core: Core | None = None
    winding: Winding | None = None
    thermal: PartThermal


@dataclass(frozen=True, slots=True, kw_only=True)
class RippleRating:
    """A capacitor's rated ripple current at a frequency and a temperature."""

    i: float
    at_f: float
    at: float


@dataclass(frozen=True, slots=True, kw_only=True)
class Life:
    """An electrolytic capacitor's rated life at a temperature, and the life required."""

    rated: float
    at: float
    required: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Capacitor:
    """A bank of identical capacitors at the input or the output."""

    name: str
    position: Literal["input", "output"]
    c: Value
    c_bias: tuple[tuple[float, float], ...] = ()
    esr: Curve
    esr_at_f: float | None = None
    count: int = 1
    v_rated: float | None = None
    i_ripple_rated: RippleRating | None = None
    t_max: float | None = None
    life: Life | None = None
    thermal: PartThermal


@dataclass(frozen=True, slots=True, kw_only=True)
class Resistor:
    """A series resistor (sense, trace, fuse, filter) at a current position."""

    name: str
    position: Position
    r: Value
    count: int = 1
    r_at: float = T_REF_DEFAULT


@dataclass(frozen=True, slots=True, kw_only=True)
class Sink:
    """A heatsink or the board, with its resistance to ambient (if any)."""

    name: str
    rth_to_ambient: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Link:
    """A thermal resistance between two sinks."""

    between: tuple[str, str]
    rth: float


@dataclass(frozen=True, slots=True, kw_only=True)
class Operating:
    """The operating envelope and the controller's limits."""

    vin: Range
    vout: Range
    iout_rated: float
    fsw: Range
    ambient: Range
    max_duty: float
    min_on_time: float = 0.0
    min_off_time: float = 0.0
    i_limit: float | None = None
    dcm_turn_on: DcmTurnOn = "ring"
    ring_q: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Limits:
    """Derating profile (or the user's margins) and the ringing allowance."""

    derating: str = "moderate"
    margins: tuple[UserMargin, ...] = ()
    v_spike: float = 0.0


@dataclass(frozen=True, slots=True, kw_only=True)
class UserMargin:
    """One row of the design's own derating table ``[limits.margins]``.

    ``use_up_to``: the share of the rating the design may use (voltages, currents, flux).
    ``below_max``: kelvin below the absolute temperature limit, and ``at_most`` an optional
    ceiling [degC] (temperatures). Exactly one of the two forms is set.
    """

    kind: str
    quantity: str
    use_up_to: float | None = None
    below_max: float | None = None
    at_most: float | None = None


@dataclass(frozen=True, slots=True, kw_only=True)
class Design:
    """A validated converter design in SI units (absolute temperatures in degC)."""

    name: str
    topology: Topology
    rectifier_kind: RectifierKind
    light_load: LightLoad
    operating: Operating
    switch: Mosfet
    driver: Driver
    rectifier: Mosfet | Diode
    inductor: Inductor
    capacitors: tuple[Capacitor, ...]
    resistors: tuple[Resistor, ...]
    sinks: tuple[Sink, ...]
    links: tuple[Link, ...]
    limits: Limits
    source: str
    checksum: str
    resolved: tuple[tuple[str, str], ...] = field(default=(), repr=False)
    warnings: tuple[str, ...] = ()
    defaults: tuple[tuple[str, str], ...] = ()
    calibration: ScaleFactors | None = None
    text: str | None = field(default=None, repr=False)

    @property
    def inverting(self) -> bool:
        """True for the inverting buck-boost (negative output)."""
        return self.topology == "buck-boost"


# --------------------------------------------------------------------------------------------
# the reader: walks the raw data, records every problem and every resolved value
# --------------------------------------------------------------------------------------------

_MISSING = object()


class _Reader:
    def __init__(self, source: str):
        self.source = source
        self.problems: list[str] = []
        self.resolved: list[tuple[str, str]] = []
        self.defaults: list[tuple[str, str]] = []
        self.warnings: list[str] = []
        # sinks and links whose resistance was given but refused: already reported, so the
        # paths through them are not reported missing a second time
        self.refused_sinks: set[str] = set()
        self.refused_links: list[tuple[str, str]] = []

    def problem(self, path: str, message: str) -> None:
        self.problems.append(printable(f"{self.source}: {path or '(top level)'}: {message}"))

    def warn(self, path: str, message: str) -> None:
        self.warnings.append(printable(f"{self.source}: {path}: {message}"))

    def unknown(self, path: str, key: Any, allowed: tuple[str, ...]) -> None:
        """Report an unknown key with the nearest valid one."""
        near = difflib.get_close_matches(str(key), allowed, n=1, cutoff=0.5)
        hint = f" (did you mean {near[0]!r}?)" if near else ""
        self.problem(_join(path, key), f"unknown key{hint}; valid keys: {', '.join(allowed)}")

    def default(self, path: str, text: str) -> None:
        self.defaults.append((path, text))

    def table(
        self, raw: Any, path: str, *, allowed: tuple[str, ...], required: tuple[str, ...] = ()
    ) -> dict | None:
        """Check a table's type, its unknown keys (nearest valid key named), its required keys."""
        if raw is _MISSING:
            self.problem(path, "missing required table")
            return None
        if not isinstance(raw, dict):
            self.problem(path, f"expected a table, got {_show(raw)}")
            return None
        for key in raw:
            if key not in allowed:
                self.unknown(path, key, allowed)
        for key in required:
            if key not in raw:
                self.problem(_join(path, key), "missing required key")
        return raw

    def quantity(
        self,
        raw: Any,
        path: str,
        *,
        dim_key: str | None = None,
        positive: bool = True,
        nonnegative: bool = False,
        record: bool = True,
    ) -> float | None:
        """Parse one quantity by the glossary's dimension of its key."""
        dim = glossary_dimension(dim_key or path)
        try:
            value = parse_quantity(raw, dim, where=f"{self.source}: {path}")
            check_range(value, dim, where=f"{self.source}: {path}", raw=raw)
        except DesignError as exc:
            self.problems.extend(exc.problems)
            return None
        if dim != "temperature" and dim != "voltage_tempco":
            if nonnegative and value < 0:
                self.problem(path, f"expected a value >= 0, got {_show(raw)}")
                return None
            if positive and not nonnegative and value <= 0:
                self.problem(path, f"expected a positive value, got {_show(raw)}")
                return None
        if dim == "temperature" and value < -273.15:
            self.problem(path, f"expected a temperature above absolute zero, got {_show(raw)}")
            return None
        if record:
            self.resolved.append((path, format_quantity(value, dim)))
        hint = far_outside(dim_key or path, value)
        if hint is not None:
            self.warn(path, hint)
        return value

    def optional(self, table: dict, key: str, path: str, **kw) -> float | None:
        if key not in table:
            return None
        return self.quantity(table[key], _join(path, key), **kw)

    def required(self, table: dict, key: str, path: str, **kw) -> float | None:
        if key not in table:
            return None  # reported by table()
        return self.quantity(table[key], _join(path, key), **kw)

    def integer(
        self, table: dict, key: str, path: str, *, default: int | None = None, minimum: int = 1
    ) -> int | None:
        if key not in table:
            return default
        raw = table[key]
        if isinstance(raw, bool) or not isinstance(raw, int):
            self.problem(_join(path, key), f"expected a whole number, got {_show(raw)}")
            return None
        maximum, why = INTEGER_MAXIMA.get(key, (None, ""))
        if raw < minimum or (maximum is not None and raw > maximum):
            upto = f" and <= {maximum:,} ({why})" if maximum is not None else ""
            self.problem(
                _join(path, key), f"expected a whole number >= {minimum}{upto}, got {_show(raw)}"
            )
            return None
        self.resolved.append((_join(path, key), str(raw)))
        return raw

    def number(self, table: dict, key: str, path: str, *, positive: bool = True) -> float | None:
        if key not in table:
            return None
        raw = table[key]
        if isinstance(raw, bool) or not isinstance(raw, int | float) or not _finite(raw):
            self.problem(_join(path, key), f"expected a finite number, got {_show(raw)}")
            return None
        if positive and raw <= 0:
            self.problem(_join(path, key), f"expected a positive number, got {_show(raw)}")
            return None
        self.resolved.append((_join(path, key), f"{raw:g}"))
        return float(raw)

    def choice(
        self, table: dict, key: str, path: str, options: tuple[str, ...], default: str | None = None
    ) -> str | None:
        if key not in table:
            if default is not None:
                self.default(_join(path, key), default)
            return default
        raw = table[key]
        if raw not in options:
            self.problem(
                _join(path, key), f"expected one of {', '.join(options)}, got {_show(raw)}"
            )
            return None
        self.resolved.append((_join(path, key), str(raw)))
        return raw

    def text(self, table: dict, key: str, path: str) -> str | None:
        if key not in table:
            return None
        raw = table[key]
        if not isinstance(raw, str) or not raw.strip():
            self.problem(_join(path, key), f"expected a non-empty string, got {_show(raw)}")
            return None
        if not raw.isprintable():
            self.problem(
                _join(path, key),
                f"expected a name without control characters (tab, newline, ...), got {_show(raw)}",
            )
            return None
        self.resolved.append((_join(path, key), raw))
        return raw

    # ---- corner values and curves ------------------------------------------------------------

    def value(
        self,
        raw: Any,
        path: str,
        *,
        dim_key: str,
        worse: str = "max",
        positive: bool = True,
        nonnegative: bool = False,
    ) -> Value | None:
        """A plain value or ``{ typ, max }`` (``min`` where lower is worse)."""
        if not isinstance(raw, dict):
            x = self.quantity(
                raw, path, dim_key=dim_key, positive=positive, nonnegative=nonnegative
            )
            return None if x is None else Value(typ=x, worst=x)
        if not self.corner_keys(raw, path, allowed=("typ",), worse=worse):
            return None
        if "typ" not in raw:
            self.problem(_join(path, "typ"), "missing required key")
            return None
        return self.corner(
            raw,
            path,
            "typ",
            dim_key=dim_key,
            worse=worse,
            positive=positive,
            nonnegative=nonnegative,
        )

    def corner_keys(self, raw: dict, path: str, *, allowed: tuple[str, ...], worse: str) -> bool:
        """Check the keys of a table holding a corner value; False on any unknown key."""
        other = "min" if worse == "max" else "max"
        ok = True
        for key in raw:
            if key == other:
                lower_higher = "higher" if worse == "max" else "lower"
                self.problem(
                    _join(path, other),
                    f"expected {worse!r} for this parameter "
                    f"({lower_higher} is worse), got {other!r}",
                )
                ok = False
            elif key not in (*allowed, worse):
                self.unknown(path, key, (*allowed, worse))
                ok = False
        return ok

    def corner(
        self,
        tab: dict,
        path: str,
        key: str,
        *,
        dim_key: str,
        worse: str,
        positive: bool = True,
        nonnegative: bool = False,
    ) -> Value | None:
        """The typical value under ``key`` and the worst-case one under ``worse``."""
        typ = self.quantity(
            tab[key],
            _join(path, key),
            dim_key=dim_key,
            positive=positive,
            nonnegative=nonnegative,
        )
        bad = self.optional(
            tab, worse, path, dim_key=dim_key, positive=positive, nonnegative=nonnegative
        )
        if typ is None or (worse in tab and bad is None):
            return None
        if bad is None:
            return Value(typ=typ, worst=typ)
        if (worse == "max" and bad < typ) or (worse == "min" and bad > typ):
            self.problem(
                _join(path, worse),
                f"expected {worse} {'>=' if worse == 'max' else '<='} {key} "
                f"({_show(tab[key])}), got {_show(tab[worse])}",
            )
            return None
        return Value(typ=typ, worst=bad)

    def curve(
        self,
        raw: Any,
        path: str,
        *,
        letter: str,
        worse: str = "max",
        extra: dict[str, str] | None = None,
        positive: bool = True,
        nonnegative: bool = False,
    ) -> tuple[Curve, list[dict]] | None:
        """A temperature curve: one value (at 25 degC), one point table, or a list of points."""
        generic = path.split(".", 1)
        base = (
            path
            if not path.startswith(("capacitor[", "resistor["))
            else (generic[0].split("[")[0] + "." + generic[1])
        )
        value_key = f"{base}[].{letter}"
        at_key = f"{base}[].at"
        extra = extra or {}
        if isinstance(raw, list):
            points_raw = raw
            if not raw:
                self.problem(path, "expected at least one point")
                return None
        elif isinstance(raw, dict):
            points_raw = [raw]
        else:
            v = self.value(
                raw,
                path,
                dim_key=value_key,
                worse=worse,
                positive=positive,
                nonnegative=nonnegative,
            )
            if v is None:
                return None
            self.default(f"{path}.at", "25 degC")
            return Curve(t=(T_REF_DEFAULT,), typ=(v.typ,), worst=(v.worst,)), [{}]
        pts: list[tuple[float, float, float | None]] = []
        extras: list[dict] = []
        ok = True
        for n, point in enumerate(points_raw):
            ppath = f"{path}[{n}]" if isinstance(raw, list) else path
            if not isinstance(point, dict):
                self.problem(ppath, f"expected a table, got {_show(point)}")
                ok = False
                continue
            tab = point
            if not self.corner_keys(tab, ppath, allowed=("typ", letter, "at", *extra), worse=worse):
                ok = False
                continue
            keys = [k for k in ("typ", letter) if k in tab]
            if len(keys) != 1:
                self.problem(ppath, f"expected the value as '{letter}' (or 'typ'), once")
                ok = False
                continue
            v = self.corner(
                tab,
                ppath,
                keys[0],
                dim_key=value_key,
                worse=worse,
                positive=positive,
                nonnegative=nonnegative,
            )
            if "at" in tab:
                t = self.quantity(tab["at"], _join(ppath, "at"), dim_key=at_key)
            elif len(points_raw) == 1:
                t = T_REF_DEFAULT
                self.default(f"{ppath}.at", "25 degC")
            else:
                self.problem(_join(ppath, "at"), "missing required key (several points)")
                t = None
            ex = {}
            for key, dim_key in extra.items():
                if key in tab:
                    ex[key] = self.quantity(tab[key], _join(ppath, key), dim_key=dim_key)
            extras.append(ex)
            if v is None or t is None:
                ok = False
                continue
            pts.append((t, v.typ, v.worst if worse in tab else None))
        if not ok:
            return None
        temps = [p[0] for p in pts]
        if len(set(temps)) != len(temps):
            self.problem(path, "expected points at distinct temperatures")
            return None
        order = sorted(range(len(pts)), key=lambda k: pts[k][0])
        pts = [pts[k] for k in order]
        extras = [extras[k] for k in order]
        ratios = [p[2] / p[1] for p in pts if p[2] is not None and p[1] != 0]
        ratio = ratios[0] if ratios else 1.0
        worst = tuple(p[2] if p[2] is not None else p[1] * ratio for p in pts)
        return Curve(t=tuple(p[0] for p in pts), typ=tuple(p[1] for p in pts), worst=worst), extras


def _finite(x: float) -> bool:
    """math.isfinite that also takes an integer beyond the float range (as not finite)."""
    try:
        return math.isfinite(x)
    except OverflowError:
        return False


def _join(path: str, key: Any) -> str:
    return f"{path}.{key}" if path else str(key)


def _show(raw: Any) -> str:
    if isinstance(raw, dict):
        return "a table"
    if isinstance(raw, list):
        return "a list"
    return echo_value(raw)  # strings quoted; every echo cut to about 60 characters


# --------------------------------------------------------------------------------------------
# blocks
# --------------------------------------------------------------------------------------------

_THERMAL_ALLOWED = ("rth_jc", "rth_cs", "rth_jb", "rth_ja", "rth_ha", "sink", "psi_jt")


def _thermal(rd: _Reader, raw: Any, path: str, *, semiconductor: bool) -> PartThermal | None:
    tab = rd.table(raw, path, allowed=_THERMAL_ALLOWED)
    if tab is None:
        return None
    if "psi_jt" in tab:
        rd.problem(
            _join(path, "psi_jt"),
            "psi_jt is a thermal characterisation parameter (JEDEC JESD51-2), not a "
            "resistance; give rth_jc with rth_cs, rth_jb, or rth_ha instead",
        )
    vals = {}
    for key in ("rth_jc", "rth_cs", "rth_jb", "rth_ja", "rth_ha"):
        vals[key] = rd.optional(tab, key, path, dim_key=f"switch.thermal.{key}")
    sink = rd.text(tab, "sink", path)
    if vals["rth_ja"] is not None and semiconductor:
        rd.warn(
            _join(path, "rth_ja"),
            "a datasheet theta-JA describes the JEDEC test board (JESD51-2), not this "
            "board; used as a path to ambient all the same",
        )
    # the paths are judged on the keys given: a value refused above is reported once, not
    # again as a missing path
    if sink is not None and all(k not in tab for k in ("rth_jc", "rth_jb")):
        rd.problem(path, "expected rth_jc or rth_jb for the path to the sink")
    if "sink" not in tab and "rth_ha" not in tab and "rth_ja" not in tab:
        rd.problem(path, "no path to ambient: give sink (with rth_jc or rth_jb), rth_ha or rth_ja")
    if "rth_cs" in tab and "rth_jc" not in tab:
        rd.problem(_join(path, "rth_cs"), "expected rth_jc beside rth_cs")
    return PartThermal(**vals, sink=sink)


def _at_voltage(rd: _Reader, raw: Any, path: str, letter: str) -> AtVoltage | None:
    tab = rd.table(raw, path, allowed=(letter, "at"), required=(letter, "at"))
    if tab is None or letter not in tab or "at" not in tab:
        return None
    v = rd.value(tab[letter], _join(path, letter), dim_key=_gkey(path, letter))
    at = rd.quantity(tab["at"], _join(path, "at"), dim_key=_gkey(path, "at"))
    return None if v is None or at is None else AtVoltage(value=v, at=at)


def _gkey(path: str, key: str) -> str:
    """Glossary key of a sub-key (array indices folded)."""
    head = path.split("[")[0] if path.startswith(("capacitor[", "resistor[")) else path
    if path.startswith(("capacitor[", "resistor[")):
        head = head + path[path.index("]") + 1 :]
    return f"{head}.{key}"


def _recovery(rd: _Reader, raw: Any, path: str, *, iout: float | None) -> Recovery | None:
    """``{ q, at_i, at }``, or a plain charge (SPEC §5: ``qrr = "40 nC"``).

    Without ``at_i`` the charge is taken as measured at the rated output current, and the
    default says so.
    """
    if not isinstance(raw, dict):
        raw = {"q": raw}
        qpath = path
    else:
        qpath = _join(path, "q")
    tab = rd.table(raw, path, allowed=("q", "at_i", "at"), required=("q",))
    if tab is None or "q" not in tab:
        return None
    q = rd.value(tab["q"], qpath, dim_key=_gkey(path, "q"))
    if "at_i" in tab:
        at_i = rd.quantity(tab["at_i"], _join(path, "at_i"), dim_key=_gkey(path, "at_i"))
    else:
        at_i = iout
        if iout is not None:
            rd.default(
                _join(path, "at_i"),
                f"not given: taken at operating.iout_rated ({format_quantity(iout, 'current')})",
            )
    if "at" in tab:
        at = rd.quantity(tab["at"], _join(path, "at"), dim_key=_gkey(path, "at"))
    else:
        at = T_REF_DEFAULT
        rd.default(_join(path, "at"), "25 degC")
    if q is None or at_i is None or at is None:
        return None
    return Recovery(q=q, at_i=at_i, at=at)


def _ref_energy(rd: _Reader, raw: Any, path: str) -> ReferenceEnergy | None:
    tab = rd.table(
        raw, path, allowed=("e", "at_v", "at_i", "includes"), required=("e", "at_v", "at_i")
    )
    if tab is None or any(k not in tab for k in ("e", "at_v", "at_i")):
        return None
    e = rd.value(tab["e"], _join(path, "e"), dim_key=_gkey(path, "e"))
    at_v = rd.quantity(tab["at_v"], _join(path, "at_v"), dim_key=_gkey(path, "at_v"))
    at_i = rd.quantity(tab["at_i"], _join(path, "at_i"), dim_key=_gkey(path, "at_i"))
    includes: tuple[str, ...] = ()
    if "includes" in tab:
        inc = tab["includes"]
        if not isinstance(inc, list) or any(x not in ("coss", "reverse_recovery") for x in inc):
            rd.problem(
                _join(path, "includes"),
                f'expected a list of "coss", "reverse_recovery", got {_show(inc)}',
            )
        else:
            includes = tuple(inc)
    if e is None or at_v is None or at_i is None:
        return None
    return ReferenceEnergy(e=e, at_v=at_v, at_i=at_i, includes=includes)


_MOSFET_ALLOWED = (
    "count",
    "vds_rated",
    "rds_on",
    "v_th",
    "v_plateau",
    "qg",
    "qgs",
    "qgd",
    "qgs2",
    "rg",
    "qoss",
    "eoss",
    "eon",
    "eoff",
    "body_diode",
    "tj_max",
    "loop_inductance",
    "thermal",
)
_MOSFET_REQUIRED = ("rds_on", "thermal")


def _mosfet(
    rd: _Reader, raw: Any, path: str, *, sync: bool, iout: float | None = None
) -> Mosfet | None:
    tab = rd.table(raw, path, allowed=_MOSFET_ALLOWED, required=_MOSFET_REQUIRED)
    if tab is None:
        return None
    count = rd.integer(tab, "count", path, default=1)
    vds = rd.optional(tab, "vds_rated", path, dim_key="switch.vds_rated")
    rds = None
    v_gs = None
    if "rds_on" in tab:
        got = rd.curve(
            tab["rds_on"], _join(path, "rds_on"), letter="r", extra={"v_gs": "switch.rds_on[].v_gs"}
        )
        if got is not None:
            rds, extras = got
            v_gs = next((e["v_gs"] for e in extras if e.get("v_gs") is not None), None)
    g = {
        k: rd.optional(tab, k, path, dim_key=f"switch.{k}")
        for k in ("v_th", "v_plateau", "rg", "tj_max", "loop_inductance")
    }
    if g["rg"] is None and "rg" not in tab and ("qg" in tab or "qgd" in tab):
        rd.default(_join(path, "rg"), "0 ohm (no internal gate resistance)")
    q = {
        k: (rd.value(tab[k], _join(path, k), dim_key=f"switch.{k}") if k in tab else None)
        for k in ("qg", "qgs", "qgd", "qgs2")
    }
    if g["v_th"] is not None and g["v_plateau"] is not None and g["v_plateau"] <= g["v_th"]:
        rd.problem(_join(path, "v_plateau"), "expected v_plateau above v_th")
    if q["qg"] and q["qgs"] and q["qgd"] and q["qg"].typ < q["qgs"].typ + q["qgd"].typ:
        rd.problem(_join(path, "qg"), "expected qg >= qgs + qgd")
    if q["qgs2"] and q["qgs"] and q["qgs2"].typ > q["qgs"].typ:
        rd.problem(_join(path, "qgs2"), "expected qgs2 <= qgs (qgs2 is the part above v_th)")
    qoss = _at_voltage(rd, tab["qoss"], _join(path, "qoss"), "q") if "qoss" in tab else None
    eoss = _at_voltage(rd, tab["eoss"], _join(path, "eoss"), "e") if "eoss" in tab else None
    eon = _ref_energy(rd, tab["eon"], _join(path, "eon")) if "eon" in tab else None
    eoff = _ref_energy(rd, tab["eoff"], _join(path, "eoff")) if "eoff" in tab else None
    body = None
    if "body_diode" in tab:
        bpath = _join(path, "body_diode")
        btab = rd.table(tab["body_diode"], bpath, allowed=("vsd", "qrr", "erec"), required=("vsd",))
        if btab is not None and "vsd" in btab:
            got = rd.curve(btab["vsd"], _join(bpath, "vsd"), letter="v")
            qrr = (
                _recovery(rd, btab["qrr"], _join(bpath, "qrr"), iout=iout)
                if "qrr" in btab
                else None
            )
            erec = (
                rd.value(btab["erec"], _join(bpath, "erec"), dim_key="switch.body_diode.erec")
                if "erec" in btab
                else None
            )
            if got is not None:
                body = BodyDiode(vsd=got[0], qrr=qrr, erec=erec)
    elif sync:
        rd.default(_join(path, "body_diode"), "not given: dead time and recovery not modelled")
    thermal = (
        _thermal(rd, tab["thermal"], _join(path, "thermal"), semiconductor=True)
        if "thermal" in tab
        else None
    )
    if g["loop_inductance"] is not None and sync:
        rd.problem(
            _join(path, "loop_inductance"),
            "applies to [switch]: the commutation loop's overshoot at the main switch's "
            "turn-off",
        )
    read = {**g, **q, "vds_rated": vds}
    unreadable = [k for k, x in read.items() if k in tab and x is None]
    if count is None or rds is None or thermal is None or unreadable:
        return None
    return Mosfet(
        count=count,
        vds_rated=vds,
        rds_on=rds,
        rds_on_v_gs=v_gs,
        v_th=g["v_th"],
        v_plateau=g["v_plateau"],
        qg=q["qg"],
        qgs=q["qgs"],
        qgd=q["qgd"],
        qgs2=q["qgs2"],
        rg=g["rg"] if g["rg"] is not None else 0.0,
        loop_inductance=g["loop_inductance"],
        qoss=qoss,
        eoss=eoss,
        eon=eon,
        eoff=eoff,
        body_diode=body,
        tj_max=g["tj_max"],
        thermal=thermal,
    )


_DIODE_ALLOWED = (
    "count",
    "vr_rated",
    "vf0",
    "rd",
    "qc",
    "qrr",
    "erec",
    "leakage",
    "tj_max",
    "thermal",
)


def _diode(rd: _Reader, raw: Any, path: str, *, iout: float | None = None) -> Diode | None:
    tab = rd.table(
        raw, path, allowed=_DIODE_ALLOWED, required=("vf0", "thermal")
    )
    if tab is None:
        return None
    count = rd.integer(tab, "count", path, default=1)
    vr = rd.optional(tab, "vr_rated", path, dim_key="rectifier.vr_rated")
    vf0 = (
        rd.curve(tab["vf0"], _join(path, "vf0"), letter="v", nonnegative=True)
        if "vf0" in tab
        else None
    )
    if "rd" in tab:
        rdd = rd.curve(tab["rd"], _join(path, "rd"), letter="r", nonnegative=True)
    else:
        rdd = (Curve(t=(T_REF_DEFAULT,), typ=(0.0,), worst=(0.0,)), [{}])
        rd.default(_join(path, "rd"), "0 ohm (forward drop vf0 only)")
    qc = _at_voltage(rd, tab["qc"], _join(path, "qc"), "q") if "qc" in tab else None
    qrr = _recovery(rd, tab["qrr"], _join(path, "qrr"), iout=iout) if "qrr" in tab else None
    erec = (
        rd.value(tab["erec"], _join(path, "erec"), dim_key="rectifier.erec")
        if "erec" in tab
        else None
    )
    leak = None
    if "leakage" in tab:
        lpath = _join(path, "leakage")
        ltab = rd.table(
            tab["leakage"],
            lpath,
            allowed=("i", "at", "at_v", "doubles_every"),
            required=("i", "at_v"),
        )
        if ltab is not None and "i" in ltab and "at_v" in ltab:
            i = rd.value(ltab["i"], _join(lpath, "i"), dim_key="rectifier.leakage.i")
            at = rd.optional(ltab, "at", lpath, dim_key="rectifier.leakage.at")
            if at is None and "at" not in ltab:
                at = T_REF_DEFAULT
                rd.default(_join(lpath, "at"), "25 degC")
            at_v = rd.optional(ltab, "at_v", lpath, dim_key="rectifier.leakage.at_v")
            dbl = rd.optional(
                ltab, "doubles_every", lpath, dim_key="rectifier.leakage.doubles_every"
            )
            if dbl is None and "doubles_every" not in ltab:
                dbl = 10.0
                rd.default(_join(lpath, "doubles_every"), "10 K (common practice)")
            if dbl is not None and dbl < 1.0:
                # a silicon diode's leakage doubles every 5 to 15 K (common practice); below
                # 1 K the exponential law overflows long before any junction limit
                rd.problem(
                    _join(lpath, "doubles_every"),
                    f"expected a doubling interval of at least 1 K, got {dbl:g} K",
                )
            elif None not in (i, at, at_v, dbl):
                leak = Leakage(i=i, at=at, at_v=at_v, doubles_every=dbl)
    tj = rd.optional(tab, "tj_max", path, dim_key="rectifier.tj_max")
    thermal = (
        _thermal(rd, tab["thermal"], _join(path, "thermal"), semiconductor=True)
        if "thermal" in tab
        else None
    )
    if any(x is None for x in (count, vf0, rdd, thermal)) or any(
        k in tab and x is None for k, x in (("vr_rated", vr), ("tj_max", tj))
    ):
        return None
    return Diode(
        count=count,
        vr_rated=vr,
        vf0=vf0[0],
        rd=rdd[0],
        qc=qc,
        qrr=qrr,
        erec=erec,
        leakage=leak,
        tj_max=tj,
        thermal=thermal,
    )


def _range(rd: _Reader, raw: Any, path: str, *, positive: bool = True) -> Range | None:
    if isinstance(raw, dict):
        tab = rd.table(raw, path, allowed=("min", "nom", "max"), required=("min", "max"))
        if tab is None or "min" not in tab or "max" not in tab:
            return None
        lo = rd.quantity(tab["min"], _join(path, "min"), dim_key=path, positive=positive)
        if "nom" in tab:
            nom = rd.quantity(tab["nom"], _join(path, "nom"), dim_key=path, positive=positive)
        hi = rd.quantity(tab["max"], _join(path, "max"), dim_key=path, positive=positive)
        if "nom" not in tab:
            nom = None if lo is None or hi is None else 0.5 * (lo + hi)
            if nom is not None:
                rd.default(_join(path, "nom"), "midway between min and max")
        if None in (lo, hi, nom):
            return None
        if lo > hi:
            rd.problem(
                path,
                f"expected min <= max, got min {_show(tab['min'])} above max {_show(tab['max'])}",
            )
            return None
        if not lo <= nom <= hi:
            rd.problem(_join(path, "nom"), "expected nom between min and max")
            return None
        return Range(min=lo, nom=nom, max=hi)
    x = rd.quantity(raw, path, positive=positive)
    return None if x is None else Range(min=x, nom=x, max=x)


def _operating(rd: _Reader, raw: Any, topology: str | None) -> Operating | None:
    path = "operating"
    tab = rd.table(
        raw,
        path,
        allowed=(
            "vin",
            "vout",
            "iout_rated",
            "fsw",
            "ambient",
            "max_duty",
            "min_on_time",
            "min_off_time",
            "i_limit",
            "dcm_turn_on",
            "ring_q",
        ),
        required=("vin", "vout", "iout_rated", "fsw", "ambient"),
    )
    if tab is None:
        return None
    vin = _range(rd, tab["vin"], "operating.vin") if "vin" in tab else None
    vout = None
    if "vout" in tab:
        vout = _range(rd, tab["vout"], "operating.vout", positive=False)
        if vout is not None:
            if topology == "buck-boost" and vout.max >= 0:
                rd.problem(
                    "operating.vout",
                    'expected a negative output for the inverting buck-boost (for example "-15 V")',
                )
                vout = None
            elif topology in ("boost", "buck") and vout.min <= 0:
                rd.problem("operating.vout", f"expected a positive output for the {topology}")
                vout = None
    iout = rd.required(tab, "iout_rated", path, dim_key="operating.iout_rated")
    fsw = _range(rd, tab["fsw"], "operating.fsw") if "fsw" in tab else None
    amb = _range(rd, tab["ambient"], "operating.ambient") if "ambient" in tab else None
    if "max_duty" in tab:
        max_duty = rd.quantity(tab["max_duty"], "operating.max_duty")
        if max_duty is not None and not 0 < max_duty < 1:
            rd.problem(
                "operating.max_duty", f"expected a fraction in (0, 1), got {_show(tab['max_duty'])}"
            )
            max_duty = None
    else:
        max_duty = 0.95
        rd.default("operating.max_duty", "0.95")
    t_on = rd.optional(tab, "min_on_time", path, nonnegative=True)
    t_off = rd.optional(tab, "min_off_time", path, nonnegative=True)
    i_lim = rd.optional(tab, "i_limit", path)
    if tab.get("dcm_turn_on") in DCM_TURN_ONS_REPLACED:
        rd.problem(
            "operating.dcm_turn_on",
            f"{_show(tab['dcm_turn_on'])} is no longer a choice (the DCM turn-on now follows "
            f"the node ring): expected one of {', '.join(DCM_TURN_ONS)}",
        )
        dcm = None
    else:
        dcm = rd.choice(tab, "dcm_turn_on", path, DCM_TURN_ONS, default="ring")
    ring_q = rd.number(tab, "ring_q", path)
    if vin is not None and vout is not None and topology is not None:
        if topology == "buck" and vout.min >= vin.max:
            rd.problem(
                "operating.vout",
                f"a buck cannot reach vout {format_quantity(vout.min, 'voltage')} "
                f"from at most {format_quantity(vin.max, 'voltage')}: "
                "expected vout below vin.max",
            )
        if topology == "boost" and vout.max <= vin.min:
            rd.problem(
                "operating.vout",
                f"a boost cannot make vout {format_quantity(vout.max, 'voltage')} "
                f"from at least {format_quantity(vin.min, 'voltage')}: "
                "expected vout above vin.min",
            )
    if None in (vin, vout, iout, fsw, amb, max_duty, dcm):
        return None
    return Operating(
        vin=vin,
        vout=vout,
        iout_rated=iout,
        fsw=fsw,
        ambient=amb,
        max_duty=max_duty,
        min_on_time=t_on or 0.0,
        min_off_time=t_off or 0.0,
        i_limit=i_lim,
        dcm_turn_on=dcm,
        ring_q=ring_q,
    )


def _driver(rd: _Reader, raw: Any, rect_kind: str | None) -> Driver | None:
    path = "driver"
    tab = rd.table(
        raw,
        path,
        allowed=(
            "v_drive",
            "v_aux",
            "r_source",
            "r_sink",
            "rg_on",
            "rg_off",
            "supply",
            "quiescent",
            "dead_time",
        ),
    )
    if tab is None:
        return None
    vals = {k: rd.optional(tab, k, path) for k in ("v_drive", "r_source", "r_sink")}
    absent = [k for k in vals if k not in tab]
    if absent:
        rd.default(f"driver.{absent[0]}" if len(absent) == 1 else "driver",
                   f"{', '.join(absent)} not given: switching edges from gate charges and the "
                   "gate drive not modelled")
    for k in ("rg_on", "rg_off"):
        if k in tab:
            vals[k] = rd.quantity(tab[k], f"driver.{k}", nonnegative=True)
        else:
            vals[k] = 0.0
            rd.default(f"driver.{k}", "0 ohm")
    supply = rd.choice(tab, "supply", path, SUPPLIES, default="aux")
    v_aux = rd.optional(tab, "v_aux", path)
    if "quiescent" in tab:
        quiescent = rd.quantity(tab["quiescent"], "driver.quiescent", nonnegative=True)
    else:
        quiescent = None
        rd.default("driver.quiescent", "not given: controller bias not modelled")
    dead = rd.optional(tab, "dead_time", path, nonnegative=True)
    if dead is not None and rect_kind == "diode":
        rd.problem(
            "driver.dead_time",
            'a dead time needs a synchronous rectifier (design.rectifier = "sync")',
        )
    if rect_kind == "sync" and "dead_time" not in tab:
        rd.default("driver.dead_time", "not given: dead-time conduction not modelled")
    if any(vals[k] is None and k in tab for k in vals) or supply is None:
        return None
    return Driver(
        v_drive=_or_nan(vals["v_drive"]),
        r_source=_or_nan(vals["r_source"]),
        r_sink=_or_nan(vals["r_sink"]),
        rg_on=vals["rg_on"],
        rg_off=vals["rg_off"],
        supply=supply,
        v_aux=v_aux,
        quiescent=quiescent if quiescent is not None else math.nan,
        dead_time=dead,
    )


def _or_nan(x: float | None) -> float:
    return math.nan if x is None else x


def _inductor(rd: _Reader, raw: Any) -> Inductor | None:
    path = "inductor"
    tab = rd.table(
        raw,
        path,
        allowed=("count", "l", "dcr", "i_sat", "t_max", "core", "winding", "thermal"),
        required=("l", "dcr", "thermal"),
    )
    if tab is None:
        return None
    count = rd.integer(tab, "count", path, default=1)
    l_val = None
    l_at_i: tuple[float, ...] = ()
    l_points: tuple[Value, ...] = ()
    if isinstance(tab.get("l"), list):
        got = _inductance_curve(rd, tab["l"])
        if got is not None:
            l_at_i, l_points = got
            l_val = l_points[0]
    elif "l" in tab:
        l_val = rd.value(tab["l"], "inductor.l", dim_key="inductor.l", worse="min")
    dcr = None
    dcr_at = T_REF_DEFAULT
    if "dcr" in tab:
        got = _resistance_at(rd, tab["dcr"], "inductor.dcr", dim_key="inductor.dcr.r")
        dcr, dcr_at = got if got is not None else (None, None)
    i_sat = None
    if "i_sat" in tab:
        got = rd.curve(tab["i_sat"], "inductor.i_sat", letter="i", worse="min")
        i_sat = got[0] if got else None
        if i_sat is not None and not _i_sat_stays_positive(rd, i_sat):
            i_sat = None
    t_max = rd.optional(tab, "t_max", path)
    core = _core(rd, tab["core"]) if "core" in tab else None
    winding = _winding(rd, tab["winding"]) if "winding" in tab else None
    thermal = (
        _thermal(rd, tab["thermal"], "inductor.thermal", semiconductor=False)
        if "thermal" in tab
        else None
    )
    if any(x is None for x in (count, l_val, dcr, dcr_at, thermal)) or (
        "t_max" in tab and t_max is None
    ):
        return None
    if "core" in tab and core is None:
        return None
    if "winding" in tab and winding is None:
        return None
    return Inductor(
        count=count,
        l=l_val,
        l_at_i=l_at_i,
        l_points=l_points,
        dcr=dcr,
        dcr_at=dcr_at,
        i_sat=i_sat,
        t_max=t_max,
        core=core,
        winding=winding,
        thermal=thermal,
    )


def _inductance_curve(rd: _Reader, raw: list) -> tuple[tuple[float, ...], tuple[Value, ...]] | None:
    """``l = [{ l, at_i }, ...]``: the inductance over the current (a swinging choke)."""
    if not raw:
        rd.problem("inductor.l", "expected at least one { l, at_i } point")
        return None
    pts: list[tuple[float, Value]] = []
    for n, point in enumerate(raw):
        ppath = f"inductor.l[{n}]"
        if not isinstance(point, dict):
            rd.problem(ppath, f"expected a table {{ l, at_i }}, got {_show(point)}")
            continue
        if not rd.corner_keys(point, ppath, allowed=("l", "at_i"), worse="min"):
            continue
        if "l" not in point or "at_i" not in point:
            rd.problem(ppath, "expected both l and at_i")
            continue
        v = rd.corner(point, ppath, "l", dim_key="inductor.l", worse="min")
        i = rd.quantity(point["at_i"], _join(ppath, "at_i"), dim_key="inductor.l[].at_i",
                        nonnegative=True)
        if v is not None and i is not None:
            pts.append((i, v))
    if len(pts) != len(raw):
        return None
    if len({i for i, _ in pts}) != len(pts):
        rd.problem("inductor.l", "expected points at distinct currents (at_i)")
        return None
    pts.sort(key=lambda p: p[0])
    rd.default("inductor.l", "a curve over the current: taken at the mean inductor current "
               "per part (the DC bias), linear between the points, held outside them; the "
               "peak flux integrates the curve up to the peak current")
    return tuple(i for i, _ in pts), tuple(v for _, v in pts)


T_HOTTEST = 300.0
"""Hottest node temperature the coupled solve accepts before it flags runaway. [degC]"""


def _i_sat_stays_positive(rd: _Reader, curve: Curve) -> bool:
    """Refuse an i_sat curve whose last segment, continued hot, reaches 0 A below 300 degC.

    Above its hottest point the saturation current follows the last segment's slope (the
    limit check's rule); a curve that reaches zero inside the temperatures a solved point can
    have (up to the runaway ceiling) would make every hotter point a division by zero.
    """
    if len(curve.t) < 2:
        return True
    ok = True
    for name, values in (("typ", curve.typ), ("min", curve.worst)):
        slope = (values[-1] - values[-2]) / (curve.t[-1] - curve.t[-2])
        if slope >= 0:
            continue
        t_zero = curve.t[-1] - values[-1] / slope
        if t_zero <= T_HOTTEST:
            rd.problem(
                "inductor.i_sat",
                f"expected a saturation current that stays above 0 A up to {T_HOTTEST:g} degC "
                f"along its last segment; the {name} points reach 0 A at {t_zero:.4g} degC "
                "(give a point at a higher temperature or check the points)",
            )
            ok = False
            break
    return ok


def _resistance_at(rd: _Reader, raw: Any, path: str, *, dim_key: str) -> tuple[Value, float] | None:
    """A plain resistance at 25 degC, or ``{ r, max, at }`` (``typ`` for ``r`` too)."""
    if not isinstance(raw, dict):
        v = rd.value(raw, path, dim_key=dim_key)
        rd.default(_join(path, "at"), "25 degC")
        return None if v is None else (v, T_REF_DEFAULT)
    if not rd.corner_keys(raw, path, allowed=("r", "typ", "at"), worse="max"):
        return None
    keys = [k for k in ("r", "typ") if k in raw]
    if len(keys) != 1:
        rd.problem(path, "expected the value as 'r' (or 'typ'), once")
        return None
    v = rd.corner(raw, path, keys[0], dim_key=dim_key, worse="max")
    if "at" in raw:
        at = rd.quantity(raw["at"], _join(path, "at"), dim_key="inductor.dcr.at")
    else:
        at = T_REF_DEFAULT
        rd.default(_join(path, "at"), "25 degC")
    return None if v is None or at is None else (v, at)


def _core(rd: _Reader, raw: Any) -> Core | None:
    path = "inductor.core"
    tab = rd.table(
        raw,
        path,
        allowed=("ve", "ae", "turns", "k", "alpha", "beta", "ct", "fit_range", "b_sat", "k_units"),
        required=("ve", "ae", "turns", "k", "alpha", "beta"),
    )
    if tab is None:
        return None
    ve = rd.required(tab, "ve", path)
    ae = rd.required(tab, "ae", path)
    turns = rd.integer(tab, "turns", path)
    k = rd.number(tab, "k", path)
    alpha = rd.number(tab, "alpha", path)
    beta = rd.number(tab, "beta", path)
    b_sat = rd.optional(tab, "b_sat", path)
    units = rd.choice(tab, "k_units", path, ("W/m3-Hz-T", "mW/cm3-kHz-mT"), default="W/m3-Hz-T")
    # the exponents' ranges first: the unit conversion below raises 1e3 to the power beta
    if alpha is not None and not 1.0 <= alpha <= 3.0:
        rd.problem("inductor.core.alpha", f"expected a Steinmetz alpha in [1, 3], got {alpha:g}")
        alpha = None
    if beta is not None and not 1.0 <= beta <= 4.0:
        rd.problem("inductor.core.beta", f"expected a Steinmetz beta in [1, 4], got {beta:g}")
        beta = None
    if k is not None and alpha is not None and beta is not None and units == "mW/cm3-kHz-mT":
        k = k * 1e3 * 1e-3**alpha * 1e3**beta
        rd.resolved.append(("inductor.core.k (SI, W/m3 Hz T)", f"{k:.6g}"))
    if k is not None and not 1e-12 <= k <= 1e12:
        # k (SI) is the loss density in W/m3 at 1 Hz and 1 T; outside this span the loss
        # density at any real point underflows or overflows a float with alpha, beta above
        rd.problem(
            "inductor.core.k",
            f"expected a Steinmetz k from 1e-12 to 1e12 in SI units (W/m3 at 1 Hz, 1 T), got {k:g}",
        )
        k = None
    ct = None
    if "ct" in tab:
        c = tab["ct"]
        if (
            not isinstance(c, list)
            or len(c) != 3
            or any(isinstance(x, bool) or not isinstance(x, int | float) for x in c)
            or not all(_finite(x) for x in c)
        ):
            rd.problem(
                "inductor.core.ct",
                f"expected three finite numbers [ct0, ct1, ct2], got {_show(c)}",
            )
        elif any(abs(x) > CT_MAX for x in c):
            # the factor is normalised near 1 at its reference temperature (ferrite fits are of
            # order 1, 1e-2 /K and 1e-4 /K2); beyond this the loss overflows before it means
            # anything
            rd.problem(
                "inductor.core.ct",
                f"expected coefficients of magnitude at most {CT_MAX:g} (a factor near 1 at "
                f"the reference temperature), got {_show(c)}",
            )
        else:
            ct = (float(c[0]), float(c[1]), float(c[2]))
            rd.resolved.append(("inductor.core.ct", ", ".join(f"{x:g}" for x in ct)))
    else:
        rd.default("inductor.core.ct", "not given: the core loss has no temperature dependence")
    fit_f = fit_b = None
    if "fit_range" in tab:
        ftab = rd.table(tab["fit_range"], "inductor.core.fit_range", allowed=("f", "b"))
        if ftab is not None:
            fit_f = _pair(rd, ftab, "f", "inductor.core.fit_range")
            fit_b = _pair(rd, ftab, "b", "inductor.core.fit_range")
    if None in (ve, ae, turns, k, alpha, beta):
        return None
    return Core(
        ve=ve,
        ae=ae,
        turns=turns,
        k=k,
        alpha=alpha,
        beta=beta,
        ct=ct,
        fit_f=fit_f,
        fit_b=fit_b,
        b_sat=b_sat,
    )


def _pair(rd: _Reader, tab: dict, key: str, path: str) -> tuple[float, float] | None:
    if key not in tab:
        return None
    raw = tab[key]
    p = _join(path, key)
    if not isinstance(raw, list) or len(raw) != 2:
        rd.problem(p, f"expected [low, high], got {_show(raw)}")
        return None
    lo = rd.quantity(raw[0], f"{p}[0]", dim_key=p)
    hi = rd.quantity(raw[1], f"{p}[1]", dim_key=p)
    if lo is None or hi is None:
        return None
    if lo >= hi:
        rd.problem(p, f"expected low < high, got {_show(raw[0])} and {_show(raw[1])}")
        return None
    return lo, hi


def _winding(rd: _Reader, raw: Any) -> Winding | None:
    path = "inductor.winding"
    tab = rd.table(raw, path, allowed=("layers", "wire_diameter", "porosity", "rac_rdc", "litz"))
    if tab is None:
        return None
    layers = rd.integer(tab, "layers", path)
    d = rd.optional(tab, "wire_diameter", path)
    por = rd.optional(tab, "porosity", path)
    if por is not None and not 0 < por <= 1:
        rd.problem(
            "inductor.winding.porosity",
            f"expected a porosity in (0, 1], got {_show(tab['porosity'])}",
        )
        por = None
    rac = rd.number(tab, "rac_rdc", path)
    if rac is not None and not 1 <= rac <= RAC_RDC_MAX:
        rd.problem(
            "inductor.winding.rac_rdc",
            f"expected Rac/Rdc from 1 to {RAC_RDC_MAX:g} (a measured winding at its switching "
            f"frequency), got {rac:g}",
        )
        rac = None
    litz = tab.get("litz", False)
    if not isinstance(litz, bool):
        rd.problem("inductor.winding.litz", f"expected true or false, got {_show(litz)}")
        return None
    geometry = [k for k in ("layers", "wire_diameter", "porosity") if k in tab]
    if rac is None and "rac_rdc" not in tab and 0 < len(geometry) < 3:
        missing = [k for k in ("layers", "wire_diameter", "porosity") if k not in tab]
        rd.problem(
            path,
            f"expected layers, wire_diameter and porosity together; missing {', '.join(missing)}",
        )
        return None
    if "rac_rdc" in tab and geometry:
        rd.problem(
            path,
            "expected either rac_rdc or the geometry (layers, wire_diameter, porosity), not both",
        )
        return None
    return Winding(layers=layers, wire_diameter=d, porosity=por, rac_rdc=rac, litz=litz)


def _capacitor(rd: _Reader, raw: Any, path: str) -> Capacitor | None:
    tab = rd.table(
        raw,
        path,
        allowed=(
            "name",
            "position",
            "c",
            "c_bias",
            "esr",
            "count",
            "v_rated",
            "i_ripple_rated",
            "t_max",
            "life",
            "thermal",
        ),
        required=("name", "position", "c", "esr", "thermal"),
    )
    if tab is None:
        return None
    name = rd.text(tab, "name", path)
    pos = rd.choice(tab, "position", path, ("input", "output"))
    count = rd.integer(tab, "count", path, default=1)
    c = (
        rd.value(tab["c"], _join(path, "c"), dim_key="capacitor.c", worse="min")
        if "c" in tab
        else None
    )
    c_bias: tuple[tuple[float, float], ...] = ()
    if "c_bias" in tab:
        cb = tab["c_bias"]
        if not isinstance(cb, list) or not cb:
            rd.problem(
                _join(path, "c_bias"), f"expected a list of {{ c, at_v }} points, got {_show(cb)}"
            )
        else:
            pts = []
            for n, p in enumerate(cb):
                ppath = f"{path}.c_bias[{n}]"
                pt = rd.table(p, ppath, allowed=("c", "at_v"), required=("c", "at_v"))
                if pt is None or "c" not in pt or "at_v" not in pt:
                    continue
                cv = rd.quantity(pt["c"], _join(ppath, "c"), dim_key="capacitor.c_bias[].c")
                vv = rd.quantity(
                    pt["at_v"],
                    _join(ppath, "at_v"),
                    dim_key="capacitor.c_bias[].at_v",
                    nonnegative=True,
                )
                if cv is not None and vv is not None:
                    pts.append((vv, cv))
            c_bias = tuple(sorted(pts))
            if len({v for v, _ in pts}) != len(pts):
                rd.problem(_join(path, "c_bias"), "expected points at distinct voltages")
    esr = None
    esr_f = None
    if "esr" in tab:
        got = rd.curve(
            tab["esr"], _join(path, "esr"), letter="r", extra={"at_f": "capacitor.esr[].at_f"}
        )
        if got is not None:
            esr = got[0]
            esr_f = next((e["at_f"] for e in got[1] if e.get("at_f") is not None), None)
            if esr_f is None:
                rd.default(_join(path, "esr.at_f"), "not given: taken as valid at every harmonic")
    v_rated = rd.optional(tab, "v_rated", path, dim_key="capacitor.v_rated")
    ripple = None
    if "i_ripple_rated" in tab:
        rpath = _join(path, "i_ripple_rated")
        rt = rd.table(tab["i_ripple_rated"], rpath, allowed=("i", "at_f", "at"), required=("i",))
        if rt is not None and "i" in rt:
            i = rd.quantity(rt["i"], _join(rpath, "i"), dim_key="capacitor.i_ripple_rated.i")
            f = rd.optional(rt, "at_f", rpath, dim_key="capacitor.i_ripple_rated.at_f")
            at = rd.optional(rt, "at", rpath, dim_key="capacitor.i_ripple_rated.at")
            if i is not None:
                ripple = RippleRating(
                    i=i,
                    at_f=f if f is not None else math.nan,
                    at=at if at is not None else math.nan,
                )
    t_max = rd.optional(tab, "t_max", path, dim_key="capacitor.t_max")
    life = None
    if "life" in tab:
        lpath = _join(path, "life")
        lt = rd.table(
            tab["life"], lpath, allowed=("rated", "at", "required"), required=("rated", "at")
        )
        if lt is not None and "rated" in lt and "at" in lt:
            rated = rd.quantity(lt["rated"], _join(lpath, "rated"), dim_key="capacitor.life.rated")
            at = rd.quantity(lt["at"], _join(lpath, "at"), dim_key="capacitor.life.at")
            req = rd.optional(lt, "required", lpath, dim_key="capacitor.life.required")
            if rated is not None and at is not None:
                life = Life(rated=rated, at=at, required=req)
    thermal = (
        _thermal(rd, tab["thermal"], _join(path, "thermal"), semiconductor=False)
        if "thermal" in tab
        else None
    )
    if name is not None and name in RESERVED_NAMES:
        rd.problem(_join(path, "name"), f"{name!r} is reserved; choose another name")
        name = None
    if any(x is None for x in (name, pos, count, c, esr, thermal)) or any(
        k in tab and x is None for k, x in (("v_rated", v_rated), ("t_max", t_max))
    ):
        return None
    return Capacitor(
        name=name,
        position=pos,
        c=c,
        c_bias=c_bias,
        esr=esr,
        esr_at_f=esr_f,
        count=count,
        v_rated=v_rated,
        i_ripple_rated=ripple,
        t_max=t_max,
        life=life,
        thermal=thermal,
    )


def _resistor(rd: _Reader, raw: Any, path: str) -> Resistor | None:
    tab = rd.table(
        raw, path, allowed=("name", "position", "r", "count"), required=("name", "position", "r")
    )
    if tab is None:
        return None
    name = rd.text(tab, "name", path)
    pos = rd.choice(tab, "position", path, POSITIONS)
    count = rd.integer(tab, "count", path, default=1)
    got = (
        _resistance_at(rd, tab["r"], _join(path, "r"), dim_key="resistor.r[].r")
        if "r" in tab
        else None
    )
    if name is not None and name in RESERVED_NAMES:
        rd.problem(_join(path, "name"), f"{name!r} is reserved; choose another name")
        name = None
    if got is None or any(x is None for x in (name, pos, count)):
        return None
    return Resistor(name=name, position=pos, r=got[0], r_at=got[1], count=count)


def _thermal_block(rd: _Reader, raw: Any) -> tuple[tuple[Sink, ...], tuple[Link, ...]]:
    tab = rd.table(raw, "thermal", allowed=("sink", "link"))
    if tab is None:
        return (), ()
    sinks = []
    raw_sinks = tab.get("sink", [])
    if not isinstance(raw_sinks, list):
        rd.problem("thermal.sink", "expected an array of tables ([[thermal.sink]])")
        raw_sinks = []
    for n, s in enumerate(raw_sinks):
        p = f"thermal.sink[{n}]"
        st = rd.table(s, p, allowed=("name", "rth_to_ambient"), required=("name",))
        if st is None:
            continue
        name = rd.text(st, "name", p)
        rth = rd.optional(st, "rth_to_ambient", p, dim_key="thermal.sink.rth_to_ambient")
        if name is not None and "rth_to_ambient" in st and rth is None:
            rd.refused_sinks.add(name)
        if name in RESERVED_NAMES:
            rd.problem(_join(p, "name"), f"{name!r} is reserved; choose another name")
        elif name is not None:
            sinks.append(Sink(name=name, rth_to_ambient=rth))
    links = []
    raw_links = tab.get("link", [])
    if not isinstance(raw_links, list):
        rd.problem("thermal.link", "expected an array of tables ([[thermal.link]])")
        raw_links = []
    for n, s in enumerate(raw_links):
        p = f"thermal.link[{n}]"
        lt = rd.table(s, p, allowed=("between", "rth"), required=("between", "rth"))
        if lt is None or "between" not in lt or "rth" not in lt:
            continue
        b = lt["between"]
        if not isinstance(b, list) or len(b) != 2 or not all(isinstance(x, str) for x in b):
            rd.problem(_join(p, "between"), f"expected two sink names, got {_show(b)}")
            continue
        if b[0] == b[1]:
            rd.problem(_join(p, "between"), f"expected two different sinks, got {b[0]!r} twice")
            continue
        rth = rd.quantity(lt["rth"], _join(p, "rth"), dim_key="thermal.link.rth")
        if rth is not None:
            links.append(Link(between=(b[0], b[1]), rth=rth))
        else:
            rd.refused_links.append((b[0], b[1]))
    return tuple(sinks), tuple(links)


def _check_thermal_paths(
    rd: _Reader,
    parts: dict[str, PartThermal | None],
    sinks: tuple[Sink, ...],
    links: tuple[Link, ...],
) -> None:
    names = [s.name for s in sinks]
    if len(set(names)) != len(names):
        rd.problem("thermal.sink", "expected distinct sink names")
    known = set(names)
    for n, link in enumerate(links):
        for s in link.between:
            if s not in known:
                rd.problem(
                    f"thermal.link[{n}].between",
                    f"no sink named {s!r} (sinks: {', '.join(sorted(known)) or 'none'})",
                )
    # sinks reach ambient directly or through links; a refused resistance (already reported)
    # counts as a path here, so one error is reported once, not again for every part on it
    reach = {s.name for s in sinks if s.rth_to_ambient is not None} | rd.refused_sinks
    pairs = [link.between for link in links] + rd.refused_links
    changed = True
    while changed:
        changed = False
        for a, b in pairs:
            if (a in reach) != (b in reach) and a in known and b in known:
                reach |= {a, b}
                changed = True
    for path, th in parts.items():
        if th is None or th.sink is None:
            continue
        if th.sink not in known:
            rd.problem(
                f"{path}.sink",
                f"no sink named {th.sink!r} (sinks: {', '.join(sorted(known)) or 'none'})",
            )
        elif th.sink not in reach and th.rth_ha is None and th.rth_ja is None:
            rd.problem(
                f"{path}.sink",
                f"sink {th.sink!r} has no path to ambient (give rth_to_ambient or a link)",
            )
    for n, s in enumerate(sinks):
        if s.name not in reach:
            rd.problem(
                f"thermal.sink[{n}]",
                f"sink {s.name!r} has no path to ambient (give rth_to_ambient or a link)",
            )


# --------------------------------------------------------------------------------------------
# entry point
# --------------------------------------------------------------------------------------------

_TOP = (
    "design",
    "operating",
    "switch",
    "driver",
    "rectifier",
    "inductor",
    "capacitor",
    "resistor",
    "thermal",
    "limits",
    "calibration",
)


def load_design(source: str | Path | dict) -> Design:
    """Read and validate a design from a TOML file or a dict of the same shape.

    Raises
    ------
    DesignError
        Listing every problem found, one line each: ``source: key.path: message``.
    """
    if isinstance(source, dict):
        name = "<dict>"
        raw = source
        try:
            text = json.dumps(source, sort_keys=True, default=str)
        except (TypeError, ValueError):  # keys of mixed types, or a circular structure
            text = repr(source)
        checksum = hashlib.sha256(text.encode()).hexdigest()
        text = None
    elif isinstance(source, str | os.PathLike):
        name = Path(source).name
        raw, text, data = read_toml_file(source, what="design file")
        checksum = hashlib.sha256(data).hexdigest()
    else:
        raise DesignError(
            f"<{type(source).__name__}>: expected a path to a TOML design file or a dict "
            "of the same shape"
        )
    return _design(raw, name=name, checksum=checksum, text=text)


def design_from_text(text: str, *, name: str) -> Design:
    """Read and validate a design from TOML text, as :func:`load_design` reads a file.

    ``name`` stands for the file name in messages and provenance.
    """
    data = text.encode("utf-8")
    raw, text = _parse_toml(data, name)
    return _design(raw, name=name, checksum=hashlib.sha256(data).hexdigest(), text=text)


def _design(raw: Any, *, name: str, checksum: str, text: str | None) -> Design:
    rd = _Reader(name)
    top = rd.table(
        raw,
        "",
        allowed=_TOP,
        required=("design", "operating", "switch", "rectifier", "inductor", "capacitor"),
    )
    if top is None:
        raise DesignError(rd.problems)
    d = (
        rd.table(
            top["design"],
            "design",
            allowed=("name", "topology", "rectifier", "light_load"),
            required=("name", "topology", "rectifier"),
        )
        if "design" in top
        else None
    )
    title = topology = rect = light = None
    if d is not None:
        title = rd.text(d, "name", "design")
        topology = rd.choice(d, "topology", "design", TOPOLOGIES)
        rect = rd.choice(d, "rectifier", "design", RECTIFIER_KINDS)
        if "light_load" in d and rect == "diode":
            rd.problem(
                "design.light_load",
                'light_load applies to a synchronous rectifier only (design.rectifier = "sync")',
            )
        light = rd.choice(
            d,
            "light_load",
            "design",
            LIGHT_LOADS,
            default="forced-continuous" if rect == "sync" else None,
        )
        if rect == "diode":
            light = "diode-emulation"
    operating = _operating(rd, top["operating"], topology) if "operating" in top else None
    iout = operating.iout_rated if operating is not None else None
    switch = (
        _mosfet(rd, top["switch"], "switch", sync=False, iout=iout) if "switch" in top else None
    )
    if "driver" in top:
        driver = _driver(rd, top["driver"], rect)
    else:
        driver = Driver()
        rd.default("driver", "not given: switching edges from gate charges and the gate drive "
                   "not modelled")
    rectifier = None
    if "rectifier" in top and rect is not None:
        rectifier = (
            _mosfet(rd, top["rectifier"], "rectifier", sync=True, iout=iout)
            if rect == "sync"
            else _diode(rd, top["rectifier"], "rectifier", iout=iout)
        )
    inductor = _inductor(rd, top["inductor"]) if "inductor" in top else None
    caps: list[Capacitor] = []
    raw_caps = top.get("capacitor", [])
    if not isinstance(raw_caps, list):
        rd.problem("capacitor", "expected an array of tables ([[capacitor]])")
        raw_caps = []
    for n, c in enumerate(raw_caps):
        cap = _capacitor(rd, c, f"capacitor[{n}]")
        if cap is not None:
            caps.append(cap)
    all_read = len(caps) == len(raw_caps)
    if "capacitor" in top and all_read and not any(c.position == "output" for c in caps):
        rd.problem("capacitor", 'expected at least one bank at position "output"')
    res: list[Resistor] = []
    raw_res = top.get("resistor", [])
    if not isinstance(raw_res, list):
        rd.problem("resistor", "expected an array of tables ([[resistor]])")
        raw_res = []
    for n, r in enumerate(raw_res):
        item = _resistor(rd, r, f"resistor[{n}]")
        if item is not None:
            res.append(item)
    sinks, links = _thermal_block(rd, top["thermal"]) if "thermal" in top else ((), ())
    names = [c.name for c in caps] + [r.name for r in res] + [s.name for s in sinks]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        rd.problem(
            "capacitor" if caps else "thermal.sink",
            "expected distinct capacitor, resistor and sink names; repeated: " + ", ".join(dupes),
        )
    _check_gate_drive(rd, driver, {"switch": switch, "rectifier": rectifier})
    if driver is not None and operating is not None and driver.supply == "vin" \
            and driver.v_drive > operating.vin.min:
        rd.warn("driver.supply", f'"vin" (a linear regulator from the input) cannot give the '
                f"{format_quantity(driver.v_drive, 'voltage')} gate drive at the minimum input "
                f"voltage {format_quantity(operating.vin.min, 'voltage')}: the gate is driven "
                "lower there (higher Rds(on), slower edges) than this budget assumes")
    parts = {
        "switch.thermal": switch.thermal if switch else None,
        "rectifier.thermal": rectifier.thermal if rectifier else None,
        "inductor.thermal": inductor.thermal if inductor else None,
        **{f"capacitor[{n}].thermal": c.thermal for n, c in enumerate(caps)},
    }
    _check_thermal_paths(rd, parts, sinks, links)
    part_kinds = {"switch": "mosfet", "inductor": "inductor",
                  "rectifier": "diode" if isinstance(rectifier, Diode) else "mosfet",
                  **{c.name: "electrolytic" if c.life is not None else "capacitor"
                     for c in caps}}
    limits = _limits(rd, top.get("limits", {}), part_kinds)
    factors = (
        _calibration(rd, top["calibration"], sinks=sinks, names=names)
        if "calibration" in top
        else None
    )
    if rd.problems:
        raise DesignError(rd.problems)
    design = Design(
        name=title,
        topology=topology,
        rectifier_kind=rect,
        light_load=light,
        operating=operating,
        switch=switch,
        driver=driver,
        rectifier=rectifier,
        inductor=inductor,
        capacitors=tuple(caps),
        resistors=tuple(res),
        sinks=sinks,
        links=links,
        limits=limits,
        source=name,
        checksum=checksum,
        resolved=tuple(rd.resolved),
        warnings=tuple(rd.warnings),
        defaults=tuple(rd.defaults),
        text=text,
    )
    return design if factors is None else apply_calibration(design, factors)


def read_toml_file(source: str | os.PathLike, *, what: str) -> tuple[dict, str, bytes]:
    """The TOML document of a file, its text and its bytes, or a one-line DesignError."""
    path = Path(source)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise DesignError(f"{path}: cannot read the {what} ({exc.strerror})") from None
    raw, text = _parse_toml(data, path.name)
    return raw, text, data


def _parse_toml(data: bytes, name: str) -> tuple[dict, str]:
    """The TOML document in ``data`` and its text, or a one-line DesignError."""
    try:
        text = data.decode("utf-8")
        return tomllib.loads(text), text
    except UnicodeDecodeError:
        raise DesignError(f"{name}: expected a UTF-8 text file") from None
    except tomllib.TOMLDecodeError as exc:
        raise DesignError(f"{name}: not valid TOML: {exc}") from None


def _check_gate_drive(
    rd: _Reader, driver: Driver | None, fets: dict[str, Mosfet | Diode | None]
) -> None:
    """The drive must reach past the Miller plateau; warn below the Rds(on) test voltage."""
    if driver is None:
        return
    for path, fet in fets.items():
        if not isinstance(fet, Mosfet):
            continue
        if not math.isfinite(driver.v_drive) or fet.v_plateau is None:
            continue
        if driver.v_drive <= fet.v_plateau:
            rd.problem(
                "driver.v_drive",
                f"expected a drive voltage above {path}.v_plateau "
                f"({format_quantity(fet.v_plateau, 'voltage')}), "
                f"got {format_quantity(driver.v_drive, 'voltage')}",
            )
        elif fet.rds_on_v_gs is not None and driver.v_drive < fet.rds_on_v_gs:
            rd.warn(
                "driver.v_drive",
                f"below the gate voltage of {path}.rds_on "
                f"({format_quantity(fet.rds_on_v_gs, 'voltage')}): Rds(on) will be higher "
                "than the datasheet points",
            )


def _limits(rd: _Reader, raw: Any, part_kinds: dict[str, str]) -> Limits:
    tab = rd.table(raw, "limits", allowed=("derating", "v_spike", "margins"))
    if tab is None:
        return Limits()
    margins = _margins(rd, tab["margins"], part_kinds) if "margins" in tab else ()
    if "derating" in tab:
        derating = rd.choice(tab, "derating", "limits", (*DERATING_PROFILES, "custom"))
        if derating == "custom" and "margins" not in tab:
            rd.problem("limits.derating", 'expected [limits.margins] beside derating = "custom"')
        elif derating in DERATING_PROFILES and "margins" in tab:
            rd.problem(
                "limits.margins",
                f'expected either derating = "{derating}" or [limits.margins], not both',
            )
        derating = derating or "moderate"
    elif "margins" in tab:
        derating = "custom"
        rd.default("limits.derating", "custom (from limits.margins)")
    else:
        derating = "moderate"
        rd.default("limits.derating", "moderate")
    if "v_spike" in tab:
        v_spike = rd.quantity(tab["v_spike"], "limits.v_spike", nonnegative=True) or 0.0
    else:
        v_spike = 0.0
        rd.default("limits.v_spike", "0 V")
    return Limits(derating=derating, margins=margins, v_spike=v_spike)


def _margins(rd: _Reader, mt: Any, part_kinds: dict[str, str]) -> tuple[UserMargin, ...]:
    """The user's derating table: part kind -> quantity -> one unambiguous row.

    A temperature row is ``{ below_max = "25 K" }`` (optionally ``at_most = "125 degC"``);
    any other ``{ use_up_to = "75 %" }``, the share of the rating the design may use. A bare
    value is refused, since "75 %" reads as either the share used or the share held back.
    ``part_kinds`` maps the design's part names to their kinds, to name the kind when a
    part's name is used instead.
    """
    if not isinstance(mt, dict):
        rd.problem("limits.margins", f"expected a table of part kinds, got {_show(mt)}")
        return ()
    kinds = ", ".join(MARGIN_QUANTITIES)
    margins: list[UserMargin] = []
    for kind, rows in mt.items():
        path = f"limits.margins.{kind}"
        if kind not in MARGIN_QUANTITIES:
            hint = (f' ("{kind}" is a part name: write its kind, {part_kinds[kind]})'
                    if kind in part_kinds else "")
            rd.problem(path, f"expected a part kind, one of {kinds}{hint}")
            continue
        if not isinstance(rows, dict):
            rd.problem(path, "expected a table of quantity = { use_up_to = ... } or "
                       "{ below_max = ... }")
            continue
        for qty, row in rows.items():
            qpath = f"{path}.{qty}"
            if qty not in MARGIN_QUANTITIES[kind]:
                rd.problem(qpath, f"expected a quantity of a {kind}, one of "
                           f"{', '.join(MARGIN_QUANTITIES[kind])}")
                continue
            temperature = str(qty).startswith("t")
            form = ('{ below_max = "25 K" } (kelvin below the absolute limit)' if temperature
                    else '{ use_up_to = "75 %" } (the share of the rating the design may use)')
            allowed = ("below_max", "at_most") if temperature else ("use_up_to",)
            if not isinstance(row, dict) or not row or set(row) - set(allowed) \
                    or (allowed[0] not in row):
                rd.problem(qpath, f"expected {form}, got {_show(row)}")
                continue
            where = f"{rd.source}: {qpath}"
            try:
                if temperature:
                    below = parse_quantity(row["below_max"], "temperature_difference",
                                           where=f"{where}.below_max")
                    at_most = (parse_quantity(row["at_most"], "temperature",
                                              where=f"{where}.at_most")
                               if "at_most" in row else None)
                else:
                    share = parse_quantity(row["use_up_to"], "fraction",
                                           where=f"{where}.use_up_to")
            except DesignError as exc:
                rd.problems.extend(exc.problems)
                continue
            if temperature and below < 0:
                rd.problem(f"{qpath}.below_max", f"expected a margin >= 0 K, got "
                           f"{_show(row['below_max'])}")
            elif not temperature and not 0 < share <= 1:
                rd.problem(f"{qpath}.use_up_to", "expected a share of the rating in (0 %, "
                           f"100 %], got {_show(row['use_up_to'])}")
            elif temperature:
                margins.append(UserMargin(kind=kind, quantity=qty, below_max=below,
                                      at_most=at_most))
                text = format_quantity(below, "temperature_difference") + " below the limit"
                if at_most is not None:
                    text += f", at most {format_quantity(at_most, 'temperature')}"
                rd.resolved.append((qpath, text))
            else:
                margins.append(UserMargin(kind=kind, quantity=qty, use_up_to=share))
                rd.resolved.append((qpath, f"use up to {format_quantity(share, 'fraction')} "
                                    "of the rating"))
    return tuple(margins)


def glossary_keys() -> list[str]:
    """Every quantity key the glossary knows (for documentation)."""
    return sorted(GLOSSARY)


# --------------------------------------------------------------------------------------------
# the [calibration] table: scale factors fitted to bench measurements
# --------------------------------------------------------------------------------------------

GROUP_FACTORS = ("switching", "coss", "conduction", "copper", "core", "quiescent")
"""Scale factors on loss groups, each multiplying what the datasheet model gives."""
BOARD_POSITION = "input"
"""Where ``board`` without a position adds its resistance: the DC input path."""
_CALIBRATION_KEYS = (*GROUP_FACTORS, "board", "rth", "source")
_SOURCE_KEYS = ("bench", "points", "sha256", "free")


@dataclass(frozen=True, slots=True, kw_only=True)
class ScaleFactors:
    """Factors that bring the model to bench measurements (the ``[calibration]`` table).

    ``switching`` multiplies the turn-on and turn-off energies of both MOSFETs, ``coss`` their
    node-charge energies, ``conduction`` the channel resistances Rds(on) (main switch and
    synchronous FET; a diode's drop is left alone), ``copper`` the winding's DC resistance
    (hence the DC and AC copper loss), ``core`` the core loss, ``quiescent`` the controller's
    bias current. ``board`` adds a series resistance at a current position (ohms, constant
    with temperature), ``rth`` scales a sink's resistance to ambient. ``bench``, ``points``,
    ``sha256`` and ``free`` record the fit that produced them.
    """

    switching: float = 1.0
    coss: float = 1.0
    conduction: float = 1.0
    copper: float = 1.0
    core: float = 1.0
    quiescent: float = 1.0
    board: tuple[tuple[str, float], ...] = ()
    rth: tuple[tuple[str, float], ...] = ()
    bench: str | None = None
    points: int | None = None
    sha256: str | None = None
    free: tuple[str, ...] = ()

    def value(self, name: str) -> float:
        """A factor by its name (``switching``, ``board.input``, ``rth.board``, ...)."""
        if name in GROUP_FACTORS:
            return getattr(self, name)
        kind, _, where = name.partition(".")
        table = dict(self.board if kind == "board" else self.rth if kind == "rth" else ())
        return table.get(where, 0.0 if kind == "board" else 1.0)

    def with_values(self, values: dict[str, float], **fields: Any) -> ScaleFactors:
        """These factors with some replaced by name (and record fields such as ``bench``)."""
        groups = {k: float(v) for k, v in values.items() if k in GROUP_FACTORS}
        board = dict(self.board)
        rth = dict(self.rth)
        for k, v in values.items():
            kind, _, where = k.partition(".")
            if kind == "board":
                board[where] = float(v)
            elif kind == "rth":
                rth[where] = float(v)
        return ScaleFactors(
            **{g: groups.get(g, getattr(self, g)) for g in GROUP_FACTORS},
            board=tuple(sorted(board.items())),
            rth=tuple(sorted(rth.items())),
            bench=fields.get("bench", self.bench),
            points=fields.get("points", self.points),
            sha256=fields.get("sha256", self.sha256),
            free=tuple(fields.get("free", self.free)),
        )

    def describe(self) -> str:
        """One line for the provenance of every output."""
        parts = [f"{g} × {getattr(self, g):.4g}" for g in GROUP_FACTORS if getattr(self, g) != 1]
        parts += [f"board.{p} {format_quantity(r, 'resistance')}" for p, r in self.board]
        parts += [f"rth.{s} × {k:.4g}" for s, k in self.rth]
        head = "calibrated"
        if self.bench is not None:
            head += f" against {self.bench}"
            if self.points is not None:
                head += f", {self.points} points"
            if self.sha256:
                head += f", sha256 {self.sha256[:16]}…"
        return f"{head}: {', '.join(parts) or 'all factors 1'}"


def board_resistor_name(position: str) -> str:
    """The component name of a calibration's added board resistance at a position."""
    return f"board.{position}"


def apply_calibration(design: Design, factors: ScaleFactors) -> Design:
    """The design with these scale factors (replacing any it held), ready for the solver."""
    import dataclasses

    old = {board_resistor_name(p) for p, _ in design.calibration.board} if (
        design.calibration is not None
    ) else set()
    resistors = tuple(r for r in design.resistors if r.name not in old) + tuple(
        Resistor(name=board_resistor_name(p), position=p, r=Value(typ=r, worst=r))
        for p, r in factors.board
    )
    return dataclasses.replace(design, calibration=factors, resistors=resistors)


def _calibration(
    rd: _Reader, raw: Any, *, sinks: tuple[Sink, ...], names: list[str]
) -> ScaleFactors | None:
    """The ``[calibration]`` table: positive factors, known names, resistances at positions."""
    path = "calibration"
    tab = rd.table(raw, path, allowed=_CALIBRATION_KEYS)
    if tab is None:
        return None
    n_problems = len(rd.problems)
    groups = {g: rd.number(tab, g, path) for g in GROUP_FACTORS if g in tab}
    board: list[tuple[str, float]] = []
    if "board" in tab:
        raw_board = tab["board"]
        if not isinstance(raw_board, dict):
            raw_board = {BOARD_POSITION: raw_board}
            rd.default("calibration.board", f"position {BOARD_POSITION}")
        for pos, r in raw_board.items():
            where = f"calibration.board.{pos}"
            if pos not in POSITIONS:
                rd.unknown("calibration.board", pos, POSITIONS)
                continue
            if board_resistor_name(pos) in names:
                rd.problem(where, f"a resistor is already named {board_resistor_name(pos)!r}")
                continue
            x = rd.quantity(r, where, dim_key="resistor.r[].r", nonnegative=True)
            if x is not None:
                board.append((pos, x))
    rth: list[tuple[str, float]] = []
    if "rth" in tab:
        raw_rth = tab["rth"]
        by_name = {s.name: s for s in sinks}
        if not isinstance(raw_rth, dict):
            rd.problem(
                "calibration.rth", f"expected a table of sink = factor, got {_show(raw_rth)}"
            )
            raw_rth = {}
        for sink in raw_rth:
            if sink not in by_name:
                rd.unknown("calibration.rth", sink, tuple(by_name))
                continue
            if by_name[sink].rth_to_ambient is None:
                rd.problem(
                    f"calibration.rth.{sink}",
                    f"sink {sink!r} has no rth_to_ambient to scale",
                )
                continue
            x = rd.number(raw_rth, sink, "calibration.rth")
            if x is not None:
                rth.append((sink, x))
    record: dict[str, Any] = {}
    if "source" in tab:
        src = rd.table(tab["source"], "calibration.source", allowed=_SOURCE_KEYS)
        if src is not None:
            record["bench"] = rd.text(src, "bench", "calibration.source")
            record["points"] = rd.integer(src, "points", "calibration.source")
            sha = src.get("sha256")
            if sha is not None and not (
                isinstance(sha, str)
                and len(sha) == 64
                and all(ch in "0123456789abcdef" for ch in sha)
            ):
                rd.problem(
                    "calibration.source.sha256",
                    f"expected 64 lower-case hexadecimal digits, got {_show(sha)}",
                )
            record["sha256"] = sha
            free = src.get("free", [])
            if not isinstance(free, list) or not all(isinstance(f, str) for f in free):
                rd.problem(
                    "calibration.source.free", f"expected a list of names, got {_show(free)}"
                )
                free = []
            record["free"] = tuple(free)
    if len(rd.problems) > n_problems:
        return None
    return ScaleFactors(
        **{g: v for g, v in groups.items() if v is not None},
        board=tuple(sorted(board)),
        rth=tuple(sorted(rth)),
        **record,
    )
