"""Numbers that were wrong without a flag (issue 11, item 3): now right, or flagged with a reason.

Independent facts used here: conservation of energy at the stage's input terminals, Vin·I_in =
Pout + every loss (the first law; SPEC §2.1 states it for the stage); Joule's law P = I²R; the
maximum power a source of voltage V delivers through a series resistance R is V²/(4R) (C. K.
Alexander, M. N. O. Sadiku, *Fundamentals of Electric Circuits*, 5th ed., 2013, §4.8, eq. 4.24).
"""

from __future__ import annotations

import copy
import tomllib
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from lossbudget import DesignError, load_design, solve

ROOT = Path(__file__).resolve().parents[1]
DEMO = tomllib.loads((resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8"))


def sample(stem: str) -> dict:
    return tomllib.loads((ROOT / "sample_inputs" / f"{stem}.toml").read_text("utf-8"))


def solved(raw: dict, **kw):
    design = load_design(raw)
    kw.setdefault("vin", design.operating.vin.nom)
    return design, solve(design, **kw)


def balance(budget) -> float:
    return float(abs(budget.source_input_power - budget.input_power) / budget.input_power)


def with_resistor(raw: dict, position: str, r: str) -> dict:
    raw = copy.deepcopy(raw)
    raw.setdefault("resistor", []).append({"name": "fuse_link", "position": position, "r": r})
    return raw


def test_a_four_ohm_input_fuse_on_the_buck_closes_the_energy_balance():
    # 48 V -> 12 V at 20 % of 8 A: about 20 W in, well below 48²/(4·4) = 144 W
    raw = with_resistor(sample("fan_tray_sync_buck"), "input", "4 ohm")
    _, b = solved(raw, load_fraction=0.2)
    assert not b.flagged.any(), b.reason
    assert balance(b) <= 1e-3
    # Joule's law on the fuse with the source current: the sample's driver and controller run
    # from an auxiliary rail (supply = "aux"), whose power the source figure also holds
    aux = float(b.loss("driver") + b.loss("controller"))
    i_in = (float(b.source_input_power) - aux) / 48.0
    assert_allclose(float(b.loss("fuse_link")), 4.0 * i_in**2, rtol=1e-3)


def test_an_input_fuse_that_cannot_pass_the_power_is_flagged_infeasible():
    # demo at 20 % load: 48 V · 0.8 A = 38.4 W out > 24²/(4·4) = 36 W (maximum power transfer)
    raw = with_resistor(DEMO, "input", "4 ohm")
    _, b = solved(raw, vin=24.0, load_fraction=0.2)
    assert bool(b.flags["infeasible"])
    assert "4·R·P > Vin²" in str(b.reason)
    assert np.isnan(b.efficiency)


@pytest.mark.parametrize("position", ["input", "switch", "rectifier", "inductor", "output", "load"])
@pytest.mark.parametrize("stem", ["demo", "grow_light_led_boost", "fan_tray_sync_buck"])
def test_a_large_series_resistor_closes_the_balance_or_is_flagged(stem, position):
    base = DEMO if stem == "demo" else sample(stem)
    _, b = solved(with_resistor(base, position, "4 ohm"), load_fraction=0.2)
    if b.flagged.any():
        assert str(b.reason) != ""
    else:
        assert balance(b) <= 1e-3, (stem, position)


def test_fifty_winding_layers_at_two_percent_load_close_the_balance():
    raw = copy.deepcopy(DEMO)
    raw["inductor"]["winding"]["layers"] = 50
    _, b = solved(raw, load_fraction=0.02)
    assert not b.flagged.any(), b.reason
    assert balance(b) <= 1e-3


def test_a_core_temperature_polynomial_below_zero_is_clipped_and_flagged():
    # ct = 0.5 - 0.05 T + 1e-4 T²: negative between its roots, 10.6 degC and 489 degC (hand
    # calculation, quadratic formula), so at every working temperature of the winding
    raw = sample("grow_light_led_boost")
    raw["inductor"]["core"]["ct"] = [0.5, 0.05, 1e-4]
    _, b = solved(raw)
    assert float(b.loss("inductor", "core")) == 0.0
    assert bool(b.flags["extrapolated"])
    assert "ct negative" in str(b.reason)


def test_a_steep_esr_curve_clipped_outside_its_points_is_flagged():
    raw = copy.deepcopy(DEMO)
    # 40 mohm at 25 degC, 35 mohm at 26 degC: the line reaches 0 at 33 degC (hand calculation)
    raw["capacitor"][1]["esr"] = [
        {"r": "40 mohm", "at": "25 degC"},
        {"r": "35 mohm", "at": "26 degC"},
    ]
    _, b = solved(raw, ambient=45.0)
    assert bool(b.flags["extrapolated"])
    assert "ESR clipped" in str(b.reason)
    assert np.all([np.all(v >= 0) for v in b.losses.values()])


def test_a_steep_vf0_curve_clipped_outside_its_points_is_flagged():
    raw = copy.deepcopy(DEMO)
    # 0.42 V at 25 degC, 0.2 V at 30 degC: the line reaches 0 at 34.5 degC (hand calculation)
    raw["rectifier"]["vf0"] = [
        {"typ": "0.42 V", "at": "25 degC"},
        {"typ": "0.2 V", "at": "30 degC"},
    ]
    _, b = solved(raw)
    assert bool(b.flags["extrapolated"])
    assert "Vf0 clipped" in str(b.reason)


def test_an_unclipped_point_carries_no_reason():
    _, b = solved(copy.deepcopy(DEMO))
    assert not bool(b.flags["extrapolated"]) and str(b.reason) == ""


def test_an_inductance_of_1e308_henry_is_refused_at_load():
    raw = copy.deepcopy(DEMO)
    raw["inductor"]["l"] = 1e308
    with pytest.raises(DesignError, match=r"inductor\.l: expected inductance .* to 10 H in"):
        load_design(raw)


def test_point_prints_the_reason_of_a_clip(tmp_path):
    from click.testing import CliRunner

    from lossbudget.cli import main

    text = (resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8")
    steep = '[{ r = "40 mohm", at = "25 degC" }, { r = "35 mohm", at = "26 degC" }]'
    text = text.replace('esr = { r = "4 mohm", at_f = "200 kHz" }', f"esr = {steep}")
    assert steep in text
    path = tmp_path / "steep.toml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(main, ["point", str(path), "--ambient", "45 degC"])
    assert result.exit_code == 0, result.output
    assert "note: extrapolated or clipped here: cout ESR clipped" in result.stdout
