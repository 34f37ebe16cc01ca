"""The electro-thermal coupling through the solver: hot parts lose more, runaway is flagged."""

from __future__ import annotations

import tomllib
from importlib import resources

import numpy as np

import lossbudget as lb

DEMO = resources.files("lossbudget") / "data" / "demo.toml"


def _raw() -> dict:
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def test_network_temperatures_follow_the_node_powers():
    """Hand check of the demo network (series and shared-sink rules, REFERENCES §9.2):
    T_board = T_a + θ_SA·(P_switch + P_rect), T_case = T_board + P_sw·θ_CS,
    T_switch = T_case + P_sw·θ_JC, T_inductor = T_a + P_L·θ_HA. The switch node also carries
    the share of the gate energy burnt in its internal gate resistance (SPEC §2.2)."""
    d = lb.load_design(DEMO)
    b = lb.solve(d, vin=24.0, load=3.0, ambient=30.0)
    drv, sw = d.driver, d.switch
    share = 0.5 * sw.rg / (drv.r_source + drv.rg_on + sw.rg) + 0.5 * sw.rg / (
        drv.r_sink + drv.rg_off + sw.rg)
    p_sw = float(b.loss("switch")) + sw.qg.typ * 200e3 * drv.v_drive * share
    p_rect = float(b.loss("rectifier"))
    p_l = float(b.loss("inductor"))
    t_board = 30.0 + 6.0 * (p_sw + p_rect)
    t_case = t_board + 0.4 * p_sw
    # the solver's temperatures satisfy the network at the converged losses within its
    # 0.01 K tolerance on the fixed point
    np.testing.assert_allclose(b.temperature("board"), t_board, atol=0.02)
    np.testing.assert_allclose(b.temperature("switch.case"), t_case, atol=0.02)
    np.testing.assert_allclose(b.temperature("switch"), t_case + 0.9 * p_sw, atol=0.02)
    np.testing.assert_allclose(b.temperature("inductor"), 30.0 + 18.0 * p_l, atol=0.02)
    np.testing.assert_allclose(b.temperature("rectifier"), t_board + 1.5 * p_rect, atol=0.02)


def test_hot_parts_lose_more():
    d = lb.load_design(DEMO)
    cold = lb.solve(d, vin=20.0, load=4.0, ambient=0.0)
    hot = lb.solve(d, vin=20.0, load=4.0, ambient=50.0)
    assert hot.loss("switch", "conduction") > cold.loss("switch", "conduction")
    assert hot.loss("inductor", "copper_dc") > cold.loss("inductor", "copper_dc")
    assert hot.loss("rectifier", "leakage") > 2 * cold.loss("rectifier", "leakage")


def test_leakage_runaway_on_a_poor_sink_at_high_ambient_only():
    """A leaky rectifier on a poor board sink: it holds at a low ambient and runs away at a
    high one; the runaway point is NaN with its reason and the other points solve (SPEC §2.7).
    Leakage doubling every 10 K is common practice (REFERENCES §6)."""
    raw = _raw()
    raw["thermal"]["sink"][0]["rth_to_ambient"] = "14 K/W"
    raw["rectifier"]["leakage"]["i"] = "200 uA"
    d = lb.load_design(raw)
    b = lb.solve(d, vin=20.0, load=3.5, ambient=np.array([0.0, 25.0, 70.0]))
    assert not b.flags["runaway"][0] and not b.flags["runaway"][1]
    assert b.flags["runaway"][2]
    assert "runaway" in b.reason[2]
    assert np.isnan(b.temperature("rectifier")[2]) and np.isnan(b.efficiency[2])
    assert b.loop_gain[1] < 1.0
    assert np.all(np.isfinite(b.efficiency[:2]))


def test_extrapolated_rds_on_is_flagged():
    raw = _raw()
    raw["switch"]["rds_on"] = [{"typ": "8 mohm", "at": "25 degC"},
                               {"typ": "10 mohm", "at": "60 degC"}]
    d = lb.load_design(raw)
    b = lb.solve(d, vin=18.0, load=np.array([0.5, 4.0]), ambient=45.0)
    assert b.temperature("switch")[1] > 60.0
    assert b.flags["extrapolated"].tolist() == [False, True]
