"""The workbook a design review uses as it is, read back with openpyxl: exact nominal input
voltage, axis labels as the tables print them, the efficiency chart's axis on the data, the
thermal network on the thermal sheet."""

from __future__ import annotations

from importlib import resources

import numpy as np
import openpyxl
import pytest

import lossbudget as lb
from lossbudget.output.workbook import write_workbook

DEMO = resources.files("lossbudget") / "data" / "demo.toml"
# 8 input voltages from 18 V to 32 V: steps of 2 V, so the 24 V nominal IS on this grid; 7
# steps of 14/6 V are not (18, 20.333.., 22.666.., 25, ...), the case of the issue
VIN = np.linspace(18.0, 32.0, 7)
LOAD = np.linspace(0.4, 4.0, 7)


@pytest.fixture(scope="module")
def design():
    return lb.load_design(DEMO)


@pytest.fixture(scope="module")
def wb(tmp_path_factory, design):
    budget = lb.sweep(design, vin=VIN, load=LOAD)
    path = tmp_path_factory.mktemp("wbr") / "budget.xlsx"
    write_workbook(path, budget=budget, design=design)
    return openpyxl.load_workbook(path)


def test_nominal_point_and_breakdown_are_solved_at_exactly_24_v(wb, design):
    rows = {r[0]: r for r in wb["Summary"].iter_rows(values_only=True) if r and r[0]}
    exact = lb.solve(design, vin=24.0, load=4.0)  # the demo's nominal vin and rated load
    eff = rows["efficiency at the nominal point"]
    assert eff[3] == 24.0 and eff[4] == 4.0
    assert eff[1] == pytest.approx(float(exact.efficiency), rel=1e-12)
    charts = wb["Charts"]
    assert charts["A1"].value == "Loss by component at vin = 24 V (W)"
    header = [c.value for c in charts[2]]
    row = lb.solve(design, vin=24.0, load=LOAD)
    got = [r[header.index("switch_w")]
           for r in charts.iter_rows(min_row=3, max_row=2 + LOAD.size, values_only=True)]
    np.testing.assert_allclose(got, row.loss("switch"), rtol=1e-12)
    # the efficiency curves' table: the design's 18, 24 and 32 V, each solved exactly
    start = next(k for k, r in enumerate(charts.iter_rows(values_only=True), start=1)
                 if r[0] == "Efficiency at the design's input voltages (solved exactly)")
    assert [c.value for c in charts[start + 1]][:4] == [
        "load_a", "efficiency at vin 18 V", "efficiency at vin 24 V", "efficiency at vin 32 V"]
    table = np.array([r[:4] for r in charts.iter_rows(min_row=start + 2,
                                                       max_row=start + 1 + LOAD.size,
                                                       values_only=True)], float)
    np.testing.assert_allclose(table[:, 0], LOAD, rtol=1e-15)
    for k, vin in enumerate((18.0, 24.0, 32.0), start=1):
        np.testing.assert_allclose(table[:, k], lb.solve(design, vin=vin, load=LOAD).efficiency,
                                   rtol=1e-12)


def test_map_axis_labels_hold_no_sixteen_digit_floats(wb):
    ws = wb["Map"]
    labels = [c.value for c in ws[1][1:]] + [ws.cell(row=k, column=1).value for k in (2, 3, 4)]
    for value in labels:
        assert len(repr(float(value)).replace("0.", "").lstrip("-")) <= 6, value
    assert ws.cell(row=3, column=1).value == 20.33  # 18 + 14/6 V to 4 significant digits


def test_efficiency_chart_axis_is_scaled_to_the_data(wb):
    chart = wb["Charts"]._charts[0]
    eff = np.array([[np.nan if v is None else v for v in r[1:4]]
                    for r in wb["Charts"].iter_rows(min_row=3 + LOAD.size + 3,
                                                     max_row=2 + 2 * LOAD.size + 3,
                                                     values_only=True)], float)
    lo, hi = chart.y_axis.scaling.min, chart.y_axis.scaling.max
    assert lo <= np.nanmin(eff) and hi >= np.nanmax(eff)
    # within a whole percent (plus rounding) of the data, not an automatic 75-100 %
    assert np.nanmin(eff) - lo <= 0.016 and hi - np.nanmax(eff) <= 0.013
    assert series_titles(chart)[0] == "vin 18 V"


def series_titles(chart):
    return [s.tx.v for s in chart.series]


def test_thermal_sheet_lists_every_path_link_and_where_each_part_sits(wb):
    ws = wb["Thermal"]
    cells = [list(r) for r in ws.iter_rows(values_only=True)]
    start = next(k for k, c in enumerate(cells[0]) if c == "thermal network (every path and "
                 "link)")
    block = [r[start:start + 4] for r in cells if any(v is not None for v in r[start:start + 4])]
    paths = {(a, b): (r, key) for a, b, r, key in block[2:]
             if isinstance(r, int | float)}
    # the demo design file: switch rth_jc 0.9 + rth_cs 0.4 K/W to the board, rectifier
    # rth_jc 1.5 K/W to the board, inductor rth_ha 18 K/W, cin (2 parts) 60/2 K/W, cout
    # (4 parts) 60/4 K/W, the board 6 K/W to ambient
    assert paths == {
        ("switch", "switch.case"): (0.9, "switch.thermal.rth_jc"),
        ("switch.case", "board"): (0.4, "switch.thermal.rth_cs"),
        ("rectifier", "board"): (1.5, "rectifier.thermal.rth_jc"),
        ("inductor", "ambient"): (18.0, "inductor.thermal.rth_ha"),
        ("cin", "ambient"): (30.0, "cin.thermal.rth_ha / count 2"),
        ("cout", "ambient"): (15.0, "cout.thermal.rth_ha / count 4"),
        ("board", "ambient"): (6.0, "thermal.sink board: rth_to_ambient"),
    }
    sits = {r[0]: r[2] for r in block if r[0] in ("switch", "rectifier", "inductor", "cin",
                                                   "cout") and r[1] == r[0]}
    assert sits == {"switch": "board", "rectifier": "board", "inductor": "ambient (its own path)",
                    "cin": "ambient (its own path)", "cout": "ambient (its own path)"}
