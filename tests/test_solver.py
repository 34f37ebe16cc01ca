"""The solver through the public API: energy balance, flags, properties, broadcasting."""

from __future__ import annotations

import copy
import tomllib
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import lossbudget as lb

DEMO = resources.files("lossbudget") / "data" / "demo.toml"
SAMPLES = sorted(Path(__file__).resolve().parents[1].glob("sample_inputs/*.toml"))


def _demo_dict() -> dict:
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def demo():
    return lb.load_design(DEMO)


@pytest.fixture(scope="module")
def demo_grid(demo):
    return lb.sweep(demo, vin=[18.0, 24.0, 32.0], load=[0.1, 0.5, 1.5, 4.0],
                    ambient=[0.0, 55.0])


def test_bookkeeping_every_row_is_in_the_table(demo_grid):
    """Input power = output power + the sum of every row of the loss table, to 1e-9.

    Source: conservation of energy (REFERENCES §12); the loss table is built separately from
    the rows, so a row left out of the table shows here.
    """
    table = demo_grid.loss_table()
    summed = table.groupby("point_id")["loss_w"].sum(min_count=1).to_numpy()
    expected = (demo_grid.input_power - demo_grid.output_power).ravel()
    np.testing.assert_allclose(summed, expected, rtol=1e-9)
    points = demo_grid.point_table()
    np.testing.assert_allclose(points["pin_w"], points["pout_w"] + points["loss_w"], rtol=1e-9)


def test_energy_balance_independent_of_the_loss_sum(demo_grid):
    """Vin × average source current (with the edge charge) = Pout + every loss, to 1e-3.

    Source: conservation of energy; the source current comes from the solved waveforms (the
    inductor current of the boost), not from the loss rows.
    """
    assert not demo_grid.flagged.any()
    np.testing.assert_allclose(demo_grid.source_input_power, demo_grid.input_power, rtol=1e-3)


@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_energy_balance_of_every_sample(path):
    design = lb.load_design(path)
    op = design.operating
    b = lb.sweep(design, vin=[op.vin.min, op.vin.nom, op.vin.max], load_fraction=[0.1, 0.5, 1.0])
    ok = ~b.flagged
    assert ok.any()
    np.testing.assert_allclose(b.source_input_power[ok], b.input_power[ok], rtol=1e-3)
    table = b.loss_table()
    summed = table.groupby("point_id")["loss_w"].sum(min_count=1).to_numpy()
    np.testing.assert_allclose(summed[ok.ravel()], b.total_loss[ok], rtol=1e-9)


def test_gate_drive_is_qg_v_fsw(demo):
    """gate_drive = Qg·V_supply·fsw exactly; the demo's driver runs from vin through a linear
    regulator, so V_supply is the input voltage (common practice, REFERENCES §5.4)."""
    b = lb.solve(demo, vin=24.0, load=2.0)
    np.testing.assert_allclose(b.loss("driver", "gate_drive"), 35e-9 * 24.0 * 200e3, rtol=1e-12)
    np.testing.assert_allclose(b.loss("controller", "quiescent"), 3e-3 * 24.0, rtol=1e-12)


def test_infeasible_points_are_flagged_and_nan_while_others_solve(demo):
    # vin above vout: a boost cannot regulate; 18 V at 4 A with max_duty 0.3: duty too high
    raw = _demo_dict()
    raw["operating"]["vin"] = {"min": "18 V", "max": "60 V"}
    design = lb.load_design(raw)
    b = lb.solve(design, vin=np.array([24.0, 50.0]), load=2.0)
    assert not b.flagged[0] and b.flags["infeasible"][1]
    assert "below its input" in b.reason[1]
    for value in (b.efficiency[1], b.duty[1], b.loss("switch")[1],
                  b.temperature("switch")[1], b.stress("switch", "i_rms")[1]):
        assert np.isnan(value)
    assert np.isfinite(b.efficiency[0])
    raw = _demo_dict()
    raw["operating"]["max_duty"] = 0.3
    b = lb.solve(lb.load_design(raw), vin=[18.0, 32.0], load=4.0)
    assert b.flags["infeasible"][0] and "max_duty" in b.reason[0]


def test_not_modelled_names_the_key(demo):
    raw = _demo_dict()
    del raw["inductor"]["core"]
    del raw["inductor"]["winding"]
    del raw["rectifier"]["leakage"]
    b = lb.solve(lb.load_design(raw), vin=24.0, load=2.0)
    missing = {(c, m): key for c, m, key in b.not_modelled}
    assert missing[("inductor", "core")] == "inductor.core"
    assert missing[("inductor", "copper_ac")] == "inductor.winding"
    assert missing[("rectifier", "leakage")] == "rectifier.leakage"
    assert str(b.status("inductor", "core")[()]).startswith("not_modelled")


def test_zero_by_physics_carries_its_reason(demo):
    b = lb.solve(demo, vin=24.0, load=0.2)
    assert b.mode[()] == "DCM"
    assert b.loss("switch", "turn_on") == 0.0
    assert "DCM" in str(b.status("switch", "turn_on")[()])


def test_grid_equals_point_by_point(demo):
    """Contract: the broadcast result equals one-point solves (STYLE §6.3)."""
    vin = np.array([18.0, 26.0, 32.0])
    load = np.array([0.3, 2.0, 4.0])
    grid = lb.sweep(demo, vin=vin, load=load)
    for i, v in enumerate(vin):
        for j, a in enumerate(load):
            one = lb.solve(demo, vin=v, load=a)
            np.testing.assert_allclose(grid.efficiency[i, j], one.efficiency, rtol=1e-9)
            np.testing.assert_allclose(grid.temperature("switch")[i, j],
                                       one.temperature("switch"), rtol=0, atol=0.02)
            np.testing.assert_allclose(grid.loss("inductor")[i, j], one.loss("inductor"),
                                       rtol=1e-6)


@settings(max_examples=25, deadline=None, derandomize=True)
@given(vin=st.floats(18.0, 32.0), load=st.floats(0.05, 4.0), ambient=st.floats(0.0, 55.0))
def test_efficiency_in_unit_interval(vin, load, ambient):
    design = lb.load_design(DEMO)
    b = lb.solve(design, vin=vin, load=load, ambient=ambient)
    if not b.flagged:
        assert 0.0 < b.efficiency < 1.0
        assert all(np.all(v >= 0) for v in b.losses.values())


def _scaled(raw: dict, path: tuple, factor: float) -> dict:
    out = copy.deepcopy(raw)
    node = out
    for key in path[:-1]:
        node = node[key]
    value = node[path[-1]]
    if isinstance(value, str):
        number, unit = value.split(" ", 1)
        node[path[-1]] = f"{float(number) * factor} {unit}"
    else:
        node[path[-1]] = value * factor
    return out


RESISTANCES = [
    ("inductor", "dcr"),
    ("rectifier", "rd"),
    ("driver", "rg_on"),
    ("capacitor", 1, "esr", "r"),
    ("resistor", 0, "r"),
]


@settings(max_examples=20, deadline=None, derandomize=True)
@given(which=st.sampled_from(RESISTANCES), factor=st.floats(1.05, 3.0),
       vin=st.floats(18.0, 32.0), load=st.floats(0.3, 4.0))
def test_total_loss_never_falls_when_a_resistance_rises(which, factor, vin, load):
    """Property (STYLE §6.2): raising any resistance never lowers the total loss."""
    raw = _demo_dict()
    base = lb.solve(lb.load_design(raw), vin=vin, load=load)
    more = lb.solve(lb.load_design(_scaled(raw, which, factor)), vin=vin, load=load)
    if not (base.flagged or more.flagged):
        assert more.total_loss >= base.total_loss * (1 - 1e-9)


def test_rds_on_rise_raises_conduction_loss(demo):
    raw = _demo_dict()
    raw["switch"]["rds_on"] = [{"typ": "16 mohm", "at": "25 degC"},
                               {"typ": "26 mohm", "at": "125 degC"}]
    a = lb.solve(demo, vin=24.0, load=4.0)
    b = lb.solve(lb.load_design(raw), vin=24.0, load=4.0)
    assert b.loss("switch", "conduction") > 1.9 * a.loss("switch", "conduction")
    assert b.total_loss > a.total_loss


def test_worst_corner_is_hotter_than_typical(demo):
    typ = lb.solve(demo, vin=18.0, load=4.0, ambient=55.0)
    worst = lb.solve(demo, vin=18.0, load=4.0, ambient=55.0, corner="worst")
    assert worst.temperature("switch") > typ.temperature("switch")
    assert worst.total_loss > typ.total_loss
    assert worst.provenance["corner"] == "worst"


def test_load_fraction_and_inverting_sign():
    paths = [p for p in SAMPLES if "buck-boost" in lb.load_design(p).topology]
    if not paths:
        pytest.skip("no inverting sample")
    design = lb.load_design(paths[0])
    a = lb.solve(design, vin=design.operating.vin.nom, load_fraction=0.5)
    b = lb.solve(design, vin=design.operating.vin.nom, load=0.5 * design.operating.iout_rated)
    np.testing.assert_allclose(a.efficiency, b.efficiency, rtol=1e-12)
    assert a.coords["vout"] < 0
    np.testing.assert_allclose(a.output_power, abs(design.operating.vout.nom) * b.coords["load"])
