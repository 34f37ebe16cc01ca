"""The workbook and the plain tables, read back with openpyxl and pandas against the Budget.

The reference for every number is the :class:`~lossbudget.Budget` the file was written from,
read back through two general-purpose readers (openpyxl and pandas); the cross-sheet checks
use the definitions of SPEC §2.2 (efficiency = output power / input power; input power =
output power + the sum of every loss row).
"""

from __future__ import annotations

import json
import os
import tempfile
import zipfile
from importlib import resources

import numpy as np
import openpyxl
import pandas as pd
import pytest

import lossbudget as lb
from lossbudget.cautions import CAUTIONS
from lossbudget.output.workbook import SHEETS, write_tables, write_workbook
from lossbudget.sweep import weighted_efficiency

DEMO = resources.files("lossbudget") / "data" / "demo.toml"
VIN = [18.0, 24.0, 47.0]  # 47 V at 50 mA is flagged (the demo boost cannot reach 48 V there)
LOAD = [0.05, 1.0, 2.0, 3.0, 4.0]
UNIT_SUFFIXES = ("_v", "_a", "_w", "_degc", "_hz", "_t", "_k")
UNITLESS = {"point_id", "efficiency", "share", "duty", "d2", "reverse_current"}


@pytest.fixture(scope="module")
def design():
    return lb.load_design(DEMO)


@pytest.fixture(scope="module")
def budget(design):
    return lb.sweep(design, vin=VIN, load=LOAD)


@pytest.fixture(scope="module")
def weighted(design):
    return weighted_efficiency(design)


@pytest.fixture(scope="module")
def report(design):
    limits = pytest.importorskip("lossbudget.limits")
    return limits.check_limits(design)


@pytest.fixture(scope="module")
def book(tmp_path_factory, budget, weighted, design, report):
    path = tmp_path_factory.mktemp("wb") / "budget.xlsx"
    out = write_workbook(path, budget=budget, report=report, weighted=weighted, design=design)
    assert out == path
    return path


@pytest.fixture(scope="module")
def wb(book):
    return openpyxl.load_workbook(book)


def _read(book, sheet):
    return pd.read_excel(book, sheet_name=sheet, engine="openpyxl")


# openpyxl writes a number with "%.16g" (16 significant digits): a value read back from the
# workbook is off by at most half a unit in the 16th digit (5e-16 relative for a leading 1) plus
# one binary rounding on reading (1.1e-16); 1e-15 covers both. CSV and JSON keep every bit.
XLSX_RTOL = 1e-15


def _assert_frame_equal(got, want, *, rtol=0.0):
    """Same columns; numbers equal within rtol (NaN where blank); text equal ("" blank)."""
    assert list(got.columns) == list(want.columns)
    assert len(got) == len(want)
    for column in want.columns:
        w = want[column]
        g = got[column]
        if w.dtype == bool:
            assert g.tolist() == w.tolist(), column
        elif w.dtype.kind in "if":
            np.testing.assert_allclose(g.to_numpy(float), w.to_numpy(float), rtol=rtol, atol=0,
                                       equal_nan=True, err_msg=column)
        else:
            # an all-blank text column reads back as float NaN: compare it as blank text
            g = g.astype(object).where(g.notna(), "")
            assert g.astype(str).tolist() == w.fillna("").astype(str).tolist(), column


def _with_reason(frame, budget):
    out = frame.copy()
    out["reason"] = np.ravel(budget.reason)[out["point_id"].to_numpy()]
    return out


# -- the tables ---------------------------------------------------------------------------------


def test_the_fixture_has_a_flagged_point(budget):
    assert budget.shape == (3, 5)
    assert budget.flagged[2, 0] and np.count_nonzero(budget.flagged) == 1
    assert budget.reason[2, 0]


def test_sheets_in_order(wb):
    assert wb.sheetnames == list(SHEETS)


def test_loss_sheet_equals_the_loss_table(book, budget):
    _assert_frame_equal(_read(book, "Losses"), _with_reason(budget.loss_table(), budget),
                        rtol=XLSX_RTOL)


def test_point_sheet_equals_the_point_table(book, budget):
    _assert_frame_equal(_read(book, "Points"), budget.point_table(), rtol=XLSX_RTOL)


AXES = ["vin_v", "vout_v", "load_a", "ambient_degc", "fsw_hz"]


def test_stress_sheet_equals_the_stress_table_with_the_operating_axes(book, budget):
    want = _with_reason(budget.stress_table(), budget)
    points = budget.point_table().set_index("point_id")
    for k, axis in enumerate(AXES, start=1):
        want.insert(k, axis, points.loc[want["point_id"], axis].to_numpy())
    _assert_frame_equal(_read(book, "Stresses"), want, rtol=XLSX_RTOL)


def test_sheets_agree_with_the_energy_balance(book):
    # Definitions, SPEC §2.2: efficiency = pout / (pout + every loss); the loss rows of a
    # point sum to the point's loss (bookkeeping to 1e-9).
    points = _read(book, "Points").set_index("point_id")
    losses = _read(book, "Losses").groupby("point_id")["loss_w"].sum(min_count=1)
    ok = points["flag"].isna()
    np.testing.assert_allclose(losses[ok], points.loc[ok, "loss_w"], rtol=1e-9)
    np.testing.assert_allclose(points.loc[ok, "pout_w"] + points.loc[ok, "loss_w"],
                               points.loc[ok, "pin_w"], rtol=1e-9)
    np.testing.assert_allclose(points.loc[ok, "pout_w"] / points.loc[ok, "pin_w"],
                               points.loc[ok, "efficiency"], rtol=1e-12)


def test_map_grid_equals_the_efficiency_and_loss(wb, budget):
    ws = wb["Map"]
    rows = list(ws.iter_rows(values_only=True))
    assert rows[0][1:] == tuple(LOAD)
    assert "vin_v" in rows[0][0] and "load_a" in rows[0][0] and "efficiency" in rows[0][0]
    eff = np.array([[np.nan if v is None else v for v in r[1:]] for r in rows[1:4]])
    assert [r[0] for r in rows[1:4]] == VIN
    np.testing.assert_allclose(eff, budget.efficiency, rtol=XLSX_RTOL, atol=0, equal_nan=True)
    assert rows[3][1] is None  # the flagged point is a blank cell, not a "nan" string
    assert "loss_w" in rows[5][0]
    loss = np.array([[np.nan if v is None else v for v in r[1:]] for r in rows[6:9]])
    np.testing.assert_allclose(loss, budget.total_loss, rtol=XLSX_RTOL, atol=0, equal_nan=True)


def test_map_has_colour_scales(wb):
    rules = {str(cf.sqref): [r.type for r in cf.rules] for cf in wb["Map"].conditional_formatting}
    assert rules == {"B2:F4": ["colorScale"], "B7:F9": ["colorScale"]}


def test_thermal_sheet_every_node_limit_and_margin(book, budget):
    got = _read(book, "Thermal")
    nodes = list(budget.temperatures)
    n = int(np.prod(budget.shape))
    assert len(got) == n * len(nodes)
    assert list(got.columns[7:12]) == ["t_degc", "t_design_limit_degc", "margin_design_k",
                                       "t_max_degc", "margin_k"]
    # the design limits after derating are those the limit check uses (the demo's moderate
    # profile: T_J,max - 25 K, hot spot - 15 K inductor, - 10 K ceramic; data/derating.toml)
    derated = {r.part: r.design_limit for r in lb.check_limits(lb.load_design(DEMO)).rows
               if r.quantity in ("t_j", "t_hot")}
    assert derated["switch"] == pytest.approx(175.0 - 25.0)
    for node in nodes:
        rows = got[got["node"] == node].sort_values("point_id")
        t = np.ravel(budget.temperature(node))
        np.testing.assert_allclose(rows["t_degc"], t, rtol=XLSX_RTOL, atol=0, equal_nan=True)
        limit = budget.temperature_limits.get(node, np.nan)
        np.testing.assert_allclose(rows["t_max_degc"], np.full(n, limit), equal_nan=True)
        np.testing.assert_allclose(rows["margin_k"], limit - t, rtol=1e-12, equal_nan=True)
        design = derated.get(node, np.nan)
        np.testing.assert_allclose(rows["t_design_limit_degc"], np.full(n, design),
                                   equal_nan=True)
        np.testing.assert_allclose(rows["margin_design_k"], design - t, rtol=1e-12,
                                   equal_nan=True)
    assert set(got.loc[got["reason"].notna(), "point_id"]) == {10}


def test_flagged_cells_blank_and_never_nan_text(wb, budget):
    for ws in wb.worksheets:
        for row in ws.iter_rows(values_only=True):
            for value in row:
                assert not (isinstance(value, str) and value.strip().lower() in ("nan", "inf"))
    points = wb["Points"]
    header = [c.value for c in points[1]]
    flagged = [c.value for c in points[2 + 10]]  # point 10: vin 47 V, 50 mA
    assert flagged[header.index("point_id")] == 10
    assert flagged[header.index("efficiency")] is None
    assert flagged[header.index("reason")] == budget.reason[2, 0]


# -- presentation ---------------------------------------------------------------------------------


@pytest.mark.parametrize("sheet", ["Losses", "Points", "Stresses", "Thermal", "Charts"])
def test_numeric_headers_carry_units(wb, sheet):
    ws = wb[sheet]
    header_row = 2 if sheet == "Charts" else 1
    header = [c.value for c in ws[header_row]]
    first = [c.value for c in ws[header_row + 1]]
    for name, value in zip(header, first, strict=True):
        if isinstance(value, int | float) and name not in UNITLESS:
            assert name.endswith(UNIT_SUFFIXES), name


def test_frozen_headers_and_filter(wb):
    frozen = {ws.title: ws.freeze_panes for ws in wb.worksheets}
    assert frozen == {"Summary": "A2", "Losses": "A2", "Map": "B2", "Charts": "A3",
                      "Thermal": "A2", "Stresses": "A2", "Points": "A2", "Inputs": "A2"}
    losses = wb["Losses"]
    assert losses.auto_filter.ref == f"A1:L{losses.max_row}"


def test_number_formats(wb):
    ws = wb["Points"]
    header = [c.value for c in ws[1]]
    cell = {name: ws.cell(row=2, column=k + 1) for k, name in enumerate(header)}
    assert cell["efficiency"].number_format == "0.00%"
    assert cell["loss_w"].number_format == "0.000"
    assert cell["t_switch_degc"].number_format == "0.0"
    losses = wb["Losses"]
    header = [c.value for c in losses[1]]
    assert losses.cell(row=2, column=header.index("share") + 1).number_format == "0.00%"


def test_column_widths_fit_the_headers_and_text(wb):
    ws = wb["Losses"]
    columns = list(ws.iter_cols(values_only=True))
    for cell, values in zip(ws[1], columns, strict=True):
        width = ws.column_dimensions[cell.column_letter].width
        assert width >= len(cell.value), cell.value
        texts = [v for v in values[1:] if isinstance(v, str)]
        if texts:  # text columns fit their longest entry (up to a cap of 60)
            assert width >= min(max(map(len, texts)), 58), cell.value
            assert cell.alignment.horizontal is None  # text headers stay left
        else:
            assert cell.alignment.horizontal == "right"  # number headers sit over the numbers


def test_native_charts(book, wb, budget):
    with zipfile.ZipFile(book) as z:
        charts = sorted(n for n in z.namelist() if n.startswith("xl/charts/chart"))
        xml = {n: z.read(n).decode() for n in charts}
    assert charts == ["xl/charts/chart1.xml", "xl/charts/chart2.xml"]
    # the efficiency curves plot the Charts sheet's table of the design's own input voltages
    assert "scatterChart" in xml[charts[0]] and "'Charts'!" in xml[charts[0]]
    assert "barChart" in xml[charts[1]] and 'val="stacked"' in xml[charts[1]]
    got = wb["Charts"]._charts
    assert [type(c).__name__ for c in got] == ["ScatterChart", "BarChart"]
    # one series per input voltage of the design: min 18, nom 24, max 32 V (design file)
    assert [s.tx.v for s in got[0].series] == ["vin 18 V", "vin 24 V", "vin 32 V"]
    assert len(got[1].series) == len(budget.components)  # stacked by component


def test_breakdown_table_is_the_nominal_input_voltage(wb, budget):
    # the demo's nominal input voltage is 24 V (design file), a grid value here
    ws = wb["Charts"]
    assert "24 V" in ws["A1"].value
    rows = list(ws.iter_rows(min_row=3, max_row=2 + len(LOAD), values_only=True))
    header = [c.value for c in ws[2]]
    assert [r[0] for r in rows] == LOAD
    for k, component in enumerate(budget.components, start=1):
        assert header[k] == f"{component}_w"
        np.testing.assert_allclose([r[k] for r in rows], budget.loss(component)[1],
                                   rtol=XLSX_RTOL, atol=0)


# -- summary and inputs ---------------------------------------------------------------------------


def _texts(ws):
    return [v for row in ws.iter_rows(values_only=True) for v in row if v is not None]


def test_summary_carries_provenance_figures_and_cautions(wb, budget, design, weighted, report):
    texts = _texts(wb["Summary"])
    prov = budget.provenance
    for item in (prov["checksum_sha256"], prov["source"], prov["tool"], prov["corner"],
                 design.name, *prov["laws"], *prov["defaults"], *CAUTIONS):
        assert item in texts, item
    rows = {r[0]: r for r in wb["Summary"].iter_rows(values_only=True) if r[0]}
    assert rows["peak efficiency"][1] == pytest.approx(np.nanmax(budget.efficiency),
                                                       rel=XLSX_RTOL, abs=0)
    k = np.unravel_index(np.nanargmax(budget.efficiency), budget.shape)
    assert rows["peak efficiency"][3:5] == (VIN[k[0]], LOAD[k[1]])
    # nominal point: vin.nom 24 V and the rated 4 A are both grid values of the fixture
    assert rows["efficiency at the nominal point"][1] == pytest.approx(budget.efficiency[1, 4],
                                                                       rel=XLSX_RTOL, abs=0)
    assert rows["total loss at the nominal point"][1] == pytest.approx(budget.total_loss[1, 4],
                                                                       rel=XLSX_RTOL, abs=0)
    values = [f.value for f in weighted]
    got = [r[1] for r in wb["Summary"].iter_rows(values_only=True)
           if r[0] in {f.name for f in weighted}]
    np.testing.assert_allclose(got, values, rtol=XLSX_RTOL, atol=0)
    assert rows["worst status"][1] == report.worst_status
    limit_rows = [r for r in wb["Summary"].iter_rows(values_only=True)
                  if r[1] in {x.quantity for x in report.rows} and r[8] in ("ok", "caution",
                                                                              "fail")]
    assert [(r[0], r[1], r[8]) for r in limit_rows] == [
        (x.part, x.quantity, x.status) for x in report.rows]
    np.testing.assert_allclose([r[3] for r in limit_rows], [x.worst for x in report.rows],
                               rtol=XLSX_RTOL, atol=0)


def test_inputs_sheet_lists_every_resolved_parameter_and_default(wb, design):
    rows = list(wb["Inputs"].iter_rows(values_only=True))
    assert rows[0] == ("parameter", "value (with unit)")
    pairs = {(r[0], r[1]) for r in rows}
    assert set(design.resolved) <= pairs
    assert set(design.defaults) <= pairs
    assert ("default applied", "value (with unit)") in rows


def test_without_design_report_or_weighted(tmp_path, budget):
    path = write_workbook(tmp_path / "bare.xlsx", budget=budget)
    wb = openpyxl.load_workbook(path)
    texts = _texts(wb["Summary"])
    assert "not run" in texts and "not given" in texts
    assert any("without the design" in t for t in texts if isinstance(t, str))
    # the defaults still come from the provenance
    names = [r[0] for r in wb["Inputs"].iter_rows(values_only=True)]
    assert "operating.dcm_turn_on" in names


def test_a_budget_that_is_no_map_still_writes(tmp_path, design):
    one = lb.solve(design, vin=24.0, load=2.0)
    wb = openpyxl.load_workbook(write_workbook(tmp_path / "one.xlsx", budget=one))
    assert wb["Map"]["A1"].value.startswith("efficiency")  # one point is a 1 × 1 map
    assert wb["Map"]["B2"].value == pytest.approx(float(one.efficiency), rel=XLSX_RTOL, abs=0)
    repeated = lb.solve(design, vin=np.array([24.0, 24.0]), load=2.0, ambient=[0.0, 40.0])
    wb = openpyxl.load_workbook(write_workbook(tmp_path / "rep.xlsx", budget=repeated))
    assert wb["Map"]["A1"].value.startswith("No map")
    assert wb["Charts"]._charts == []


# -- atomic writing -------------------------------------------------------------------------------


def _half_save_then(exc):
    def save(self, filename):
        with open(filename, "wb") as handle:
            handle.write(b"PK\x03\x04 half a workbook")
        raise exc

    return save


@pytest.mark.parametrize("exc", [RuntimeError("disk full (test)"), KeyboardInterrupt()])
def test_failed_export_leaves_the_previous_file_and_no_temporary(tmp_path, budget, monkeypatch,
                                                                 exc):
    folder = tmp_path / "out"
    folder.mkdir()
    path = folder / "budget.xlsx"
    write_workbook(path, budget=budget)
    before = path.read_bytes()
    # openpyxl buffers write-only sheets in the system's temporary folder: watch that too
    scratch = tmp_path / "scratch"
    scratch.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(scratch))
    monkeypatch.setattr(openpyxl.Workbook, "save", _half_save_then(exc))
    with pytest.raises(type(exc)):
        write_workbook(path, budget=budget)
    assert path.read_bytes() == before
    assert os.listdir(folder) == ["budget.xlsx"]
    assert os.listdir(scratch) == []


def test_failed_first_export_leaves_nothing(tmp_path, budget, monkeypatch):
    monkeypatch.setattr(openpyxl.Workbook, "save", _half_save_then(RuntimeError("test")))
    with pytest.raises(RuntimeError):
        write_workbook(tmp_path / "new.xlsx", budget=budget)
    assert os.listdir(tmp_path) == []


def test_missing_folder_is_a_clear_error(tmp_path, budget):
    target = tmp_path / "no" / "such" / "budget.xlsx"
    with pytest.raises(FileNotFoundError, match="does not exist") as info:
        write_workbook(target, budget=budget)
    assert info.value.filename == str(target)
    assert not (tmp_path / "no").exists()


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="needs a POSIX user that folder permissions apply to")
def test_read_only_folder_is_a_clear_error(tmp_path, budget):
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        with pytest.raises(PermissionError, match="not writable"):
            write_workbook(folder / "budget.xlsx", budget=budget)
    finally:
        folder.chmod(0o700)


def test_a_folder_at_the_path_and_a_wrong_suffix(tmp_path, budget):
    (tmp_path / "dir.xlsx").mkdir()
    with pytest.raises(IsADirectoryError):
        write_workbook(tmp_path / "dir.xlsx", budget=budget)
    with pytest.raises(ValueError, match=r"\.xlsx"):
        write_workbook(tmp_path / "budget.ods", budget=budget)
    with pytest.raises(ValueError, match=r"\.csv or \.json"):
        write_tables(tmp_path / "budget.xlsx", budget=budget)


def test_replacing_keeps_the_previous_permissions(tmp_path, budget):
    path = tmp_path / "budget.xlsx"
    path.write_bytes(b"old")
    path.chmod(0o640)
    write_workbook(path, budget=budget)
    assert (path.stat().st_mode & 0o777) == 0o640
    assert zipfile.is_zipfile(path)


# -- CSV and JSON ---------------------------------------------------------------------------------


def test_csv_round_trip(tmp_path, budget):
    files = write_tables(tmp_path / "run.csv", budget=budget)
    assert [f.name for f in files] == ["run.csv", "run-losses.csv", "run-stresses.csv"]
    _assert_frame_equal(pd.read_csv(files[0]), budget.point_table())
    _assert_frame_equal(pd.read_csv(files[1]), budget.loss_table())
    _assert_frame_equal(pd.read_csv(files[2]), budget.stress_table())
    assert sorted(os.listdir(tmp_path)) == sorted(f.name for f in files)


def test_json_round_trip(tmp_path, budget):
    (path,) = write_tables(tmp_path / "run.json", budget=budget)
    text = path.read_text(encoding="utf-8")
    assert "NaN" not in text
    doc = json.loads(text)
    assert doc["provenance"] == json.loads(json.dumps(budget.provenance))
    for name, table in (("point_table", budget.point_table()), ("loss_table",
                        budget.loss_table()), ("stress_table", budget.stress_table())):
        got = pd.DataFrame.from_records(doc[name], columns=list(table.columns))
        _assert_frame_equal(got, table)
    flagged = doc["point_table"][10]
    assert flagged["efficiency"] is None and flagged["reason"] == budget.reason[2, 0]


def test_failed_csv_export_replaces_none_of_the_files(tmp_path, budget, monkeypatch):
    files = write_tables(tmp_path / "run.csv", budget=budget)
    before = {f.name: f.read_bytes() for f in files}
    calls = []
    real = pd.DataFrame.to_csv

    def to_csv(self, path, **kwargs):
        calls.append(path)
        if len(calls) == 2:
            raise OSError(28, "No space left on device (test)")
        return real(self, path, **kwargs)

    monkeypatch.setattr(pd.DataFrame, "to_csv", to_csv)
    with pytest.raises(OSError, match="No space left"):
        write_tables(tmp_path / "run.csv", budget=budget)
    assert {f.name: f.read_bytes() for f in files} == before
    assert sorted(os.listdir(tmp_path)) == sorted(before)
