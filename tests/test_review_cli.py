"""Review-ready text outputs: derating rows in one form, limit tables with units, grouped
reasons, hints on suspicious values (through click's CliRunner)."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from lossbudget.cli import main
from tests.test_cli_check import design_file

SAMPLES = Path(__file__).resolve().parents[1] / "sample_inputs"
DEMO_PATH = resources.files("lossbudget") / "data" / "demo.toml"


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
    # the grouped rows of the flag summary (a weighted figure's n/a line may name one too)
    gains = [ln for ln in lines if "loop gain" in ln and " points: " in ln]
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
    cout = next(ln for ln in lines[lines.index(header):] if ln.strip().startswith("cout "))
    # one part's RMS current as the budget holds it (the stress of one of the 4 parts)
    per_part = float(np.ravel(b.stress("cout", "i_rms"))[0])
    assert f"{per_part:.3f}" in cout.split()


# -- hints where the user is likely wrong -------------------------------------------------------


def test_a_lower_case_prefix_is_refused_with_the_right_spelling(tmp_path):
    path = design_file(tmp_path, ('fsw = "200 kHz"', 'fsw = "500 khz"'))
    result = run("validate", path)
    assert result.exit_code == 2
    (line,) = result.stderr.strip().splitlines()
    assert 'operating.fsw' in line and '"500 khz"' in line and 'did you mean "kHz"?' in line


def test_an_ambiguous_prefix_names_both_readings():
    from lossbudget.errors import DesignError
    from lossbudget.units import parse_quantity

    with pytest.raises(DesignError, match=r'did you mean "mHz" \(milli\) or "MHz" \(mega\)\?'):
        parse_quantity("2 mhz", "frequency", where="f.toml: operating.fsw")


def test_a_mega_ohm_rds_on_is_warned_with_the_range_and_its_basis(tmp_path):
    path = design_file(tmp_path, ('{ typ = "13 mohm", at = "125 degC" }',
                                  '{ typ = "13 Mohm", at = "125 degC" }'))
    result = run("validate", path)
    assert result.exit_code == 0  # a warning, not an error
    (line,) = [ln for ln in result.stderr.splitlines() if "rds_on" in ln]
    assert "13 Mohm is far outside the range of a power MOSFET's on-resistance" in line
    assert "100 uohm to 10 ohm" in line and "from memory" in line


def test_typical_values_raise_no_range_warning():
    # the sample designs (invented parts of usual sizes) stay inside every band
    import lossbudget as lb

    for path in (resources.files("lossbudget") / "data" / "demo.toml",
                 *sorted(SAMPLES.iterdir())):
        if str(path).endswith(".toml"):
            assert not any("far outside" in w for w in lb.load_design(path).warnings), path


def test_a_boost_at_1_5_v_blames_the_ideal_duty():
    import lossbudget as lb

    d = lb.load_design(DEMO_PATH)
    b = lb.solve(d, vin=1.5, load_fraction=1.0)
    # hand calculation: ideal boost duty 1 - Vin/Vout = 1 - 1.5/48 = 0.96875 > max_duty 0.9
    # (the demo's operating.max_duty); Erickson & Maksimovic, Fundamentals of Power
    # Electronics, 2001, ch. 2, M(D) = 1/(1 - D)
    assert str(np.ravel(b.reason)[0]) == (
        "the ideal duty 0.969 (before any conduction drop) alone exceeds operating.max_duty 0.9")
    # at 5 V the ideal duty 1 - 5/48 = 0.896 is under 0.9: the losses are to blame there
    b5 = lb.solve(d, vin=5.0, load_fraction=1.0)
    assert "ideal duty" not in str(np.ravel(b5.reason)[0])


def test_gate_drive_from_vin_above_the_minimum_input_is_warned(tmp_path):
    # the demo drives 10 V from vin (supply = "vin"); a 15 V minimum input is fine, 9 V is not
    ok = run("validate", design_file(tmp_path, ('min = "18 V"', 'min = "15 V"')))
    assert "driver.supply" not in ok.stderr
    low = run("validate", design_file(tmp_path, ('min = "18 V"', 'min = "9 V"'), name="l.toml"))
    (line,) = [ln for ln in low.stderr.splitlines() if "driver.supply" in ln]
    assert "10 V gate drive at the minimum input voltage 9 V" in line


def test_not_modelled_asks_only_for_data_that_change_a_number():
    import lossbudget as lb

    sample = SAMPLES / "fan_tray_sync_buck.toml"
    d = lb.load_design(sample)  # a synchronous buck in diode emulation, no switch body diode
    b = lb.solve(d, vin=d.operating.vin.nom, load_fraction=0.1)
    assert not any(c == "switch" and m == "dead_time" for c, m, _ in b.not_modelled)
    assert str(np.ravel(b.status("switch", "dead_time"))[0]).startswith(
        "not_applicable: diode emulation")
    # forced continuous lets the current reverse: then the body diode's data is asked for
    import tomllib

    raw = tomllib.loads(sample.read_text("utf-8"))
    raw["design"]["light_load"] = "forced-continuous"
    raw["switch"].pop("body_diode", None)
    fc = lb.solve(lb.load_design(raw), vin=d.operating.vin.nom, load_fraction=0.1)
    assert any(c == "switch" and m == "dead_time" for c, m, _ in fc.not_modelled)


def test_core_loss_without_ct_says_it_has_no_temperature_dependence():
    result = run("point", str(DEMO_PATH))  # the demo's core has no ct
    assert "note: core: no inductor.core.ct given, so the core loss has no temperature " \
        "dependence" in " ".join(result.stdout.split())
    sample = SAMPLES / "grow_light_led_boost.toml"
    assert "inductor.core.ct given" not in run("point", str(sample)).stdout  # it has ct


def test_derating_custom_without_margins_is_one_line_exit_2():
    result = run("check", str(DEMO_PATH), "--derating", "custom")
    assert result.exit_code == 2 and result.stdout == ""
    (line,) = result.stderr.strip().splitlines()
    assert "limits.margins: --derating custom needs the design's [limits.margins]" in line


def test_the_readme_margins_example_gives_the_limits_it_describes():
    # the [limits.margins] block of the README, on the demo design (100 V, 175 degC switch;
    # inductor 125 degC hot spot, i_sat 17.47 A when hot per the check): use_up_to and
    # below_max as the README states them
    import tomllib

    import lossbudget as lb

    readme = (SAMPLES.parent / "README.md").read_text("utf-8")
    block = readme.split("```toml\n[limits.margins]\n", 1)[1].split("```", 1)[0]
    raw = tomllib.loads(DEMO_PATH.read_text("utf-8"))
    del raw["limits"]["derating"]
    raw["limits"]["margins"] = tomllib.loads(block)
    rep = lb.check_limits(lb.load_design(raw))
    row = {(r.part, r.quantity): r for r in rep.rows}
    assert row["switch", "v_pk"].design_limit == pytest.approx(0.75 * 100.0)
    assert row["switch", "t_j"].design_limit == pytest.approx(175.0 - 30.0)
    assert row["inductor", "t_hot"].design_limit == pytest.approx(min(125.0 - 20.0, 110.0))
    i_pk = row["inductor", "i_pk"]
    assert i_pk.design_limit == pytest.approx(0.85 * i_pk.absolute_limit)
