"""Values refused at load and options refused on the command line (issue 11, items 2, 4, 7).

Each case here crashed (exit 3) or solved on a made-up number before: the loader and the
option parser now refuse it with one line naming the key or the option and what was expected.
The stated ranges are the loader's own rules (README, "Ranges"); the physical facts behind the
cases are named beside each: absolute zero is 0 K = -273.15 degC (BIPM, SI Brochure, 9th ed.,
2019, 2.3.1); the largest IEEE 754 double is about 1.8e308 and the smallest normal one about
2.2e-308 (IEEE Std 754-2019, 3.3, binary64).
"""

from __future__ import annotations

import copy
import tomllib
from importlib import resources

import pytest
from click.testing import CliRunner

from lossbudget import DesignError, load_design
from lossbudget.cli import main
from lossbudget.units import ECHO_CHARS

DEMO_PATH = str(resources.files("lossbudget") / "data" / "demo.toml")
DEMO = tomllib.loads((resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8"))


def problems(mutate) -> list[str]:
    raw = copy.deepcopy(DEMO)
    mutate(raw)
    with pytest.raises(DesignError) as exc:
        load_design(raw)
    return exc.value.problems


def one_problem(mutate, key: str) -> str:
    found = problems(mutate)
    assert len(found) == 1, found
    assert found[0].startswith(f"<dict>: {key}: expected"), found[0]
    assert "\n" not in found[0]
    return found[0]


# ---- item 2: crashes on files validate accepted ---------------------------------------------


def test_rds_on_point_at_absolute_zero_is_refused():
    # R(T) = R1 (T/T1)^x needs T > 0 K (BIPM 2.3.1: 0 K is absolute zero)
    def mutate(raw):
        raw["switch"]["rds_on"][0]["at"] = "0 K"

    text = one_problem(mutate, r"switch.rds_on[0].at")
    assert "from -250 degC to 1000 degC" in text and '"0 K"' in text


def test_leakage_doubling_below_one_kelvin_is_refused_not_overflowed():
    # found by the fuzz campaign: 2**((T - T_ref)/0.01 K) overflows a double (IEEE 754
    # binary64) within 11 K; a silicon diode's leakage doubles every 5 to 15 K (common practice)
    def mutate(raw):
        raw["rectifier"]["leakage"]["doubles_every"] = "0.01 K"

    text = one_problem(mutate, "rectifier.leakage.doubles_every")
    assert "at least 1 K" in text and "0.01 K" in text


def test_steinmetz_beta_400_with_converted_units_is_refused_not_overflowed():
    # 1e3 ** 400 overflows a double (IEEE 754 binary64 tops out near 1.8e308)
    def mutate(raw):
        raw["inductor"]["core"].update(beta=400, k_units="mW/cm3-kHz-mT")

    text = one_problem(mutate, "inductor.core.beta")
    assert "[1, 4]" in text


def test_subnormal_rds_on_is_refused():
    # 1e-320 is below the smallest normal double (IEEE 754, about 2.2e-308)
    def mutate(raw):
        raw["switch"]["rds_on"] = {"typ": "1e-320 ohm"}

    text = one_problem(mutate, "switch.rds_on.typ")
    assert "from 1e-06 ohm to 1e+09 ohm" in text


def test_i_sat_points_one_kelvin_apart_reaching_zero_are_refused():
    # 21 A at 25 degC, 17 A at 26 degC: the last segment falls 4 A/K and reaches 0 A at
    # 26 + 17/4 = 30.25 degC (hand calculation)
    def mutate(raw):
        raw["inductor"]["i_sat"] = [{"i": "21 A", "at": "25 degC"}, {"i": "17 A", "at": "26 degC"}]

    text = one_problem(mutate, "inductor.i_sat")
    assert "30.25 degC" in text


@pytest.mark.parametrize("name", ["cart\tbus", "cart\nbus", "cart\x1b[31mbus", "cart\x00"])
def test_names_with_control_characters_are_refused(name):
    def mutate(raw):
        raw["design"]["name"] = name

    text = one_problem(mutate, "design.name")
    assert "control characters" in text


def test_a_capacitor_name_with_a_control_character_is_refused():
    def mutate(raw):
        raw["capacitor"][0]["name"] = "cout\r"

    assert any("capacitor[0].name" in p and "control" in p for p in problems(mutate))


# ---- item 7: late rejection, consequences once, long echoes ---------------------------------


def test_a_count_beyond_any_board_is_refused_at_load():
    def mutate(raw):
        raw["switch"]["count"] = 9223372036854775807

    text = one_problem(mutate, "switch.count")
    assert "<= 1,000" in text


def test_a_vanishing_case_to_sink_resistance_is_refused_at_load():
    def mutate(raw):
        raw["switch"]["thermal"]["rth_cs"] = "1e-30 K/W"

    text = one_problem(mutate, "switch.thermal.rth_cs")
    assert "from 1e-06 K/W to 100000 K/W" in text


def test_a_negative_sink_resistance_is_reported_once():
    def mutate(raw):
        raw["thermal"]["sink"][0]["rth_to_ambient"] = "-12 K/W"

    found = problems(mutate)
    assert len(found) == 1, found
    assert "thermal.sink[0].rth_to_ambient" in found[0]


def test_a_refused_part_resistance_is_not_reported_again_as_a_missing_path():
    def mutate(raw):
        raw["inductor"]["thermal"] = {"rth_ha": "-18 K/W"}

    found = problems(mutate)
    assert len(found) == 1, found


def test_a_huge_bad_value_is_echoed_cut():
    def mutate(raw):
        raw["inductor"]["l"] = "x" * 100_000

    text = one_problem(mutate, "inductor.l")
    assert len(text) < 200
    assert "\u2026 (100000 characters)" in text
    assert text.count("x") <= ECHO_CHARS


def test_values_at_the_edges_of_the_ranges_still_load():
    def mutate(raw):
        raw["switch"]["thermal"]["rth_cs"] = 1e-6
        raw["switch"]["count"] = 1000

    raw = copy.deepcopy(DEMO)
    mutate(raw)
    design = load_design(raw)
    assert design.switch.count == 1000
    assert design.switch.thermal.rth_cs == pytest.approx(1e-6, rel=1e-12)


# ---- item 4: options range-checked like design-file values ----------------------------------

POINT_CASES = [
    (["--load-pct", "-5"], "--load-pct"),
    (["--load", "-1 A"], "--load"),
    (["--vin", "0"], "--vin"),
    (["--vin", "-48"], "--vin"),
    (["--fsw", "0"], "--fsw"),
    (["--fsw", "-1 kHz"], "--fsw"),
    (["--load-pct", "nan"], "--load-pct"),
    (["--load-pct", "inf"], "--load-pct"),
    (["--ambient", "0 K"], "--ambient"),
    (["--vin", "1e308"], "--vin"),
    (["--load", "nan"], "--load"),
]


@pytest.mark.parametrize(("args", "option"), POINT_CASES, ids=[" ".join(a) for a, _ in POINT_CASES])
def test_point_refuses_out_of_range_options(args, option):
    result = CliRunner().invoke(main, ["point", DEMO_PATH, *args])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, lines
    assert lines[0].startswith(f"lossbudget: {option}: expected"), lines[0]
    assert result.stdout == ""


GRID_CASES = [
    (["--vin", "40:1e308:3"], "--vin stop"),
    (["--vin", "-48:58:3"], "--vin start"),
    (["--load", "-1:4:3"], "--load start"),
    (["--load-pct", "5:nan:3"], "--load-pct stop"),
    (["--ambient", "0 K"], "--ambient"),
]


@pytest.mark.parametrize("command", ["map", "export"])
@pytest.mark.parametrize(("args", "option"), GRID_CASES, ids=[" ".join(a) for a, _ in GRID_CASES])
def test_grid_commands_refuse_out_of_range_options(tmp_path, command, args, option):
    target = ["--out", str(tmp_path / "m")] if command == "map" else ["-o", str(tmp_path / "b.csv")]
    result = CliRunner().invoke(main, [command, DEMO_PATH, *target, *args])
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"lossbudget: {option}: expected"), lines
    assert list(tmp_path.iterdir()) == []


def test_point_keeps_the_sign_it_was_given():
    # the old behaviour solved --load-pct -5 at +5 %; a legal percent still solves
    ok = CliRunner().invoke(main, ["point", DEMO_PATH, "--load-pct", "5"])
    assert ok.exit_code == 0, ok.output
    assert "load 200 mA" in ok.stdout  # 5 % of the demo's rated 4 A (design file)


def test_the_readme_lists_every_stated_range():
    from pathlib import Path

    from lossbudget.units import range_rules

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for name, text in range_rules():
        assert f"| {name} | {text} |" in readme, name


def test_a_huge_core_temperature_coefficient_is_refused_not_overflowed():
    # the fuzz campaign's case: ct0 = 1.83e300 overflowed the core loss (IEEE 754 binary64)
    raw = tomllib.loads((resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8"))
    raw["inductor"]["core"]["ct"] = [1.83e300, 0.0166, 8.3e-5]
    with pytest.raises(DesignError, match=r"inductor\.core\.ct: expected coefficients"):
        load_design(raw)


def test_a_huge_measured_ac_resistance_ratio_is_refused():
    raw = copy.deepcopy(DEMO)
    raw["inductor"]["winding"] = {"rac_rdc": 1e300}
    with pytest.raises(DesignError, match=r"inductor\.winding\.rac_rdc: expected Rac/Rdc from 1"):
        load_design(raw)
