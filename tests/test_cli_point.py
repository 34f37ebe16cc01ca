"""`lossbudget point` through click's CliRunner: exit codes, output, one-line errors."""

from __future__ import annotations

from importlib import resources

from click.testing import CliRunner

import lossbudget as lb
from lossbudget.cli import main

DEMO = str(resources.files("lossbudget") / "data" / "demo.toml")


def test_point_prints_every_mechanism_and_matches_solve():
    result = CliRunner().invoke(main, ["point", DEMO, "--vin", "20 V", "--load", "3 A"])
    assert result.exit_code == 0, result.output
    out = result.output
    for word in ("conduction", "turn_on", "copper_ac", "core", "gate_drive", "temperature",
                 "caution", "not_applicable"):
        assert word in out
    budget = lb.solve(lb.load_design(DEMO), vin=20.0, load=3.0)
    assert f"efficiency {float(budget.efficiency) * 100:.2f} %" in out
    assert f"{float(budget.loss('switch', 'conduction')):.4f}" in out


def test_point_load_percent_and_worst_corner():
    result = CliRunner().invoke(main, ["point", DEMO, "--load-pct", "50", "--corner", "worst",
                                       "--ambient", "55 degC"])
    assert result.exit_code == 0, result.output
    assert "worst part values" in result.output
    assert "load 2 A" in result.output


def test_point_flagged_point_says_why_and_exits_4():
    # a boost cannot step 60 V down to its 48 V output (common practice: vout > vin)
    result = CliRunner().invoke(main, ["point", DEMO, "--vin", "60 V"])
    assert result.exit_code == 4
    assert "not solved" in result.stdout and "below its input" in result.stdout
    assert result.stderr.strip().count("\n") == 0 and "could not be solved" in result.stderr


def test_point_bad_quantity_is_one_line_exit_2():
    result = CliRunner().invoke(main, ["point", DEMO, "--vin", "24 A"])
    assert result.exit_code == 2
    assert result.stderr.strip().count("\n") == 0
    assert "--vin" in result.stderr and "voltage" in result.stderr


def test_point_missing_file_exit_2(tmp_path):
    result = CliRunner().invoke(main, ["point", str(tmp_path / "none.toml")])
    assert result.exit_code == 2
    assert "none.toml" in result.stderr
