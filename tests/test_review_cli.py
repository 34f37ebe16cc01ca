"""Review-ready text outputs: derating rows in one form, limit tables with units, grouped
reasons, hints on suspicious values (through click's CliRunner)."""

from __future__ import annotations

from importlib import resources

import numpy as np
from click.testing import CliRunner

from lossbudget.cli import main

DEMO_PATH = resources.files("lossbudget") / "data" / "demo.toml"
DEMO = DEMO_PATH.read_text("utf-8")


def design_file(tmp_path, *replacements: tuple[str, str], name: str = "cart.toml") -> str:
    """The demo design with text replaced (each old text must be there), written to tmp_path."""
    text = DEMO
    for old, new in replacements:
        assert old in text, old
        text = text.replace(old, new)
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return str(path)


def run(*args: str):
    return CliRunner().invoke(main, list(args))


NO_PROFILE = ('derating = "moderate"\n', "")


def test_a_margin_keyed_by_a_part_name_is_refused_once_by_validate_and_check(tmp_path):
    table = '\n\n[limits.margins]\nswitch = { v_pk = { use_up_to = "75 %" } }\n'
    path = design_file(tmp_path, NO_PROFILE, ('v_spike = "6 V"', 'v_spike = "6 V"' + table))
    for command in ("validate", "check"):
        result = run(command, path)
        assert result.exit_code == 2, command
        lines = result.stderr.strip().splitlines()
        assert len(lines) == 1, (command, lines)  # once, not twice
        assert "limits.margins.switch" in lines[0] and "mosfet" in lines[0]


def test_use_up_to_is_the_share_of_the_rating(tmp_path):
    # use_up_to = "75 %" on the demo's 100 V switch: a 75 V design limit (not 25 V)
    table = ('\n\n[limits.margins]\nmosfet = { v_pk = { use_up_to = "75 %" } }\n')
    path = design_file(tmp_path, NO_PROFILE, ('v_spike = "6 V"', 'v_spike = "6 V"' + table),
                       ('i_limit = "16 A"', 'i_limit = "12 A"'))
    result = run("check", path)
    line = next(ln for ln in result.stdout.splitlines() if ln.strip().startswith("switch")
                and " v_pk " in ln)
    assert "75 V" in line and "100 V" in line
    assert "derating: custom (moderate for the rows not named)" in result.stdout
    shown = run("validate", path).stdout
    assert "use up to 75 % of the rating" in shown


def test_check_help_describes_the_profiles_and_custom():
    text = " ".join(run("check", "-h").stdout.split())
    assert "custom: the design's [limits.margins] rows, moderate for the rows they do not name" \
        in text
    assert "A named profile ignores the design's [limits.margins]" in text
    assert "override" not in text


# the demo's board at 40 K/W to ambient instead of 6 K/W: the rectifier (on the board) runs
# away at high load at 55 degC, over a spread of loop gains
HOT_BOARD = ('rth_to_ambient = "6 K/W"', 'rth_to_ambient = "40 K/W"')


def test_group_reasons_by_kind_with_counts_and_spans():
    from lossbudget.sweep import group_reasons

    reasons = ["thermal runaway: loop gain 1.012 >= 1 (iteration)",
               "thermal runaway: loop gain 1.284 >= 1 (iteration)",
               "thermal runaway: loop gain 1.1 >= 1 (iteration)",
               "below the minimum on-time",
               "thermal runaway: loop gain 1.5 >= 1 (network)"]
    assert group_reasons(reasons) == (
        ("thermal runaway: loop gain 1.012 to 1.284 >= 1 (iteration)", 3),
        ("below the minimum on-time", 1),
        ("thermal runaway: loop gain 1.5 >= 1 (network)", 1),
    )


def test_map_groups_many_loop_gain_reasons_by_kind(tmp_path):
    path = design_file(tmp_path, HOT_BOARD)
    result = run("map", path, "--ambient", "55 degC", "--out", str(tmp_path / "m"))
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    gains = [ln for ln in lines if "loop gain" in ln]
    assert len(gains) == 1 and " to " in gains[0] and gains[0].strip().split()[1] == "points:"
    count = int(gains[0].split()[0])
    assert count > 1
    flagged = next(ln for ln in lines if "flagged, by kind of reason" in ln)
    listed = [ln for ln in lines if ln.startswith("    ") and " points: " in ln]
    assert sum(int(ln.split()[0]) for ln in listed) == int(flagged.split(";")[1].split()[0])


def test_check_lists_no_part_as_ok_beside_a_stage_that_did_not_solve(tmp_path):
    path = design_file(tmp_path, HOT_BOARD)
    result = run("check", path)
    assert result.exit_code == 1
    rows = [ln.split() for ln in result.stdout.splitlines()
            if ln.strip().startswith(("switch ", "rectifier ", "inductor ", "cin ", "cout ",
                                      "stage "))
            and ln.rstrip().endswith("]")]
    stage = [r for r in rows if r[0] == "stage"]
    assert any(r[1] == "thermal" and "fail" in r for r in stage)
    parts = [r for r in rows if r[0] != "stage"]
    assert parts and not any("ok" in r for r in parts)
    assert "worst over the solved points only" in result.stdout


def test_point_labels_the_stress_currents_per_part():
    # the demo's output bank is 4 parts (count = 4): its row is one part's RMS current
    import lossbudget as lb

    result = run("point", str(DEMO_PATH))
    assert result.exit_code == 0
    lines = result.stdout.splitlines()
    header = next(ln for ln in lines if ln.strip().startswith("part ") and "I rms" in ln)
    assert "I rms (A/part)" in header
    assert "currents per part: a capacitor bank's (or parallel devices') current / count" \
        in result.stdout
    d = lb.load_design(DEMO_PATH)
    b = lb.solve(d, vin=d.operating.vin.nom, load_fraction=1.0)
    cout = [ln for ln in lines[lines.index(header):] if ln.strip().startswith("cout ")][0]
    # one part's RMS current as the budget holds it (the stress of one of the 4 parts)
    per_part = float(np.ravel(b.stress("cout", "i_rms"))[0])
    assert f"{per_part:.3f}" in cout.split()
