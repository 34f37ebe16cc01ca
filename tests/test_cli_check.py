"""`lossbudget check` through click's CliRunner: exit codes 0/1/2, --strict, the report."""

from __future__ import annotations

from importlib import resources

from click.testing import CliRunner

from lossbudget.cautions import CAUTIONS
from lossbudget.cli import main

DEMO = (resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8")


def design_file(tmp_path, *replacements: tuple[str, str], name: str = "cart.toml") -> str:
    """The demo design with text replaced (each old text must be there), written to tmp_path."""
    text = DEMO
    for old, new in replacements:
        assert old in text, old
        text = text.replace(old, new)
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


# the demo's 16 A current limit is above its inductor's hot saturation current (a fail)
PASSING = ('i_limit = "16 A"', 'i_limit = "12 A"')


def run(*args: str):
    return CliRunner().invoke(main, ["check", *args])


def test_all_ok_exits_0_with_the_table_the_corner_and_the_cautions(tmp_path):
    result = run(design_file(tmp_path, PASSING))
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "worst-case part values" in out
    for word in ("part", "quantity", "worst", "where (vin, load, ambient)", "design limit",
                 "absolute limit", "margin", "status", "basis"):
        assert word in out
    for part in ("switch", "rectifier", "inductor", "cin", "cout"):
        assert f"  {part} " in out
    assert "worst status: ok" in out
    assert "derating: moderate" in out
    # the cautions, always (wrapped at 100 columns: compare the words)
    flat = " ".join(out.split())
    for text in CAUTIONS:
        assert " ".join(text.split()) in flat
    assert result.stderr == ""


def test_a_fail_exits_1_and_still_prints_the_cautions(tmp_path):
    result = run(design_file(tmp_path, PASSING, ('vds_rated = "100 V"', 'vds_rated = "50 V"')))
    assert result.exit_code == 1
    line = next(ln for ln in result.stdout.splitlines() if ln.strip().startswith("switch")
                and " v_pk " in ln)
    assert "fail" in line and "50 V" in line
    assert "worst status: fail" in result.stdout
    assert result.stdout.count("caution: ") == len(CAUTIONS)


def test_the_registered_command_checks_the_embedded_demo(tmp_path):
    demo = str(resources.files("lossbudget") / "data" / "demo.toml")
    # the demo as shipped passes: exit 0. Two rows by hand from the design file: the boost
    # switch blocks vout + Vf0 + v_spike; at the coldest corner (0 degC) the worst Vf0 is
    # (0.42 + 0.0011·25) V · 0.47/0.42 = 0.50 V, so 48 + 0.50 + 6 = 54.5 V, under its design
    # limit 80 V (80 % of 100 V, the moderate profile's mosfet row); the input bank sees
    # vin max 32 V against 35 V (70 % of 50 V): margin (35 - 32)/35 = +8.6 %
    result = run(demo)
    assert result.exit_code == 0, result.output
    assert "worst status: ok" in result.stdout
    assert "Motor-bus boost for a warehouse cart" in result.stdout
    rows = {tuple(ln.split()[:2]): ln for ln in result.stdout.splitlines() if ln.startswith("  ")}
    assert "54.5 V" in rows["switch", "v_pk"] and "80 V" in rows["switch", "v_pk"]
    assert "32 V" in rows["cin", "v_pk"] and "+8.6 %" in rows["cin", "v_pk"]


def test_a_caution_exits_0_and_1_with_strict(tmp_path):
    # 64 V part: 54.5 V peak passes its rating but not the 80 % design limit
    path = design_file(tmp_path, PASSING, ('vds_rated = "100 V"', 'vds_rated = "64 V"'))
    loose = run(path)
    assert loose.exit_code == 0, loose.output
    assert "worst status: caution" in loose.stdout
    strict = run(path, "--strict")
    assert strict.exit_code == 1
    assert strict.stdout == loose.stdout


def test_derating_option_picks_the_profile(tmp_path):
    path = design_file(tmp_path, PASSING)
    cons = run(path, "--derating", "conservative")
    assert "derating: conservative" in cons.stdout
    assert "MIL-DTL-917" in " ".join(cons.stdout.split())
    none = run(path, "--derating", "none")
    assert none.exit_code == 0 and "absolute rating" in none.stdout


def test_bad_design_exits_2_with_one_line_and_nothing_on_stdout(tmp_path):
    path = design_file(tmp_path, ('vds_rated = "100 V"', 'vds_rated = "100 uF"'),
                       name="bad.toml")
    result = run(path)
    assert result.exit_code == 2
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "bad.toml" in lines[0] and "switch.vds_rated" in lines[0]


def test_bad_margin_table_exits_2(tmp_path):
    table = '\n\n[limits.margins]\nmosfet = { vds = "20 %" }'
    path = design_file(tmp_path, ('derating = "moderate"\n', ""),
                       ('v_spike = "6 V"', 'v_spike = "6 V"' + table), name="margins.toml")
    result = run(path)
    assert result.exit_code == 2 and result.stdout == ""
    assert "limits.margins.mosfet.vds" in result.stderr and len(result.stderr.splitlines()) == 1


def test_missing_file_and_unknown_profile_exit_2(tmp_path):
    missing = run(str(tmp_path / "nowhere.toml"))
    assert missing.exit_code == 2 and missing.stdout == ""
    assert "nowhere.toml" in missing.stderr
    wrong = run(design_file(tmp_path, PASSING), "--derating", "lax")
    assert wrong.exit_code == 2 and len(wrong.stderr.strip().splitlines()) == 1
