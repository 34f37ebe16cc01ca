"""Plausibility bands of design-file quantities: a warning when a value is far off.

Sits beside :mod:`lossbudget.units` and is used by the loader (:mod:`lossbudget.design`): a
value far outside the range such parts have is most often a unit prefix typed wrong ("6 MΩ"
for "6 mΩ", "22 mH" for "22 uH"). It is a warning, never an error: an unusual part is allowed.
Each band is deliberately wide (about ten times past the parts usually met in DC-DC stages of
about 1 W to 10 kW at either end) and states its basis: these are values recalled without a
source at hand (``from memory``), not limits from a standard.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from lossbudget.units import format_quantity, glossary_dimension

BASIS = ("from memory: parts usually met in DC-DC stages of about 1 W to 10 kW, widened about "
         "ten times at either end")


@dataclass(frozen=True, slots=True, kw_only=True)
class Band:
    """The range a quantity of one kind of part usually has."""

    low: float
    high: float
    what: str


# generic key (MOSFET blocks as "*", array indices as "[]") -> band, SI units
BANDS: dict[str, Band] = {
    "*.rds_on[].r": Band(low=1e-4, high=10.0, what="a power MOSFET's on-resistance"),
    "*.qg": Band(low=1e-10, high=2e-6, what="a power MOSFET's total gate charge"),
    "rectifier.vf0[].v": Band(low=0.05, high=3.0, what="a power diode's forward threshold"),
    "inductor.l": Band(low=1e-8, high=0.1, what="a DC-DC stage's inductance"),
    "inductor.dcr.r": Band(low=5e-5, high=20.0, what="a power inductor's DC resistance"),
    "capacitor.c": Band(low=1e-10, high=1.0, what="a capacitor bank part's capacitance"),
    "capacitor.esr[].r": Band(low=1e-5, high=20.0, what="a capacitor's ESR"),
    "operating.fsw": Band(low=1e3, high=1e8, what="a DC-DC stage's switching frequency"),
}


def _generic(key: str) -> str:
    key = re.sub(r"\[\d+\]", "[]", key)
    key = re.sub(r"^(capacitor|resistor)\[\]", r"\1", key)
    return re.sub(r"^(switch|rectifier)\.(rds_on\[\]\.r|qg)$", r"*.\2", key)


def far_outside(key: str, value: float) -> str | None:
    """A warning text when ``value`` of design key ``key`` is far outside its band, else None.

    Parameters
    ----------
    key : str
        The glossary key of the value ("switch.rds_on[].r", "inductor.l").
    value : float
        The value in SI units.
    """
    band = BANDS.get(_generic(key))
    if band is None or band.low <= abs(value) <= band.high:
        return None
    dim = glossary_dimension(key)
    return (f"{format_quantity(value, dim)} is far outside the range of {band.what} "
            f"({format_quantity(band.low, dim)} to {format_quantity(band.high, dim)}; "
            f"{BASIS}): check the unit prefix (m milli, M mega, u micro)")
