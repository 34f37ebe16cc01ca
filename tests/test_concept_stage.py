"""Optional data are optional (SPEC §5): a concept-stage design with conduction data only.

sample_inputs/cold_room_door_concept_buck.toml gives Rds(on), DCR, ESR, the voltage class and
a thermal path per part, nothing else. It must solve, map, check and export; each mechanism
without its data is not_modelled naming the key, each limit without its rating not checked.

Check values: the buck's conduction losses from the textbook RMS currents (Erickson &
Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, Appendix A:
I_sw,rms² = D·(I_L² + ΔI²/12), I_D,rms² = (1 − D)·(I_L² + ΔI²/12); REFERENCES §8.4), the
Rds(on) power law with x = 2.3 from one point (common practice, REFERENCES §5.1) and the
copper law of IEC 60028 (R(T) = R_ref·(234.45 + T)/(234.45 + T_ref)).
"""

from __future__ import annotations

import importlib.resources
import tomllib
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import lossbudget as lb
from lossbudget.cli import main

CONCEPT = Path(__file__).resolve().parents[1] / "sample_inputs" / "cold_room_door_concept_buck.toml"
DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"


@pytest.fixture(scope="module")
def design():
    return lb.load_design(CONCEPT)


def test_conduction_only_design_solves_with_mechanisms_not_modelled(design):
    b = lb.solve(design, vin=12.0, load=4.0)
    assert not b.flagged
    keys = {(c, m): k for c, m, k in b.not_modelled}
    assert "driver.v_drive" in keys["switch", "turn_on"] and "switch.eon" in keys[
        "switch", "turn_on"]
    assert "switch.qg" in keys["driver", "gate_drive"]
    assert keys["inductor", "core"] == "inductor.core"
    assert "switch.qoss" in keys["switch", "coss"]
    # every loss is a conduction loss, and it adds up to the textbook RMS currents
    d, i_l = float(b.duty), float(b.stress("inductor", "i_avg"))
    di = 2 * (float(b.stress("inductor", "i_pk")) - i_l)
    ms = i_l**2 + di**2 / 12
    t_sw, t_r, t_l = (float(b.temperature(n)) for n in ("switch", "rectifier", "inductor"))
    r_sw = 0.014 * ((t_sw + 273.15) / 298.15) ** 2.3
    r_r = 0.009 * ((t_r + 273.15) / 298.15) ** 2.3
    r_l = 0.018 * (234.45 + t_l) / (234.45 + 25.0)
    np.testing.assert_allclose(b.loss("switch", "conduction"), r_sw * d * ms, rtol=1e-6)
    np.testing.assert_allclose(b.loss("rectifier", "conduction"), r_r * (1 - d) * ms, rtol=1e-6)
    np.testing.assert_allclose(b.loss("inductor", "copper_dc"), r_l * ms, rtol=1e-6)
    # energy balance, independently of the loss sum (SPEC §8)
    np.testing.assert_allclose(b.source_input_power, b.input_power, rtol=1e-3)


def test_validate_lists_what_is_not_modelled():
    out = CliRunner().invoke(main, ["validate", str(CONCEPT)])
    assert out.exit_code == 0, out.output
    assert "not modelled" in out.output and "inductor core" in out.output


def test_concept_design_maps_checks_and_exports(tmp_path):
    runner = CliRunner()
    res = runner.invoke(main, ["map", str(CONCEPT), "--out", str(tmp_path / "map")])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "map" / "efficiency_map.png").stat().st_size > 10_000
    res = runner.invoke(main, ["check", str(CONCEPT)])
    assert res.exit_code == 0, res.output
    rows = [line.split() for line in res.output.splitlines()]
    not_checked = {(r[0], r[1]) for r in rows if r[-3:-1] == ["not", "checked"]}
    assert {("switch", "t_j"), ("inductor", "i_pk"), ("cout", "v_pk")} <= not_checked
    assert any(r[:2] == ["switch", "v_pk"] and "ok" in r for r in rows)
    res = runner.invoke(main, ["export", str(CONCEPT), "-o", str(tmp_path / "b.xlsx")])
    assert res.exit_code == 0, res.output
    from openpyxl import load_workbook

    wb = load_workbook(tmp_path / "b.xlsx", read_only=True)
    texts = {str(c) for row in wb["Summary"].iter_rows(values_only=True) for c in row if c}
    assert any("not checked" in t for t in texts)


def test_voltage_over_rating_on_the_30v_parts():
    """point --vin 60V: 60 V + 4 V allowance on 30 V MOSFETs is over the rating."""
    res = CliRunner().invoke(main, ["point", str(CONCEPT), "--vin", "60V"])
    assert res.exit_code == 0, res.output
    assert "OVER RATING: switch v_pk" in res.output


def test_gate_charges_without_a_driver_still_name_the_driver():
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    del raw["driver"]
    b = lb.solve(lb.load_design(raw), vin=24.0)
    keys = {(c, m): k for c, m, k in b.not_modelled}
    assert "driver.v_drive" in keys["switch", "turn_off"]
    assert ("switch", "coss") not in keys  # qoss given: the node charge is still modelled
    assert float(b.loss("switch", "coss")) > 0


def test_required_keys_stay_required():
    raw = tomllib.loads(CONCEPT.read_text(encoding="utf-8"))
    del raw["switch"]["rds_on"]
    with pytest.raises(lb.DesignError, match=r"switch\.rds_on: missing required key"):
        lb.load_design(raw)
    raw = tomllib.loads(CONCEPT.read_text(encoding="utf-8"))
    del raw["inductor"]["thermal"]
    with pytest.raises(lb.DesignError, match=r"inductor\.thermal"):
        lb.load_design(raw)
