"""`lossbudget export` through click's CliRunner: the grid, the writers, one-line errors.

Files go under tmp_path only. The reference for the numbers is the library call the command
stands for (``sweep`` over the same axes); the axes themselves are numpy's linspace and
geomspace.
"""

from __future__ import annotations

import json
import os
from importlib import resources
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from click.testing import CliRunner

import lossbudget as lb
from lossbudget.cli import main

DEMO = str(resources.files("lossbudget") / "data" / "demo.toml")


def _export(*args):
    return CliRunner().invoke(main, ["export", DEMO, *args])


def _map(path):
    rows = list(openpyxl.load_workbook(path)["Map"].iter_rows(values_only=True))
    loads = np.array(rows[0][1:], dtype=float)
    vins, eff = [], []
    for row in rows[1:]:
        if row[0] is None:
            break
        vins.append(row[0])
        eff.append([np.nan if v is None else v for v in row[1:]])
    return np.array(vins), loads, np.array(eff)


def test_export_workbook_with_its_grid(tmp_path):
    path = tmp_path / "budget.xlsx"
    result = _export("-o", str(path), "--vin", "18:32:3", "--load", "0.5:4:5", "--no-limits")
    assert result.exit_code == 0, result.output
    assert str(path) in result.output and "workbook" in result.output
    assert "caution" in result.output
    vins, loads, eff = _map(path)
    np.testing.assert_allclose(vins, np.linspace(18, 32, 3), rtol=1e-15)
    np.testing.assert_allclose(loads, np.linspace(0.5, 4, 5), rtol=1e-15)
    want = lb.sweep(lb.load_design(DEMO), vin=np.linspace(18, 32, 3),
                    load=np.linspace(0.5, 4, 5))
    # the workbook holds 16 significant digits (openpyxl writes "%.16g"): see test_workbook
    np.testing.assert_allclose(eff, want.efficiency, rtol=1e-15, equal_nan=True)
    summary = [r[0] for r in openpyxl.load_workbook(path)["Summary"].iter_rows(values_only=True)]
    assert "limit check" in summary  # "not run" with --no-limits
    assert os.listdir(tmp_path) == ["budget.xlsx"]


def test_export_units_percent_log_corner_and_ambient(tmp_path):
    path = tmp_path / "b.xlsx"
    result = _export("-o", str(path), "--vin", "18 V:24 V:2", "--load-pct", "10:100:3",
                     "--log-load", "--corner", "worst", "--ambient", "40 degC", "--no-limits")
    assert result.exit_code == 0, result.output
    assert "worst part values" in result.output and "40 degC" in result.output
    vins, loads, _ = _map(path)
    rated = lb.load_design(DEMO).operating.iout_rated
    np.testing.assert_allclose(vins, [18.0, 24.0], rtol=1e-15)
    # the map's axis labels hold 4 significant digits (as the tables print them): within
    # half a unit of the 4th digit
    np.testing.assert_allclose(loads, rated * np.geomspace(0.1, 1.0, 3), rtol=5e-4)
    points = pd.read_excel(path, sheet_name="Points", engine="openpyxl")
    assert set(points["ambient_degc"]) == {40.0}
    texts = [r[1] for r in openpyxl.load_workbook(path)["Summary"].iter_rows(values_only=True)
             if r[0] == "corner"]
    assert texts[0] == "worst"


def test_export_with_limits_puts_the_check_on_the_summary(tmp_path):
    limits = pytest.importorskip("lossbudget.limits")
    path = tmp_path / "b.xlsx"
    result = _export("-o", str(path), "--vin", "18:32:2", "--load", "1:4:2")
    assert result.exit_code == 0, result.output
    report = limits.check_limits(lb.load_design(DEMO))
    assert f"worst status {report.worst_status}" in result.output
    rows = {r[0]: r for r in openpyxl.load_workbook(path)["Summary"].iter_rows(values_only=True)
            if r[0]}
    assert rows["worst status"][1] == report.worst_status


def test_export_csv_writes_three_tables(tmp_path):
    path = tmp_path / "run.csv"
    result = _export("-o", str(path), "--vin", "18:32:3", "--load", "0.5:4:5")
    assert result.exit_code == 0, result.output
    names = sorted(os.listdir(tmp_path))
    assert names == ["run-losses.csv", "run-stresses.csv", "run.csv"]
    for name in names:
        assert str(tmp_path / name) in result.output
    want = lb.sweep(lb.load_design(DEMO), vin=np.linspace(18, 32, 3),
                    load=np.linspace(0.5, 4, 5))
    points = pd.read_csv(path)
    np.testing.assert_allclose(points["efficiency"], want.efficiency.ravel(), rtol=0, atol=0)
    losses = pd.read_csv(tmp_path / "run-losses.csv")
    np.testing.assert_allclose(losses["loss_w"], want.loss_table()["loss_w"], rtol=0, atol=0)
    stresses = pd.read_csv(tmp_path / "run-stresses.csv")
    np.testing.assert_allclose(stresses["i_rms_a"], want.stress_table()["i_rms_a"], rtol=0,
                               atol=0, equal_nan=True)


def test_export_json(tmp_path):
    path = tmp_path / "run.json"
    result = _export("-o", str(path), "--vin", "18:32:3", "--load", "0.5:4:5")
    assert result.exit_code == 0, result.output
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["provenance"]["checksum_sha256"] == lb.load_design(DEMO).checksum
    assert len(doc["point_table"]) == 15
    assert doc["cautions"]
    assert os.listdir(tmp_path) == ["run.json"]


def _one_line(result):
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    return lines[0]


def test_missing_folder_is_one_line_exit_2(tmp_path):
    target = tmp_path / "nowhere" / "b.xlsx"
    line = _one_line(_export("-o", str(target), "--vin", "18:32:2", "--load", "1:4:2"))
    assert str(target) in line and "does not exist" in line
    assert os.listdir(tmp_path) == []


def test_bad_design_is_one_line_exit_2_and_writes_nothing(tmp_path):
    bad = tmp_path / "cart.toml"
    text = Path(DEMO).read_text(encoding="utf-8")
    assert text.count('dcr = "12 mohm"') == 1
    bad.write_text(text.replace('dcr = "12 mohm"', 'dcr = "12 mH"'), encoding="utf-8")
    target = tmp_path / "b.xlsx"
    result = CliRunner().invoke(main, ["export", str(bad), "-o", str(target)])
    line = _one_line(result)
    assert "cart.toml" in line and "inductor.dcr" in line and "resistance" in line
    assert not target.exists()


@pytest.mark.parametrize(("args", "words"), [
    (["-o", "b.txt"], ["b.txt", ".xlsx"]),
    (["-o", "b.xlsx", "--vin", "18:32"], ["--vin", "START:STOP:COUNT"]),
    (["-o", "b.xlsx", "--load", "1:2:3", "--load-pct", "5:100:3"], ["--load", "--load-pct"]),
    (["-o", "b.xlsx", "--load", "1 V:2 V:3"], ["--load", "current"]),
    (["-o", "b.xlsx", "--corner", "best"], ["--corner"]),
    (["--vin", "18:32:3"], ["--output"]),
])
def test_bad_options_are_one_line_exit_2(tmp_path, args, words):
    args = [str(tmp_path / a) if a.startswith("b.") else a for a in args]
    line = _one_line(_export(*args))
    for word in words:
        assert word in line
    assert os.listdir(tmp_path) == []


def test_a_failing_writer_leaves_the_previous_file(tmp_path, monkeypatch):
    path = tmp_path / "b.xlsx"
    assert _export("-o", str(path), "--vin", "18:32:2", "--load", "1:4:2",
                   "--no-limits").exit_code == 0
    before = path.read_bytes()

    def save(self, filename):
        with open(filename, "wb") as handle:
            handle.write(b"PK\x03\x04 half")
        raise OSError(28, "No space left on device (test)")

    monkeypatch.setattr(openpyxl.Workbook, "save", save)
    line = _one_line(_export("-o", str(path), "--vin", "18:32:2", "--load", "1:4:2",
                             "--no-limits"))
    assert "No space left" in line
    assert path.read_bytes() == before
    assert os.listdir(tmp_path) == ["b.xlsx"]


def test_help_states_units_and_suffixes():
    result = CliRunner().invoke(main, ["export", "-h"])
    assert result.exit_code == 0
    for word in ("[V]", "[A]", "[%]", "degC", ".xlsx", ".csv", ".json", "--no-limits"):
        assert word in result.output
