"""Tests of ``lossbudget map`` and ``lossbudget demo`` through click's CliRunner."""

from __future__ import annotations

import importlib.resources
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from numpy.testing import assert_allclose

import lossbudget
from lossbudget.cli import main

DEMO = str(importlib.resources.files("lossbudget") / "data" / "demo.toml")
SMALL = ["--vin", "18 V:32 V:3", "--load-pct", "10:100:4"]
PLOTS = ("efficiency_map", "efficiency_curves", "loss_breakdown", "temperatures", "loss_bars")


@pytest.fixture(autouse=True)
def _in_tmp_path(tmp_path, monkeypatch):
    """Run every command from inside tmp_path, so a stray relative path stays there too."""
    monkeypatch.chdir(tmp_path)


def _run(args, cwd):
    result = CliRunner().invoke(main, args)
    leftovers = [p.name for p in cwd.iterdir()]
    assert all(not n.startswith(".") for n in leftovers), leftovers  # no temporary files
    return result


def test_map_writes_plots_tables_and_summary(tmp_path):
    out = tmp_path / "out"
    result = _run(["map", DEMO, *SMALL, "--out", str(out)], tmp_path)
    assert result.exit_code == 0, result.stdout + result.stderr
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted([*(f"{p}.png" for p in PLOTS), "points.csv", "losses.csv"])
    text = result.stdout
    assert "peak efficiency" in text
    assert "at rated load (4 A)" in text
    for name in ("european", "cec", "mean_25_100", "at_10pct"):
        assert name in text
    assert "EN 50530" in text and "caution:" in text
    for p in PLOTS:
        assert str(out / f"{p}.png") in text
    # the point table holds the map, in the sweep's order (axis 0 vin, axis 1 load)
    points = pd.read_csv(out / "points.csv")
    assert len(points) == 12
    d = lossbudget.load_design(DEMO)
    one = lossbudget.solve(d, vin=32.0, load_fraction=0.4)
    row = points[(points.vin_v == 32.0) & np.isclose(points.load_a, 1.6)]
    assert len(row) == 1
    # tolerance: the coupled solve's 0.01 K stopping error between batches (SPEC §2.7)
    assert_allclose(row.efficiency.iloc[0], float(one.efficiency), rtol=1e-5)
    losses = pd.read_csv(out / "losses.csv")
    assert set(losses.point_id) == set(points.point_id)


def test_map_with_units_log_axis_ambient_and_svg(tmp_path):
    out = tmp_path / "svg"
    result = _run(["map", DEMO, "--vin", "20:30:2", "--load", "0.4 A:4 A:3", "--log-load",
                   "--ambient", "40 degC", "--format", "svg", "--out", str(out)], tmp_path)
    assert result.exit_code == 0, result.stderr
    assert (out / "efficiency_map.svg").read_bytes().startswith(b"<?xml")
    points = pd.read_csv(out / "points.csv")
    # hand calculation: 0.4 to 4 A in 2 steps on a log axis is 0.4, 1.265, 4 A (ratio √10)
    assert_allclose(sorted(set(points.load_a)), [0.4, 0.4 * 10**0.5, 4.0], rtol=1e-9)
    assert set(points.ambient_degc) == {40.0}
    assert "ambient 40 degC" in result.stdout


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["--vin", "18:32"], "--vin: expected START:STOP:COUNT"),
        (["--vin", "18 A:32 V:4"], "--vin start: expected voltage"),
        (["--vin", "18:32:x"], "integer point count"),
        (["--load-pct", "0:100:5", "--log-load"], "above 0 on a logarithmic axis"),
        (["--load", "4:0.2:5"], "--load: load axis: expected start <= stop"),
        (["--load", "1:2:3", "--load-pct", "5:100:4"], "not both"),
        (["--ambient", "40"], "--ambient"),
        (["--format", "gif"], "--format"),
    ],
)
def test_bad_option_is_one_line_exit_2_and_writes_nothing(tmp_path, args, needle):
    out = tmp_path / "never"
    result = _run(["map", DEMO, *args, "--out", str(out)], tmp_path)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert needle in lines[0]
    assert result.stdout == ""
    assert not out.exists()


def test_missing_design_file_is_one_line_exit_2(tmp_path):
    missing = tmp_path / "no-such-design.toml"
    result = _run(["map", str(missing), "--out", str(tmp_path / "o")], tmp_path)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "no-such-design.toml" in lines[0]
    assert not (tmp_path / "o").exists()


def test_long_table_is_skipped_above_the_threshold(tmp_path, monkeypatch):
    # The threshold is ~1e5 points; lower it so a small map shows the behaviour.
    monkeypatch.setattr("lossbudget.commands.mapping.LONG_TABLE_POINTS", 5)
    out = tmp_path / "big"
    result = _run(["map", DEMO, *SMALL, "--out", str(out)], tmp_path)
    assert result.exit_code == 0
    assert not (out / "losses.csv").exists()
    assert "losses.csv skipped" in result.stdout and "--long-table" in result.stdout
    result = _run(["map", DEMO, *SMALL, "--out", str(out), "--long-table"], tmp_path)
    assert (out / "losses.csv").exists()


def test_progress_goes_to_stderr_on_long_sweeps(tmp_path, monkeypatch):
    monkeypatch.setattr("lossbudget.commands.mapping.PROGRESS_POINTS", 1)
    result = _run(["map", DEMO, *SMALL, "--out", str(tmp_path / "p")], tmp_path)
    assert result.exit_code == 0, result.stderr
    assert "sweeping: 3/3 input-voltage rows (100 %)" in result.stderr, result.stderr
    assert "sweeping" not in result.stdout


def test_demo_writes_everything_into_its_folder(tmp_path):
    result = _run(["demo", "--out", "demo-out"], tmp_path)
    assert result.exit_code == 0, result.stderr
    assert [p.name for p in tmp_path.iterdir()] == ["demo-out"]
    written = {p.name for p in (tmp_path / "demo-out").iterdir()}
    assert all(not n.startswith(".") for n in written)
    assert {*(f"{p}.png" for p in PLOTS), "points.csv", "losses.csv"} <= written
    text = result.stdout
    assert "== nominal point" in text and "rectifier" in text and "forward" in text
    assert "peak efficiency" in text
    limits = "limit check" in text or "limit check skipped" in text
    workbook = "budget.xlsx" in written or "workbook skipped" in text
    assert limits and workbook
    assert text.count("caution:") >= 3
    # the limit table prints its limits with units: the demo switch's 100 V rating, derated
    # to 80 % by the moderate profile (data/derating.toml), and the margin chart beside it
    switch_v = next(ln for ln in text.splitlines() if ln.split()[:2] == ["switch", "v_pk"])
    assert "80 V" in switch_v and "100 V" in switch_v
    assert "margins.png" in written


def test_import_leaves_heavy_libraries_out():
    # SPEC §3: `import lossbudget` (and the CLI module behind `lossbudget --help`) import
    # neither matplotlib, pandas, scipy nor openpyxl.
    code = (
        "import sys\n"
        "import lossbudget, lossbudget.cli\n"
        "heavy = ('matplotlib', 'pandas', 'scipy', 'openpyxl')\n"
        "print(sorted(m for m in sys.modules if m.split('.')[0] in heavy))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"
