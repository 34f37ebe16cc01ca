"""Quantities with units, and the glossary of every design-file key.

A quantity in a design file or on the command line is a bare SI number or a string holding a
number, an optional engineering prefix and a unit ("22 uH", "8 mΩ", "11.4 cm3", "55 degC").
:func:`parse_quantity` turns it into an SI float for a named dimension; :func:`format_quantity`
turns an SI float back into a readable string. :data:`GLOSSARY` names the dimension of every
design-file key: the loader, ``lossbudget validate`` and the output headers all read it, so a
key's unit is written once.

Absolute temperatures are held in degrees Celsius (``K`` strings are converted); temperature
differences in kelvin. Prefixes are case-sensitive (``m`` milli, ``M`` mega); ``c`` (centi) is
accepted on lengths, areas and volumes only, and a prefix binds inside a power (``cm3`` is
1e-6 m³).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from lossbudget.errors import DesignError

PREFIXES: dict[str, float] = {
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "\u00b5": 1e-6,  # micro sign
    "\u03bc": 1e-6,  # Greek mu
    "m": 1e-3,
    "k": 1e3,
    "M": 1e6,
    "G": 1e9,
}
CENTI = {"c": 1e-2}
KELVIN_OFFSET = 273.15


@dataclass(frozen=True, slots=True, kw_only=True)
class Unit:
    """One accepted spelling of a unit: scale to SI, power the prefix binds inside."""

    symbol: str
    scale: float = 1.0
    offset: float = 0.0
    prefixable: bool = True
    power: int = 1
    centi: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class Dimension:
    """A physical dimension: its SI display unit, column suffix and accepted units.

    ``lo`` and ``hi`` bound the magnitude of a value (an absolute temperature itself, in
    degC) that :func:`check_range` accepts.
    """

    name: str
    si: str
    suffix: str
    units: tuple[Unit, ...] = field(default_factory=tuple)
    bare_ok: bool = True
    what: str = ""
    lo: float = 0.0
    hi: float = math.inf


_OHMS = (
    Unit(symbol="ohm"),
    Unit(symbol="\u2126"),  # ohm sign
    Unit(symbol="\u03a9"),  # Greek capital omega
)

DIMENSIONS: dict[str, Dimension] = {
    d.name: d
    for d in (
        Dimension(name="voltage", si="V", suffix="v", units=(Unit(symbol="V"),), lo=1e-6, hi=1e5),
        Dimension(name="current", si="A", suffix="a", units=(Unit(symbol="A"),), lo=1e-12, hi=1e5),
        Dimension(name="resistance", si="ohm", suffix="ohm", units=_OHMS, lo=1e-6, hi=1e9),
        Dimension(
            name="inductance", si="H", suffix="h", units=(Unit(symbol="H"),), lo=1e-12, hi=10.0
        ),
        Dimension(
            name="capacitance", si="F", suffix="f", units=(Unit(symbol="F"),), lo=1e-15, hi=100.0
        ),
        Dimension(name="charge", si="C", suffix="c", units=(Unit(symbol="C"),), lo=1e-18, hi=1.0),
        Dimension(name="energy", si="J", suffix="j", units=(Unit(symbol="J"),), lo=1e-15, hi=1e3),
        Dimension(name="power", si="W", suffix="w", units=(Unit(symbol="W"),), lo=1e-12, hi=1e7),
        Dimension(
            name="frequency", si="Hz", suffix="hz", units=(Unit(symbol="Hz"),), lo=1.0, hi=1e10
        ),
        Dimension(
            name="time",
            si="s",
            suffix="s",
            units=(Unit(symbol="s"), Unit(symbol="h", scale=3600.0, prefixable=False)),
            lo=1e-15,
            hi=1e9,
        ),
        Dimension(
            name="duration",
            si="h",
            suffix="h",
            units=(
                Unit(symbol="h", prefixable=False),
                Unit(symbol="s", scale=1 / 3600.0, prefixable=False),
            ),
            what="a duration in hours",
            lo=1e-3,
            hi=1e8,
        ),
        Dimension(
            name="temperature",
            si="degC",
            suffix="degc",
            units=(
                Unit(symbol="degC", prefixable=False),
                Unit(symbol="\u00b0C", prefixable=False),
                Unit(symbol="K", offset=-KELVIN_OFFSET, prefixable=False),
            ),
            bare_ok=False,
            what='an absolute temperature with its unit ("55 degC" or "328.15 K")',
            lo=-250.0,
            hi=1000.0,
        ),
        Dimension(
            name="temperature_difference",
            si="K",
            suffix="k",
            units=(Unit(symbol="K", prefixable=False),),
            what='a temperature difference in kelvin ("10 K")',
            lo=1e-3,
            hi=1e3,
        ),
        Dimension(
            name="thermal_resistance",
            si="K/W",
            suffix="k_per_w",
            units=(Unit(symbol="K/W", prefixable=False), Unit(symbol="degC/W", prefixable=False)),
            lo=1e-6,
            hi=1e5,
        ),
        Dimension(
            name="length",
            si="m",
            suffix="m",
            units=(Unit(symbol="m", centi=True),),
            lo=1e-7,
            hi=10.0,
        ),
        Dimension(
            name="area",
            si="m2",
            suffix="m2",
            units=(Unit(symbol="m2", power=2, centi=True),),
            lo=1e-14,
            hi=1.0,
        ),
        Dimension(
            name="volume",
            si="m3",
            suffix="m3",
            units=(Unit(symbol="m3", power=3, centi=True),),
            lo=1e-18,
            hi=1.0,
        ),
        Dimension(
            name="flux_density", si="T", suffix="t", units=(Unit(symbol="T"),), lo=1e-6, hi=100.0
        ),
        Dimension(
            name="voltage_tempco",
            si="V/K",
            suffix="v_per_k",
            units=(Unit(symbol="V/K"),),
            lo=0.0,
            hi=1.0,
        ),
        Dimension(
            name="fraction",
            si="",
            suffix="",
            units=(Unit(symbol="%", scale=0.01, prefixable=False),),
            what='a fraction (0.9 or "90 %")',
        ),
        Dimension(name="number", si="", suffix="", units=(), what="a plain number"),
    )
}

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")


def dimension_text(dim: Dimension) -> str:
    """The phrase an error message uses for what a key expects."""
    if dim.what:
        return dim.what
    return f"{dim.name.replace('_', ' ')} ({dim.si})" if dim.si else dim.name


def _unit_scale(text: str, dim: Dimension) -> tuple[float, float] | None:
    """Scale and offset of a unit string for a dimension, or None if it does not fit."""
    for unit in sorted(dim.units, key=lambda u: -len(u.symbol)):
        if text == unit.symbol:
            return unit.scale, unit.offset
        if unit.prefixable and text.endswith(unit.symbol):
            head = text[: -len(unit.symbol)]
            prefixes = PREFIXES | CENTI if unit.centi else PREFIXES
            if head in prefixes:
                return unit.scale * prefixes[head] ** unit.power, unit.offset
    return None


_PREFIX_NAMES = {"p": "pico", "n": "nano", "u": "micro", "\u00b5": "micro", "\u03bc": "micro",
                 "m": "milli", "c": "centi", "k": "kilo", "M": "mega", "G": "giga"}


def _unit_hint(text: str, dim: Dimension) -> str:
    """A suggestion for a unit spelt in the wrong case ("khz" -> "kHz"), or ""."""
    found: list[str] = []
    for unit in dim.units:
        heads = [""]
        if unit.prefixable:
            heads += list(PREFIXES | CENTI if unit.centi else PREFIXES)
        for head in heads:
            spelling = head + unit.symbol
            if spelling.lower() == text.lower() and spelling not in found:
                found.append(spelling)
    if not found:
        return ""
    named = [f'"{f}"' + (f" ({_PREFIX_NAMES[f[0]]})" if len(found) > 1 and f[0] in
                         _PREFIX_NAMES and f[1:] in {u.symbol for u in dim.units} else "")
             for f in found]
    return f"; did you mean {' or '.join(named)}? (prefixes are case-sensitive)"


def printable(text: str) -> str:
    """Text with its non-printable characters escaped (a newline shows as \\n), so that a
    problem stays on one line; other characters, µ and Ω included, are kept."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


ECHO_CHARS = 60
"""Longest echo of a bad value in an error message; a longer one is cut with an ellipsis."""


def quote_text(text: str) -> str:
    """A string as an error message shows it: in double quotes, on one line, cut to about
    :data:`ECHO_CHARS` characters (with an ellipsis and the full length) when longer."""
    shown = printable(text)
    if len(shown) > ECHO_CHARS:
        shown = f"{shown[: ECHO_CHARS - 1]}… ({len(text)} characters)"
    return f'"{shown}"'


def echo_value(value: object) -> str:
    """A non-string value as an error message shows it: its repr, cut like :func:`quote_text`."""
    if isinstance(value, str):
        return quote_text(value)
    text = repr(value)
    return text if len(text) <= ECHO_CHARS else f"{text[: ECHO_CHARS - 1]}…"


def _bounds_text(dim: Dimension, dimension: str) -> str:
    """The stated range of a dimension, for an error message."""
    if dimension == "temperature":
        return f"from {dim.lo:g} degC to {dim.hi:g} degC"
    unit = f" {dim.si}" if dim.si else ""
    return f"from {dim.lo:g}{unit} to {dim.hi:g}{unit} in magnitude"


def parse_quantity(value: object, dimension: str, *, where: str = "") -> float:
    """Parse a bare SI number or a unit string into an SI float.

    Parameters
    ----------
    value : int, float or str
        The quantity as written ("22 uH", 2.2e-5, "55 degC").
    dimension : str
        A key of :data:`DIMENSIONS`.
    where : str
        ``source: key.path`` for the error message.

    Returns
    -------
    float
        The value in SI units (absolute temperatures in degC).

    Raises
    ------
    DesignError
        When the value is not a number, has no or the wrong unit, or is not finite. The
        stated range of the dimension is :func:`check_range`'s (the loader and the command
        line call both).
    """
    dim = DIMENSIONS[dimension]
    expected = dimension_text(dim)
    finite = f"a finite {expected[2:]}" if expected.startswith("a ") else f"a finite {expected}"
    prefix = f"{where}: " if where else ""
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        raise DesignError(f"{prefix}expected {expected}, got {echo_value(value)}")
    if isinstance(value, int | float):
        if not dim.bare_ok:
            raise DesignError(f"{prefix}expected {expected}, got bare number {value!r}")
        try:
            number = float(value)
        except OverflowError:  # an integer beyond the float range (from a dict source)
            raise DesignError(f"{prefix}expected {finite}, got {echo_value(value)}") from None
    else:
        match = _NUMBER.match(value)
        if match is None:
            raise DesignError(f"{prefix}expected {expected}, got {quote_text(value)}")
        number = float(match.group(1))
        unit_text = match.group(2)
        if unit_text:
            scale_offset = _unit_scale(unit_text, dim)
            if scale_offset is None:
                raise DesignError(f"{prefix}expected {expected}, got {quote_text(value)}"
                                  + _unit_hint(unit_text, dim))
            scale, offset = scale_offset
            number = number * scale + offset
        elif not dim.bare_ok:
            raise DesignError(f"{prefix}expected {expected}, got {quote_text(value)}")
    if not math.isfinite(number):
        raise DesignError(f"{prefix}expected {finite}, got {echo_value(value)}")
    return number


def range_rules() -> list[tuple[str, str]]:
    """Each bounded dimension with its stated range, as the README lists them."""
    return [
        (name.replace("_", " "), _bounds_text(dim, name))
        for name, dim in DIMENSIONS.items()
        if dim.lo > 0 or math.isfinite(dim.hi) or name == "temperature"
    ]


def check_range(number: float, dimension: str, *, where: str = "", raw: object = None) -> float:
    """Refuse a parsed value outside its dimension's stated range; return it otherwise.

    Parameters
    ----------
    number : float
        The parsed value in SI units (absolute temperatures in degC).
    dimension : str
        A key of :data:`DIMENSIONS`.
    where : str
        ``source: key.path`` (or the option) for the error message.
    raw : object
        The value as written, echoed in the message (the number when None).

    Returns
    -------
    float
        ``number``, unchanged.

    Raises
    ------
    DesignError
        When ``number`` lies outside ``Dimension.lo`` to ``Dimension.hi`` in magnitude (zero
        passes: sign and zero rules are the key's own), or, for an absolute temperature,
        outside -250 degC to 1000 degC. The ranges are wider than any part of a board-level
        DC-DC stage: they refuse values whose arithmetic would overflow, underflow or lose
        its meaning (1e-320 ohm, 1e308 H, points at 0 K), not unusual designs.
    """
    dim = DIMENSIONS[dimension]
    if dimension == "temperature":
        out_of_range = not dim.lo <= number <= dim.hi
    else:
        out_of_range = number != 0 and not dim.lo <= abs(number) <= dim.hi
    if out_of_range:
        prefix = f"{where}: " if where else ""
        raise DesignError(
            f"{prefix}expected {dimension_text(dim)} {_bounds_text(dim, dimension)}, "
            f"got {echo_value(number if raw is None else raw)}"
        )
    return number


_DISPLAY_PREFIXES = [
    ("G", 1e9),
    ("M", 1e6),
    ("k", 1e3),
    ("", 1.0),
    ("m", 1e-3),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
]


_DISPLAY_PREFIXES_INSIDE_POWER = [("", 1.0), ("c", 1e-2), ("m", 1e-3), ("u", 1e-6), ("n", 1e-9)]


def format_quantity(value: float, dimension: str, *, digits: int = 4) -> str:
    """Format an SI value with an engineering prefix for display ("22 uH", "55 degC")."""
    dim = DIMENSIONS[dimension]
    if value is None or not math.isfinite(value):
        return "n/a"
    if dimension == "fraction":
        return f"{value * 100:.{digits}g} %"
    if dimension in {"number"}:
        return f"{value:.{digits}g}"
    unit = dim.si
    first = dim.units[0] if dim.units else None
    if first is None or not first.prefixable or value == 0:
        return f"{value:.{digits}g} {unit}".strip()
    mag = abs(value)
    if first.power > 1:  # areas and volumes: the prefix binds inside the power ("11.4 cm3")
        symbol, scale = next(
            (p for p in _DISPLAY_PREFIXES_INSIDE_POWER if mag >= p[1] ** first.power * 0.9995),
            _DISPLAY_PREFIXES_INSIDE_POWER[-1],
        )
        return f"{value / scale**first.power:.{digits}g} {symbol}{unit}"
    for symbol, scale in _DISPLAY_PREFIXES:
        if mag >= scale * 0.9995:
            return f"{value / scale:.{digits}g} {symbol}{unit}"
    symbol, scale = _DISPLAY_PREFIXES[-1]
    return f"{value / scale:.{digits}g} {symbol}{unit}"


# ---------------------------------------------------------------------------------------------
# The glossary: dimension of every quantity key of the design file, by key path. ``*`` stands
# for a MOSFET block ([switch], or [rectifier] with rectifier = "sync"); ``capacitor`` and
# ``resistor`` for every entry of those arrays. Keys inside point lists ("rds_on[].at") are
# written with "[]".
# ---------------------------------------------------------------------------------------------

_MOSFET_KEYS = {
    "vds_rated": "voltage",
    "rds_on[].r": "resistance",
    "rds_on[].at": "temperature",
    "rds_on[].v_gs": "voltage",
    "v_th": "voltage",
    "v_plateau": "voltage",
    "qg": "charge",
    "qgs": "charge",
    "qgs2": "charge",
    "qgd": "charge",
    "rg": "resistance",
    "qoss.q": "charge",
    "qoss.at": "voltage",
    "eoss.e": "energy",
    "eoss.at": "voltage",
    "eon.e": "energy",
    "eon.at_v": "voltage",
    "eon.at_i": "current",
    "eoff.e": "energy",
    "eoff.at_v": "voltage",
    "eoff.at_i": "current",
    "body_diode.vsd[].v": "voltage",
    "body_diode.vsd[].at": "temperature",
    "body_diode.qrr.q": "charge",
    "body_diode.qrr.at_i": "current",
    "body_diode.qrr.at": "temperature",
    "body_diode.erec": "energy",
    "tj_max": "temperature",
    "loop_inductance": "inductance",
    "count": "number",
}

_THERMAL_KEYS = {
    "thermal.rth_jc": "thermal_resistance",
    "thermal.rth_cs": "thermal_resistance",
    "thermal.rth_ja": "thermal_resistance",
    "thermal.rth_jb": "thermal_resistance",
    "thermal.rth_ha": "thermal_resistance",
}

GLOSSARY: dict[str, str] = {
    "operating.vin": "voltage",
    "operating.vout": "voltage",
    "operating.iout_rated": "current",
    "operating.fsw": "frequency",
    "operating.ambient": "temperature",
    "operating.max_duty": "fraction",
    "operating.min_on_time": "time",
    "operating.min_off_time": "time",
    "operating.i_limit": "current",
    **{f"switch.{k}": v for k, v in (_MOSFET_KEYS | _THERMAL_KEYS).items()},
    **{f"rectifier.{k}": v for k, v in (_MOSFET_KEYS | _THERMAL_KEYS).items()},
    "rectifier.vr_rated": "voltage",
    "rectifier.vf0[].v": "voltage",
    "rectifier.vf0[].at": "temperature",
    "rectifier.rd[].r": "resistance",
    "rectifier.rd[].at": "temperature",
    "rectifier.qc.q": "charge",
    "rectifier.qc.at": "voltage",
    "rectifier.qrr.q": "charge",
    "rectifier.qrr.at_i": "current",
    "rectifier.qrr.at": "temperature",
    "rectifier.erec": "energy",
    "rectifier.leakage.i": "current",
    "rectifier.leakage.at": "temperature",
    "rectifier.leakage.at_v": "voltage",
    "rectifier.leakage.doubles_every": "temperature_difference",
    "driver.v_drive": "voltage",
    "driver.v_aux": "voltage",
    "driver.r_source": "resistance",
    "driver.r_sink": "resistance",
    "driver.rg_on": "resistance",
    "driver.rg_off": "resistance",
    "driver.quiescent": "current",
    "driver.dead_time": "time",
    "inductor.l": "inductance",
    "inductor.l[].at_i": "current",
    "inductor.dcr.r": "resistance",
    "inductor.dcr.at": "temperature",
    "inductor.i_sat[].i": "current",
    "inductor.i_sat[].at": "temperature",
    "inductor.t_max": "temperature",
    "inductor.count": "number",
    "inductor.core.ve": "volume",
    "inductor.core.ae": "area",
    "inductor.core.turns": "number",
    "inductor.core.k": "number",
    "inductor.core.alpha": "number",
    "inductor.core.beta": "number",
    "inductor.core.fit_range.f": "frequency",
    "inductor.core.fit_range.b": "flux_density",
    "inductor.core.b_sat": "flux_density",
    "inductor.winding.layers": "number",
    "inductor.winding.wire_diameter": "length",
    "inductor.winding.porosity": "fraction",
    "inductor.winding.rac_rdc": "number",
    **{f"inductor.{k}": v for k, v in _THERMAL_KEYS.items()},
    "capacitor.c": "capacitance",
    "capacitor.c_bias[].c": "capacitance",
    "capacitor.c_bias[].at_v": "voltage",
    "capacitor.esr[].r": "resistance",
    "capacitor.esr[].at": "temperature",
    "capacitor.esr[].at_f": "frequency",
    "capacitor.count": "number",
    "capacitor.v_rated": "voltage",
    "capacitor.i_ripple_rated.i": "current",
    "capacitor.i_ripple_rated.at_f": "frequency",
    "capacitor.i_ripple_rated.at": "temperature",
    "capacitor.t_max": "temperature",
    "capacitor.life.rated": "duration",
    "capacitor.life.at": "temperature",
    "capacitor.life.required": "duration",
    **{f"capacitor.{k}": v for k, v in _THERMAL_KEYS.items()},
    "resistor.r[].r": "resistance",
    "resistor.r[].at": "temperature",
    "resistor.count": "number",
    "thermal.sink.rth_to_ambient": "thermal_resistance",
    "thermal.link.rth": "thermal_resistance",
    "limits.v_spike": "voltage",
}


def glossary_dimension(path: str) -> str:
    """Dimension of a design-file key path (indices and array names folded)."""
    generic = re.sub(r"\[\d+\]", "[]", path)
    generic = re.sub(r"^(capacitor|resistor|thermal\.sink|thermal\.link)\[\]", r"\1", generic)
    return GLOSSARY[generic]


def column_suffix(dimension: str) -> str:
    """Suffix that table columns of a dimension carry (``vin_v``, ``t_switch_degc``)."""
    return DIMENSIONS[dimension].suffix
