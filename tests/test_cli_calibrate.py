"""`lossbudget calibrate` through click's CliRunner: the report, the files, exit statuses."""

from __future__ import annotations

import tomllib
from pathlib import Path

from click.testing import CliRunner

import lossbudget
from lossbudget.cautions import CAUTIONS
from lossbudget.cli import main

ROOT = Path(__file__).resolve().parents[1]
DESIGN = ROOT / "sample_inputs" / "grow_light_led_boost.toml"
BENCH = ROOT / "sample_inputs" / "grow_light_led_boost_bench.csv"
FREE = "switching,board,rth.spreader"


def run(*args: str):
    return CliRunner().invoke(main, ["calibrate", *args])


def test_the_sample_bench_file_says_it_is_invented():
    head = BENCH.read_text("utf-8").splitlines()[0]
    assert head.startswith("# INVENTED bench data")


def test_calibrate_prints_factors_residuals_and_writes_every_file(tmp_path):
    out = tmp_path / "review"
    toml = tmp_path / "calibrated.toml"
    result = run(str(DESIGN), str(BENCH), "--free", FREE, "-o", str(toml), "--out", str(out))
    assert result.exit_code == 0, result.output
    text = result.stdout
    assert "calibrated against grow_light_led_boost_bench.csv (12 points, sha256 " in text
    for word in ("factor", "before", "fitted", "± std. error", "switching", "board.input",
                 "rth.spreader", "correlations:", "resid before (σ)", "resid after (σ)",
                 "temperature of switch.case", "limits predicted with the calibrated design",
                 "worst status:"):
        assert word in text, word
    assert text.count("line ") >= 12  # one residual row per measured point
    for caution in CAUTIONS:
        assert caution in text
    names = sorted(p.name for p in out.iterdir())
    assert names == ["calibration.png", "limits.csv", "limits.txt", "residuals.csv"]
    assert (out / "calibration.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # the calibrated file loads, keeps the original's comments and carries the fit's record
    original = DESIGN.read_text("utf-8")
    written = toml.read_text("utf-8")
    assert written.startswith(original.rstrip("\n"))
    d = lossbudget.load_design(toml)
    assert d.calibration.bench == BENCH.name and d.calibration.points == 12
    assert tomllib.loads(written)["calibration"]["source"]["free"] == [
        "switching", "board.input", "rth.spreader"]
    assert not list(tmp_path.glob(".*.part")) and not list(out.glob(".*.part"))
    # every later output of the calibrated file echoes the fit
    for command in (["point", str(toml)], ["check", str(toml)]):
        later = CliRunner().invoke(main, command)
        assert later.exit_code in (0, 1), later.output
        assert "calibrated against grow_light_led_boost_bench.csv, 12 points, sha256 " in (
            later.stdout.replace("\n    ", " ").replace("\n      ", " "))
    assert "calibrated against" in (out / "limits.txt").read_text("utf-8")


def test_a_bad_bench_file_is_one_line_exit_2_and_nothing_written(tmp_path):
    bench = tmp_path / "bench.csv"
    bench.write_text("vin_v,load_a,efficiency\n12,1,95.2\n", encoding="utf-8")
    toml = tmp_path / "calibrated.toml"
    result = run(str(DESIGN), str(bench), "--free", "switching", "-o", str(toml),
                 "--out", str(tmp_path / "out"))
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert lines == ["bench.csv: line 2, column efficiency: expected an efficiency below 1 "
                     "(a fraction: 0.952, not 95.2), got 95.2"]
    assert not toml.exists() and not (tmp_path / "out").exists()


def test_factors_the_points_cannot_tell_apart_are_refused_with_exit_2(tmp_path):
    bench = tmp_path / "bench.csv"
    rows = "\n".join(f"12,{a},{e}" for a, e in ((0.75, 0.961), (1.1, 0.962), (1.5, 0.96)))
    bench.write_text(f"vin_v,load_a,efficiency\n{rows}\n", encoding="utf-8")
    result = run(str(DESIGN), str(bench), "--free", "coss,quiescent")
    assert result.exit_code == 2
    (line,) = result.stderr.strip().splitlines()
    assert "coss and quiescent cannot be told apart" in line
    assert "vin all at 12 V" in line and "other input voltages" in line


def test_an_unknown_factor_is_one_line_exit_2():
    result = run(str(DESIGN), str(BENCH), "--free", "swiching")
    assert result.exit_code == 2
    assert result.stderr.strip() == (
        "free: 'swiching': unknown factor (did you mean 'switching'?); expected one of "
        "switching, coss, conduction, copper, core, quiescent, board[.position], rth.<sink>")


def test_missing_free_is_a_usage_error_exit_2():
    result = run(str(DESIGN), str(BENCH))
    assert result.exit_code == 2
    assert "--free" in result.stderr


def test_the_design_file_is_never_overwritten(tmp_path):
    copy = tmp_path / "design.toml"
    copy.write_text(DESIGN.read_text("utf-8"), encoding="utf-8")
    result = run(str(copy), str(BENCH), "--free", "switching", "-o", str(copy))
    assert result.exit_code == 2
    assert "expected a new file name" in result.stderr
    assert copy.read_text("utf-8") == DESIGN.read_text("utf-8")


def test_help_names_the_factors_and_the_exit_statuses():
    result = CliRunner().invoke(main, ["calibrate", "-h"])
    assert result.exit_code == 0
    for word in ("switching", "rth.SINK", "board.POSITION", "t_NODE_degc", "Exit"):
        assert word in result.output, word
