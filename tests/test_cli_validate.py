"""The command line through click's CliRunner: validate, exit codes, stderr, --version, -h.

The exit codes are the ones SPEC §6 fixes (0 ok, 1 a limit check failed, 2 bad input); files
are written only under tmp_path.
"""

from __future__ import annotations

import importlib.metadata
import inspect
import subprocess
import sys
from importlib import resources
from pathlib import Path

import pytest
from click.testing import CliRunner

import lossbudget
from lossbudget import cli
from lossbudget.cli import main

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_inputs").glob("*.toml"))
DEMO_TEXT = (resources.files("lossbudget") / "data" / "demo.toml").read_text(encoding="utf-8")


def runner() -> CliRunner:
    # click 8.1 mixes stderr into stdout unless told; 8.2 and later keep them apart always.
    if "mix_stderr" in inspect.signature(CliRunner.__init__).parameters:
        return CliRunner(mix_stderr=False)
    return CliRunner()


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_validate_prints_the_resolved_table(tmp_path):
    path = write(tmp_path, "cart.toml", DEMO_TEXT)
    result = runner().invoke(main, ["validate", str(path)])
    assert result.exit_code == 0, result.stderr
    out = result.stdout.splitlines()
    assert out[0] == "Motor-bus boost for a warehouse cart (cart.toml): valid"
    rows = {line.split()[0]: line for line in out if line.startswith(("inductor.", "switch."))}
    assert rows["inductor.l.typ"].split()[1:] == ["22", "uH"]
    assert rows["inductor.core.ve"].split()[1:] == ["11.4", "cm3"]
    assert rows["switch.rds_on[0].max"].split()[1:] == ["10", "mohm"]
    # aligned: every value of the parameter table starts in the same column
    header = next(n for n, line in enumerate(out) if line.startswith("parameter"))
    column = out[header].index("value")
    body = out[header + 2 : out.index("", header)]
    assert len(body) > 50
    assert all(line[column - 2 : column] == "  " and line[column] != " " for line in body)
    assert "default applied" in result.stdout
    assert "operating.dcm_turn_on" in result.stdout
    assert result.stderr == ""


@pytest.mark.parametrize("path", SAMPLES, ids=[p.name for p in SAMPLES])
def test_validate_every_sample(path):
    result = runner().invoke(main, ["validate", str(path)])
    assert result.exit_code == 0, result.stderr
    assert f"({path.name}): valid" in result.stdout


def test_bad_design_one_line_per_problem_on_stderr(tmp_path):
    text = DEMO_TEXT.replace('l = { typ = "22 uH", min = "19.8 uH" }', 'l = "22 uF"')
    text = text.replace('ve = "11.4 cm3", ', "")
    text = text.replace('sink = "board" }', 'sink = "heatsink" }', 1)
    path = write(tmp_path, "cart.toml", text)
    result = runner().invoke(main, ["validate", str(path)])
    assert result.exit_code == 2
    assert result.stdout == ""  # nothing half-written
    # in the loader's order: blocks first, cross-references (the thermal sinks) last
    assert result.stderr.splitlines() == [
        'cart.toml: inductor.l: expected inductance (H), got "22 uF"',
        "cart.toml: inductor.core.ve: missing required key",
        "cart.toml: switch.thermal.sink: no sink named 'heatsink' (sinks: board)",
    ]
    assert "Traceback" not in result.stderr
    assert isinstance(result.exception, SystemExit)  # a clean exit, not an escaped error


def test_malformed_toml_is_one_line(tmp_path):
    path = write(tmp_path, "broken.toml", "[design\n")
    result = runner().invoke(main, ["validate", str(path)])
    assert result.exit_code == 2
    assert len(result.stderr.splitlines()) == 1
    assert result.stderr.startswith("broken.toml: not valid TOML")


def test_missing_file_is_one_line(tmp_path):
    result = runner().invoke(main, ["validate", str(tmp_path / "absent.toml")])
    assert result.exit_code == 2
    assert len(result.stderr.splitlines()) == 1
    assert "cannot read the design file" in result.stderr


@pytest.mark.parametrize(
    ("args", "text"),
    [
        (["validate"], "Missing argument 'DESIGN'"),
        (["validate", "a.toml", "--bogus"], "No such option"),
        (["valdate", "a.toml"], "No such command 'valdate'"),
    ],
)
def test_usage_errors_are_one_line_with_exit_2(args, text):
    result = runner().invoke(main, args)
    assert result.exit_code == 2
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("lossbudget: ")
    assert text in lines[0]


def test_debug_shows_the_traceback_and_keeps_exit_2(tmp_path):
    path = write(tmp_path, "cart.toml", DEMO_TEXT.replace('fsw = "200 kHz"', 'fsw = "200 kHF"'))
    result = runner().invoke(main, ["--debug", "validate", str(path)])
    assert result.exit_code == 2
    assert "Traceback (most recent call last)" in result.stderr
    assert "lossbudget.errors.DesignError" in result.stderr
    assert "operating.fsw" in result.stderr.strip().splitlines()[-1]


def test_internal_error_is_one_line_with_exit_3(tmp_path, monkeypatch):
    def broken(path):
        raise RuntimeError("boom")

    monkeypatch.setattr(cli, "read_design", broken)
    result = runner().invoke(main, ["validate", str(tmp_path / "x.toml")])
    assert result.exit_code == 3
    assert result.stderr.splitlines() == [
        "lossbudget: internal error (RuntimeError: boom); run again with --debug for the traceback"
    ]


def test_warnings_go_to_stderr_and_exit_0(tmp_path):
    text = DEMO_TEXT.replace(
        'thermal = { rth_jc = "0.9 K/W", rth_cs = "0.4 K/W", sink = "board" }',
        'thermal = { rth_ja = "40 K/W" }',
    )
    path = write(tmp_path, "cart.toml", text)
    result = runner().invoke(main, ["validate", str(path)])
    assert result.exit_code == 0
    assert result.stderr.startswith("warning: cart.toml: switch.thermal.rth_ja: ")


def test_version():
    result = runner().invoke(main, ["--version"])
    assert result.exit_code == 0
    assert result.stdout.strip() == f"lossbudget {lossbudget.__version__}"
    # the package's version and the installed metadata agree (pyproject.toml)
    assert lossbudget.__version__ == importlib.metadata.version("lossbudget")


@pytest.mark.parametrize("flag", ["-h", "--help"])
def test_help_names_the_exit_codes(flag):
    result = runner().invoke(main, [flag])
    assert result.exit_code == 0
    text = " ".join(result.stdout.split())
    assert "validate" in text
    for status in ("0 done", "1 a limit check failed", "2 bad input", "3 an internal error",
                   "4 no point could be solved", "130 interrupted by SIGINT",
                   "143 stopped by SIGTERM"):
        assert status in text
    assert "--debug" in text


def test_readme_lists_every_exit_status():
    from lossbudget.commands.common import EXIT_STATUSES

    readme = (Path(__file__).parents[1] / "README.md").read_text(encoding="utf-8")
    table = readme.split("## Exit status", 1)[1].split("\n## ", 1)[0]
    listed = [int(line.split("|")[1]) for line in table.splitlines()
              if line.startswith("| ") and line.split("|")[1].strip().isdigit()]
    assert listed == [code for code, _ in EXIT_STATUSES]


def test_command_help():
    result = runner().invoke(main, ["validate", "-h"])
    assert result.exit_code == 0
    assert "DESIGN" in result.stdout


def test_python_dash_m_and_help_stay_light():
    # SPEC §3: `lossbudget --help` imports neither matplotlib, openpyxl, pandas nor scipy.
    code = (
        "import runpy, sys\n"
        "sys.argv = ['lossbudget', '--help']\n"
        "try:\n"
        "    runpy.run_module('lossbudget', run_name='__main__')\n"
        "except SystemExit as exc:\n"
        "    assert exc.code in (0, None), exc.code\n"
        "heavy = {'matplotlib', 'openpyxl', 'pandas', 'scipy'}\n"
        "print(sorted(heavy & {m.split('.')[0] for m in sys.modules}))\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=60, check=True
    )
    assert "Usage: lossbudget" in done.stdout
    assert done.stdout.strip().splitlines()[-1] == "[]"


def test_python_dash_m_version():
    done = subprocess.run(
        [sys.executable, "-m", "lossbudget", "--version"],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == f"lossbudget {lossbudget.__version__}"
