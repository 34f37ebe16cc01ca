"""The quantity parser and formatter against the SI definitions.

Source of the prefix factors, the kelvin-degree Celsius relation and the hour: BIPM, "The
International System of Units (SI Brochure)", 9th ed., 2019: Table 7 (prefixes), section 2.3.1
(t/degC = T/K - 273.15), Table 8 (1 h = 3600 s). The unit spellings follow SPEC §5.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from lossbudget.errors import DesignError
from lossbudget.units import (
    DIMENSIONS,
    GLOSSARY,
    format_quantity,
    glossary_dimension,
    parse_quantity,
)

# SI Brochure 2019, Table 7 (u, the micro sign U+00B5 and the Greek mu U+03BC all mean micro).
SI_PREFIXES = {
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "\u00b5": 1e-6,
    "\u03bc": 1e-6,
    "m": 1e-3,
    "": 1.0,
    "k": 1e3,
    "M": 1e6,
    "G": 1e9,
}

PREFIXABLE = {
    "voltage": "V",
    "current": "A",
    "resistance": "ohm",
    "inductance": "H",
    "capacitance": "F",
    "charge": "C",
    "energy": "J",
    "power": "W",
    "frequency": "Hz",
    "time": "s",
    "flux_density": "T",
    "voltage_tempco": "V/K",
    "length": "m",
}


@pytest.mark.parametrize("prefix", sorted(SI_PREFIXES))
@pytest.mark.parametrize("dimension", sorted(PREFIXABLE))
def test_every_prefix_on_every_prefixable_unit(prefix, dimension):
    text = f"2.5 {prefix}{PREFIXABLE[dimension]}"
    assert_allclose(parse_quantity(text, dimension), 2.5 * SI_PREFIXES[prefix], rtol=1e-15)


@pytest.mark.parametrize(
    ("text", "dimension", "expected"),
    [
        # both ohm code points (U+2126 ohm sign, U+03A9 Greek capital omega) and the word
        ("8 m\u2126", "resistance", 8e-3),
        ("8 m\u03a9", "resistance", 8e-3),
        ("8 mohm", "resistance", 8e-3),
        ("4.7 k\u03a9", "resistance", 4.7e3),
        # case sensitivity: m milli, M mega
        ("5 mohm", "resistance", 5e-3),
        ("5 Mohm", "resistance", 5e6),
        ("2 mHz", "frequency", 2e-3),
        ("2 MHz", "frequency", 2e6),
        # the prefix binds inside the power: (1 cm)^3 = 1e-6 m3, (1 mm)^2 = 1e-6 m2
        ("11.4 cm3", "volume", 11.4e-6),
        ("700 mm3", "volume", 700e-9),
        ("125 mm2", "area", 125e-6),
        ("1.25 cm2", "area", 1.25e-4),
        ("2 m2", "area", 2.0),
        ("0.9 mm", "length", 0.9e-3),
        ("1.2 cm", "length", 1.2e-2),
        # absolute temperatures in degC; K converted (SI Brochure 2019, 2.3.1)
        ("55 degC", "temperature", 55.0),
        ("55 \u00b0C", "temperature", 55.0),
        ("328.15 K", "temperature", 55.0),
        ("0 K", "temperature", -273.15),
        ("-40 degC", "temperature", -40.0),
        # K for a temperature difference stays K
        ("10 K", "temperature_difference", 10.0),
        ("0.9 K/W", "thermal_resistance", 0.9),
        ("0.9 degC/W", "thermal_resistance", 0.9),
        # hours (SI Brochure 2019, Table 8)
        ("5000 h", "duration", 5000.0),
        ("7200 s", "duration", 2.0),
        ("1 h", "time", 3600.0),
        # percent for fractions
        ("90 %", "fraction", 0.9),
        ("90%", "fraction", 0.9),
        (0.9, "fraction", 0.9),
        # negative values and a signed tempco
        ("-1.5 mV/K", "voltage_tempco", -1.5e-3),
        ("-15 V", "voltage", -15.0),
        ("+3.3 V", "voltage", 3.3),
        # no space, exponents, bare numbers in SI, strings holding a bare number
        ("22uH", "inductance", 22e-6),
        ("2.2e-5 H", "inductance", 2.2e-5),
        (".5 A", "current", 0.5),
        (2.2e-5, "inductance", 2.2e-5),
        (4, "current", 4.0),
        ("24", "voltage", 24.0),
        (1.45, "number", 1.45),
        ("14", "number", 14.0),
        ("  200 kHz  ", "frequency", 200e3),
    ],
)
def test_units_and_spellings(text, dimension, expected):
    assert_allclose(parse_quantity(text, dimension), expected, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize(
    ("value", "dimension"),
    [
        ("22 uF", "inductance"),  # a unit that does not fit the key
        ("22 UH", "inductance"),  # prefixes are case-sensitive: no capital U
        ("22 u H", "inductance"),
        ("1 cV", "voltage"),  # centi only on lengths, areas and volumes
        ("1 cF", "capacitance"),
        ("10 degC", "temperature_difference"),  # a difference is in K only
        ("5 mK", "temperature_difference"),
        ("1 kdegC", "temperature"),
        (25, "temperature"),  # an absolute temperature needs its unit
        ("25", "temperature"),
        ("1 kh", "duration"),
        ("90 %%", "fraction"),
        ("1.5 V", "number"),
        ("", "voltage"),
        ("V", "voltage"),
        ("1,5 V", "voltage"),
        ("nan V", "voltage"),
        ("inf V", "voltage"),
        ("1e999 V", "voltage"),  # overflows to infinity
        ("1e300 GV", "voltage"),  # the prefix makes it overflow
        (math.nan, "voltage"),
        (math.inf, "current"),
        (-math.inf, "current"),
        (10**400, "voltage"),  # an integer beyond the float range
        (True, "number"),
        (None, "voltage"),
        ([1, "V"], "voltage"),
        ({"v": 1}, "voltage"),
    ],
)
def test_rejections(value, dimension):
    with pytest.raises(DesignError, match=r"^lab\.toml: some\.key: expected "):
        parse_quantity(value, dimension, where="lab.toml: some.key")


def test_rejection_names_the_key_and_what_was_expected():
    with pytest.raises(DesignError) as exc:
        parse_quantity("22 uF", "inductance", where="cart.toml: inductor.l")
    assert str(exc.value) == 'cart.toml: inductor.l: expected inductance (H), got "22 uF"'
    assert exc.value.problems == [str(exc.value)]
    assert isinstance(exc.value, ValueError)


def test_rejection_keeps_micro_and_ohm_signs_and_escapes_a_newline():
    with pytest.raises(DesignError) as exc:
        parse_quantity("22 \u00b5\u2126\n", "inductance", where="x.toml: inductor.l")
    assert str(exc.value) == 'x.toml: inductor.l: expected inductance (H), got "22 \u00b5\u2126\\n"'


def test_rejection_of_volume_given_as_area():
    with pytest.raises(DesignError, match=r'inductor\.core\.ve: expected volume \(m3\), got "11'):
        parse_quantity("11.4 cm2", "volume", where="cart.toml: inductor.core.ve")


def test_bare_absolute_temperature_message_asks_for_a_unit():
    with pytest.raises(DesignError, match=r"absolute temperature with its unit"):
        parse_quantity(25, "temperature", where="x.toml: operating.ambient")


@pytest.mark.parametrize(
    ("value", "dimension", "text"),
    [
        (22e-6, "inductance", "22 uH"),
        (8e-3, "resistance", "8 mohm"),
        (200e3, "frequency", "200 kHz"),
        (-15.0, "voltage", "-15 V"),
        (55.0, "temperature", "55 degC"),
        (10.0, "temperature_difference", "10 K"),
        (0.9, "fraction", "90 %"),
        (11.4e-6, "volume", "11.4 cm3"),
        (700e-9, "volume", "700 mm3"),
        (125e-6, "area", "1.25 cm2"),
        (5000.0, "duration", "5000 h"),
        (0.9, "thermal_resistance", "0.9 K/W"),
        (-1.5e-3, "voltage_tempco", "-1.5 mV/K"),
        (0.0, "voltage", "0 V"),
        (math.nan, "voltage", "n/a"),
    ],
)
def test_format_quantity(value, dimension, text):
    assert format_quantity(value, dimension) == text


# Bounded magnitudes keep clear of subnormal floats, where x/scale*scale loses digits.
_MAGNITUDES = st.floats(min_value=1e-15, max_value=1e15, allow_nan=False)
_VALUES = st.one_of(st.just(0.0), _MAGNITUDES, _MAGNITUDES.map(lambda x: -x))


@settings(max_examples=300, derandomize=True, database=None, deadline=None)
@given(value=_VALUES, dimension=st.sampled_from(sorted(DIMENSIONS)))
def test_round_trip_exact_with_full_digits(value, dimension):
    # 17 significant digits hold a double exactly; the division and re-multiplication by the
    # prefix factor cost at most a few units in the last place, hence rtol = 1e-15.
    back = parse_quantity(format_quantity(value, dimension, digits=17), dimension)
    assert_allclose(back, value, rtol=1e-15, atol=0)


@settings(max_examples=300, derandomize=True, database=None, deadline=None)
@given(value=_VALUES, dimension=st.sampled_from(sorted(DIMENSIONS)))
def test_round_trip_at_display_precision(value, dimension):
    # Four significant digits round to within half a unit of the fourth: 5e-4 relative.
    back = parse_quantity(format_quantity(value, dimension), dimension)
    assert_allclose(back, value, rtol=5e-4, atol=0)


def test_every_glossary_key_has_a_known_dimension():
    assert GLOSSARY
    for key, dimension in GLOSSARY.items():
        assert dimension in DIMENSIONS, key


@pytest.mark.parametrize(
    ("path", "dimension"),
    [
        ("inductor.l", "inductance"),
        ("capacitor[3].esr[1].at", "temperature"),
        ("resistor[0].r[].r", "resistance"),
        ("thermal.sink[2].rth_to_ambient", "thermal_resistance"),
        ("rectifier.leakage.doubles_every", "temperature_difference"),
        ("capacitor[0].life.rated", "duration"),
    ],
)
def test_glossary_dimension_folds_indices(path, dimension):
    assert glossary_dimension(path) == dimension
