"""Derived turn-off overshoot (SPEC §2.10): switch.loop_inductance gives L_loop·I/t_fi in
place of limits.v_spike, so the voltage check follows the current.

Check values by hand from the design's gate data: t_fi = Qgs2/I_g,off with
Qgs2 = Qgs·(V_pl − V_th)/V_pl and I_g,off = V_pl/(r_sink + rg_off + rg) (the gate-charge
estimate, common practice, REFERENCES §5.2 and SPEC §2.3), and v = L·di/dt with a linear fall
(the inductor law; Mohan, Undeland, Robbins, Power Electronics, 3rd ed., 2003, ch. 2).
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
from lossbudget.units import parse_quantity

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"


def _raw():
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def _q(text, dim):
    return parse_quantity(text, dim, where="test")


def _t_fi_by_hand(raw):
    sw, drv = raw["switch"], raw["driver"]
    v_th, v_pl = _q(sw["v_th"], "voltage"), _q(sw["v_plateau"], "voltage")
    qgs2 = _q(sw["qgs"], "charge") * (v_pl - v_th) / v_pl
    r = _q(drv["r_sink"], "resistance") + _q(drv["rg_off"], "resistance") + _q(
        sw["rg"], "resistance")
    return qgs2 / (v_pl / r)


def test_overshoot_is_loop_inductance_times_current_over_fall_time():
    raw = _raw()
    assert "qgs2" not in raw["switch"]
    raw["switch"]["loop_inductance"] = "4 nH"
    b = lb.solve(lb.load_design(raw), vin=24.0, load=np.array([1.0, 3.0, 6.0]))
    expected = 4e-9 * b.stress("switch", "i_pk") / _t_fi_by_hand(raw)
    np.testing.assert_allclose(b.stress("switch", "v_overshoot"), expected, rtol=1e-12)
    assert "replaces limits.v_spike" in " ".join(b.provenance["notes"])
    # the stress table carries it as its own column
    table = b.stress_table()
    np.testing.assert_allclose(table.loc[table.component == "switch", "v_overshoot_v"],
                               expected, rtol=1e-12)


def test_voltage_check_follows_the_current():
    """A rating between the light-load and the full-load peak: only the heavy load passes it.
    The fixed v_spike (6 V) would flag every load or none."""
    raw = _raw()
    raw["switch"]["loop_inductance"] = "6 nH"
    raw["switch"]["vds_rated"] = "55 V"
    b = lb.solve(lb.load_design(raw), vin=24.0, load=np.array([0.5, 5.0]))
    v = b.stress("switch", "v_pk") + b.stress("switch", "v_overshoot")
    assert v[0] < 55.0 < v[1]
    np.testing.assert_array_equal(b.flags["over_rating"], [False, True])
    assert "switch v_pk" in b.rating_reasons[1]
    report = lb.check_limits(lb.load_design(raw), derating="none")
    row = next(r for r in report.rows if (r.part, r.quantity) == ("switch", "v_pk"))
    assert "overshoot" in row.note


def test_without_gate_data_the_overshoot_falls_back_to_v_spike():
    raw = _raw()
    raw["switch"]["loop_inductance"] = "4 nH"
    for key in ("qgs", "qgd", "v_plateau", "v_th"):
        del raw["switch"][key]
    b = lb.solve(lb.load_design(raw), vin=24.0)
    assert ("switch", "v_overshoot") not in b.stresses
    assert "cannot be derived" in " ".join(b.provenance["notes"])
    out = CliRunner().invoke(main, ["point", str(DEMO)]).output
    assert "limits.v_spike 6 V" in out


def test_loop_inductance_belongs_to_the_switch():
    raw = tomllib.loads((Path(__file__).resolve().parents[1] / "sample_inputs" /
                         "fan_tray_sync_buck.toml").read_text(encoding="utf-8"))
    raw["rectifier"]["loop_inductance"] = "3 nH"
    with pytest.raises(lb.DesignError, match=r"rectifier\.loop_inductance: applies to \[switch\]"):
        lb.load_design(raw)
