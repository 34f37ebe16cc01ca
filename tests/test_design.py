"""The design loader: SI values, one test per rule of SPEC §5, a mutation fuzz, the samples.

Expected SI values are the design file's own strings converted by the SI prefix definitions
(BIPM, SI Brochure, 9th ed., 2019, Table 7; 2.3.1 for kelvin to degC), worked out by hand
beside each check.
"""

from __future__ import annotations

import copy
import math
import re
import tomllib
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from lossbudget import Design, DesignError, load_design, solve
from lossbudget.design import Diode, Mosfet
from tests.test_fuzz import fuzz

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_inputs").glob("*.toml"))
DEMO = resources.files("lossbudget") / "data" / "demo.toml"


def demo_raw() -> dict:
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


def sample_raw(stem: str) -> dict:
    return tomllib.loads((ROOT / "sample_inputs" / f"{stem}.toml").read_text(encoding="utf-8"))


def problems_of(raw: dict) -> list[str]:
    with pytest.raises(DesignError) as exc:
        load_design(raw)
    return exc.value.problems


# --------------------------------------------------------------------------------------------
# every shipped design validates
# --------------------------------------------------------------------------------------------


def test_there_are_three_samples_or_more():
    assert len(SAMPLES) >= 3


@pytest.mark.parametrize("path", SAMPLES, ids=[p.name for p in SAMPLES])
def test_every_sample_validates(path):
    design = load_design(path)
    assert isinstance(design, Design)
    assert design.source == path.name
    assert design.resolved
    first = path.read_text(encoding="utf-8").splitlines()[0]
    assert first.startswith("# Scenario:"), "each sample starts with a comment naming its scenario"


def test_samples_cover_each_topology():
    topologies = {load_design(p).topology for p in SAMPLES}
    assert topologies == {"boost", "buck", "buck-boost"}


def test_demo_validates_from_the_package_data():
    with resources.as_file(DEMO) as path:
        design = load_design(path)
    assert design.topology == "boost"


# --------------------------------------------------------------------------------------------
# values in SI (hand conversions of the demo's strings)
# --------------------------------------------------------------------------------------------


def test_demo_values_in_si():
    d = load_design(demo_raw())
    op = d.operating
    assert_allclose([op.vin.min, op.vin.nom, op.vin.max], [18.0, 24.0, 32.0])
    assert_allclose([op.vout.min, op.vout.max], [48.0, 48.0])
    assert_allclose(op.fsw.nom, 200e3)  # "200 kHz"
    assert_allclose([op.ambient.min, op.ambient.max], [0.0, 55.0])  # degC
    assert_allclose(op.max_duty, 0.9)
    assert_allclose(op.min_on_time, 120e-9)  # "120 ns"
    sw = d.switch
    assert isinstance(sw, Mosfet)
    assert_allclose(sw.rds_on.t, [25.0, 125.0])
    assert_allclose(sw.rds_on.typ, [8e-3, 13e-3])
    # max given at 25 degC only: it scales the whole curve (SPEC §2.8): 13 mohm * 10/8
    assert_allclose(sw.rds_on.worst, [10e-3, 13e-3 * 10 / 8], rtol=1e-12)
    assert_allclose(sw.rds_on_v_gs, 10.0)
    assert_allclose(sw.qg.typ, 35e-9)
    assert_allclose(sw.qoss.value.typ, 60e-9)
    assert_allclose(sw.qoss.at, 50.0)
    assert isinstance(d.rectifier, Diode)
    assert_allclose(d.rectifier.leakage.doubles_every, 10.0)
    ind = d.inductor
    assert_allclose([ind.l.typ, ind.l.worst], [22e-6, 19.8e-6])  # lower is worse
    assert_allclose(ind.dcr_at, 25.0)  # a plain resistance is at 25 degC
    assert_allclose(ind.core.ve, 11.4e-6)  # (1 cm)^3 = 1e-6 m3
    assert_allclose(ind.core.ae, 125e-6)  # (1 mm)^2 = 1e-6 m2
    assert_allclose(ind.winding.porosity, 0.8)
    assert [c.name for c in d.capacitors] == ["cin", "cout"]
    assert_allclose(d.capacitors[1].c.worst, 8e-6)
    assert d.sinks[0].name == "board"
    assert ("operating.dcm_turn_on", "ring") in d.defaults


def test_resolved_paths_name_the_keys_as_written():
    resolved = dict(load_design(demo_raw()).resolved)
    assert resolved["switch.rds_on[0].typ"] == "8 mohm"
    assert resolved["switch.rds_on[0].max"] == "10 mohm"
    assert resolved["inductor.core.ve"] == "11.4 cm3"
    assert resolved["inductor.l.min"] == "19.8 uH"
    assert not any(".typ.typ" in key for key in resolved)


def test_kelvin_is_converted_to_degc():
    raw = demo_raw()
    raw["operating"]["ambient"] = {"min": "273.15 K", "max": "328.15 K"}
    amb = load_design(raw).operating.ambient
    assert_allclose([amb.min, amb.nom, amb.max], [0.0, 27.5, 55.0], atol=1e-12)


def test_plain_qrr_from_spec_example_is_accepted():
    # SPEC §5 writes body_diode = { vsd = "0.8 V", qrr = "40 nC" } and a diode's qrr likewise.
    raw = demo_raw()
    raw["rectifier"]["qrr"] = "30 nC"
    d = load_design(raw)
    assert_allclose(d.rectifier.qrr.q.typ, 30e-9)
    assert_allclose(d.rectifier.qrr.at_i, 4.0)  # taken at iout_rated, and said so
    assert any(path == "rectifier.qrr.at_i" for path, _ in d.defaults)


def test_resistance_with_its_temperature():
    raw = demo_raw()
    raw["resistor"][0]["r"] = {"r": "5 mohm", "max": "5.5 mohm", "at": "60 degC"}
    raw["inductor"]["dcr"] = {"typ": "12 mohm", "at": "20 degC"}
    d = load_design(raw)
    assert_allclose([d.resistors[0].r.typ, d.resistors[0].r.worst], [5e-3, 5.5e-3])
    assert_allclose(d.resistors[0].r_at, 60.0)
    assert_allclose([d.inductor.dcr.typ, d.inductor.dcr_at], [12e-3, 20.0])


def test_sync_stage_defaults_to_forced_continuous():
    d = load_design(sample_raw("frontend_bias_inverting"))
    assert d.rectifier_kind == "sync"
    assert d.inverting
    assert_allclose(d.operating.vout.nom, -15.0)
    raw = sample_raw("fan_tray_sync_buck")
    del raw["design"]["light_load"]
    d = load_design(raw)
    assert d.light_load == "forced-continuous"
    assert ("design.light_load", "forced-continuous") in d.defaults


def test_core_loss_coefficient_converted_from_mw_per_cm3():
    # P[W/m3] = 1e3 * P[mW/cm3]; f[kHz] = f[Hz]/1e3; B[mT] = 1e3 B[T], hence
    # k_SI = k' * 1e3 * (1e-3)^alpha * (1e3)^beta (hand calculation).
    d = load_design(sample_raw("fan_tray_sync_buck"))
    k_prime, alpha, beta = 3.0e-6, 1.4, 2.6
    assert_allclose(d.inductor.core.k, k_prime * 1e3 * 1e-3**alpha * 1e3**beta, rtol=1e-12)


def test_theta_ja_on_a_semiconductor_draws_a_warning():
    raw = demo_raw()
    raw["switch"]["thermal"] = {"rth_ja": "40 K/W"}
    d = load_design(raw)
    assert any("switch.thermal.rth_ja" in w and "JESD51" in w for w in d.warnings)


def test_drive_below_rds_on_test_voltage_draws_a_warning():
    raw = demo_raw()
    raw["driver"]["v_drive"] = "7 V"
    d = load_design(raw)
    assert any(w.startswith("<dict>: driver.v_drive: below the gate voltage") for w in d.warnings)


def test_checksum_follows_the_content():
    a = load_design(demo_raw()).checksum
    raw = demo_raw()
    raw["operating"]["fsw"] = "210 kHz"
    assert load_design(raw).checksum != a
    assert load_design(demo_raw()).checksum == a


# --------------------------------------------------------------------------------------------
# one test per class of bad input (SPEC §5 "Errors versus flags")
# --------------------------------------------------------------------------------------------


def test_missing_required_key():
    raw = demo_raw()
    del raw["inductor"]["core"]["ve"]
    with pytest.raises(DesignError, match=r"^<dict>: inductor\.core\.ve: missing required key$"):
        load_design(raw)


def test_missing_required_table():
    raw = demo_raw()
    del raw["inductor"]  # [driver] is optional (SPEC §5): its mechanisms are not_modelled
    assert problems_of(raw) == ["<dict>: inductor: missing required key"]


def test_unknown_key_suggests_the_nearest():
    raw = demo_raw()
    raw["inductor"]["core"]["vee"] = raw["inductor"]["core"].pop("ve")
    problems = problems_of(raw)
    assert any(
        re.match(r"<dict>: inductor\.core\.vee: unknown key \(did you mean 've'\?\)", p)
        for p in problems
    )


def test_unknown_key_in_a_point_list_suggests_the_nearest():
    raw = demo_raw()
    raw["switch"]["rds_on"][1]["att"] = raw["switch"]["rds_on"][1].pop("at")
    with pytest.raises(DesignError, match=r"switch\.rds_on\[1\]\.att: unknown key \(did you mean"):
        load_design(raw)


def test_wrong_type():
    raw = demo_raw()
    raw["switch"]["count"] = "two"
    raw["inductor"]["core"]["turns"] = 14.5
    raw["capacitor"][0]["thermal"] = "60 K/W"
    problems = problems_of(raw)
    assert any(re.match(r"<dict>: switch\.count: expected a whole number", p) for p in problems)
    assert any(re.match(r"<dict>: inductor\.core\.turns: expected a whole", p) for p in problems)
    assert any(re.match(r"<dict>: capacitor\[0\]\.thermal: expected a table", p) for p in problems)


def test_wrong_unit():
    raw = demo_raw()
    raw["inductor"]["l"] = "22 uF"
    with pytest.raises(DesignError, match=r'inductor\.l: expected inductance \(H\), got "22 uF"'):
        load_design(raw)


def test_wrong_unit_for_a_volume():
    raw = demo_raw()
    raw["inductor"]["core"]["ve"] = "11.4 cm2"
    with pytest.raises(DesignError, match=r"inductor\.core\.ve: expected volume \(m3\)"):
        load_design(raw)


def test_wrong_unit_inside_a_point_list_names_the_point():
    raw = demo_raw()
    raw["switch"]["rds_on"][1]["typ"] = "13 mV"
    with pytest.raises(DesignError, match=r"switch\.rds_on\[1\]\.typ: expected resistance"):
        load_design(raw)


@pytest.mark.parametrize("value", ["-22 uH", "0 H", 0, -2.2e-5])
def test_zero_or_negative_where_positive(value):
    raw = demo_raw()
    raw["inductor"]["l"] = value
    with pytest.raises(DesignError, match=r"inductor\.l: expected a positive value"):
        load_design(raw)


def test_negative_thermal_resistance():
    raw = demo_raw()
    raw["thermal"]["sink"][0]["rth_to_ambient"] = "-12 K/W"
    with pytest.raises(DesignError, match=r"thermal\.sink\[0\]\.rth_to_ambient: expected a pos"):
        load_design(raw)


@pytest.mark.parametrize("value", [1.2, "150 %", -0.5])
def test_porosity_outside_zero_one(value):
    raw = demo_raw()
    raw["inductor"]["winding"]["porosity"] = value
    with pytest.raises(DesignError, match=r"inductor\.winding\.porosity: expected a"):
        load_design(raw)


def test_porosity_of_one_is_allowed():
    raw = demo_raw()
    raw["inductor"]["winding"]["porosity"] = 1.0
    assert_allclose(load_design(raw).inductor.winding.porosity, 1.0)


def test_min_above_max():
    raw = demo_raw()
    raw["operating"]["vin"] = {"min": "32 V", "max": "18 V"}
    with pytest.raises(DesignError, match=r"operating\.vin: expected min <= max"):
        load_design(raw)


def test_worst_value_better_than_typical():
    raw = demo_raw()
    raw["switch"]["rds_on"][0]["max"] = "7 mohm"  # below typ = 8 mohm
    with pytest.raises(DesignError, match=r"switch\.rds_on\[0\]\.max: expected max >= typ"):
        load_design(raw)


def test_min_where_higher_is_worse():
    raw = demo_raw()
    raw["switch"]["qg"] = {"typ": "35 nC", "min": "30 nC"}
    with pytest.raises(DesignError, match=r"switch\.qg\.min: expected 'max' for this parameter"):
        load_design(raw)


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_nan_or_infinity(value):
    raw = demo_raw()
    raw["operating"]["fsw"] = value
    raw["inductor"]["core"]["k"] = value
    problems = problems_of(raw)
    assert any(
        re.match(r"<dict>: operating\.fsw: expected a finite frequency", p) for p in problems
    )
    assert any(
        re.match(r"<dict>: inductor\.core\.k: expected a finite number", p) for p in problems
    )


def test_nan_in_a_toml_file(tmp_path):
    text = DEMO.read_text(encoding="utf-8").replace('fsw = "200 kHz"', "fsw = nan")
    path = tmp_path / "cart.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(DesignError, match=r"^cart\.toml: operating\.fsw: expected a finite"):
        load_design(path)


def test_nan_in_core_temperature_factor():
    raw = demo_raw()
    raw["inductor"]["core"]["ct"] = [1.8, math.nan, 8e-5]
    with pytest.raises(DesignError, match=r"inductor\.core\.ct: expected three finite numbers"):
        load_design(raw)


def test_light_load_with_a_diode_rectifier():
    raw = demo_raw()
    raw["design"]["light_load"] = "diode-emulation"
    with pytest.raises(DesignError, match=r"design\.light_load: light_load applies to a synchr"):
        load_design(raw)


def test_dead_time_with_a_diode_rectifier():
    raw = demo_raw()
    raw["driver"]["dead_time"] = "30 ns"
    with pytest.raises(DesignError, match=r"driver\.dead_time: a dead time needs a synchronous"):
        load_design(raw)


def test_a_sink_that_does_not_exist():
    raw = demo_raw()
    raw["switch"]["thermal"]["sink"] = "heatsink"
    with pytest.raises(DesignError, match=r"switch\.thermal\.sink: no sink named 'heatsink'"):
        load_design(raw)


def test_a_link_to_a_sink_that_does_not_exist():
    raw = sample_raw("grow_light_led_boost")
    raw["thermal"]["link"][0]["between"] = ["board", "chassis"]
    with pytest.raises(DesignError, match=r"thermal\.link\[0\]\.between: no sink named 'chassis'"):
        load_design(raw)


def test_a_sink_without_a_path_to_ambient():
    raw = demo_raw()
    del raw["thermal"]["sink"][0]["rth_to_ambient"]
    with pytest.raises(DesignError, match=r"switch\.thermal\.sink: sink 'board' has no path"):
        load_design(raw)


def test_a_positive_output_for_the_inverting_stage():
    raw = sample_raw("frontend_bias_inverting")
    raw["operating"]["vout"] = "15 V"
    with pytest.raises(DesignError, match=r"operating\.vout: expected a negative output"):
        load_design(raw)


def test_a_negative_output_for_the_boost():
    raw = demo_raw()
    raw["operating"]["vout"] = "-48 V"
    with pytest.raises(DesignError, match=r"operating\.vout: expected a positive output"):
        load_design(raw)


@pytest.mark.parametrize("vout", ["58 V", "70 V"])
def test_a_buck_with_vout_at_or_above_vin_max(vout):
    raw = sample_raw("fan_tray_sync_buck")  # vin.max = 58 V
    raw["operating"]["vout"] = vout
    with pytest.raises(DesignError, match=r"operating\.vout: a buck cannot reach vout"):
        load_design(raw)


def test_a_buck_whose_output_range_reaches_below_vin_max_is_accepted():
    raw = sample_raw("fan_tray_sync_buck")
    raw["operating"]["vout"] = {"min": "12 V", "max": "60 V"}  # some points feasible: flagged
    assert load_design(raw).operating.vout.max == 60.0


def test_a_boost_with_vout_at_or_below_vin_min():
    raw = demo_raw()  # vin.min = 18 V
    raw["operating"]["vout"] = "18 V"
    with pytest.raises(DesignError, match=r"operating\.vout: a boost cannot make vout"):
        load_design(raw)


def test_psi_jt_is_refused():
    raw = demo_raw()
    raw["switch"]["thermal"]["psi_jt"] = "2 K/W"
    with pytest.raises(DesignError, match=r"switch\.thermal\.psi_jt: psi_jt is a thermal char"):
        load_design(raw)


def test_drive_voltage_must_pass_the_plateau():
    raw = sample_raw("fan_tray_sync_buck")
    raw["driver"]["v_drive"] = "4.4 V"  # switch plateau 4.5 V, rectifier 4.2 V
    problems = problems_of(raw)
    assert problems == [
        "<dict>: driver.v_drive: expected a drive voltage above switch.v_plateau (4.5 V), got 4.4 V"
    ]


def test_reserved_and_repeated_names():
    raw = demo_raw()
    raw["capacitor"][0]["name"] = "inductor"
    raw["resistor"][0]["name"] = "cout"
    problems = problems_of(raw)
    assert any(
        re.match(r"<dict>: capacitor\[0\]\.name: 'inductor' is reserved", p) for p in problems
    )
    assert any("repeated: cout" in p for p in problems)


def test_no_output_bank():
    raw = demo_raw()
    raw["capacitor"] = [raw["capacitor"][0]]
    with pytest.raises(DesignError, match=r"capacitor: expected at least one bank at position"):
        load_design(raw)


def test_winding_geometry_incomplete_or_doubled():
    raw = demo_raw()
    del raw["inductor"]["winding"]["porosity"]
    with pytest.raises(DesignError, match=r"inductor\.winding: expected layers, .*missing poros"):
        load_design(raw)
    raw = demo_raw()
    raw["inductor"]["winding"]["rac_rdc"] = 1.8
    with pytest.raises(DesignError, match=r"inductor\.winding: expected either rac_rdc or"):
        load_design(raw)


def test_custom_derating_needs_margins():
    raw = demo_raw()
    raw["limits"]["derating"] = "custom"
    with pytest.raises(DesignError, match=r"limits\.derating: expected \[limits\.margins\]"):
        load_design(raw)


def test_margin_share_outside_zero_to_one_hundred_percent():
    raw = demo_raw()
    del raw["limits"]["derating"]
    raw["limits"]["margins"] = {"mosfet": {"v_pk": {"use_up_to": 1.5}}}
    with pytest.raises(DesignError,
                       match=r"limits\.margins\.mosfet\.v_pk\.use_up_to: expected a share"):
        load_design(raw)


@pytest.mark.parametrize(("rows", "needle"), [
    # a bare value reads both ways (share used or share held back): refused, naming the form
    ({"mosfet": {"v_pk": "75 %"}},
     r'limits\.margins\.mosfet\.v_pk: expected \{ use_up_to = "75 %" \}'),
    ({"mosfet": {"t_j": "25 K"}},
     r'limits\.margins\.mosfet\.t_j: expected \{ below_max = "25 K" \}'),
    # a part's name where its kind belongs: the kind is named
    ({"switch": {"v_pk": {"use_up_to": "75 %"}}},
     r'limits\.margins\.switch: expected a part kind, .*"switch" is a part name: write its '
     r"kind, mosfet"),
    ({"mosfet": {"vds": {"use_up_to": "75 %"}}},
     r"limits\.margins\.mosfet\.vds: expected a quantity of a mosfet"),
])
def test_margin_rows_have_one_form_checked_in_the_loader(rows, needle):
    raw = demo_raw()
    del raw["limits"]["derating"]
    raw["limits"]["margins"] = rows
    with pytest.raises(DesignError, match=needle) as info:
        load_design(raw)
    assert len(info.value.problems) == 1


def test_margin_rows_resolve_to_the_share_used_and_the_kelvin_below():
    raw = demo_raw()
    del raw["limits"]["derating"]
    raw["limits"]["margins"] = {"mosfet": {"v_pk": {"use_up_to": "75 %"},
                                           "t_j": {"below_max": "30 K", "at_most": "130 degC"}}}
    d = load_design(raw)
    assert d.limits.derating == "custom"
    by = {(m.kind, m.quantity): m for m in d.limits.margins}
    assert by["mosfet", "v_pk"].use_up_to == pytest.approx(0.75)
    assert by["mosfet", "t_j"].below_max == pytest.approx(30.0)
    assert by["mosfet", "t_j"].at_most == pytest.approx(130.0)
    shown = dict(d.resolved)
    assert shown["limits.margins.mosfet.v_pk"] == "use up to 75 % of the rating"


def test_several_problems_reported_together():
    raw = demo_raw()
    raw["inductor"]["l"] = "22 uF"
    del raw["inductor"]["core"]["ve"]
    raw["switch"]["thermal"]["psi_jt"] = "2 K/W"
    raw["operating"]["vin"] = {"min": "32 V", "max": "18 V"}
    raw["design"]["light_load"] = "diode-emulation"
    problems = problems_of(raw)
    keys = [p.split(": ")[1] for p in problems]
    assert set(keys) == {
        "inductor.l",
        "inductor.core.ve",
        "switch.thermal.psi_jt",
        "operating.vin",
        "design.light_load",
    }
    with pytest.raises(DesignError) as exc:
        load_design(raw)
    assert str(exc.value).count("\n") == len(problems) - 1


def test_a_newline_in_a_value_or_a_key_stays_on_one_line():
    raw = demo_raw()
    raw["inductor"]["l"] = "22\nuF"
    raw["inductor"]["x\ny"] = 1
    problems = problems_of(raw)
    assert '<dict>: inductor.l: expected inductance (H), got "22\\nuF"' in problems
    assert all("\n" not in p for p in problems)
    assert any(p.startswith("<dict>: inductor.x\\ny: unknown key") for p in problems)


def test_unreadable_and_malformed_files(tmp_path):
    with pytest.raises(DesignError, match=r"cannot read the design file"):
        load_design(tmp_path / "absent.toml")
    bad = tmp_path / "broken.toml"
    bad.write_text("[design\nname = 1\n", encoding="utf-8")
    with pytest.raises(DesignError, match=r"^broken\.toml: not valid TOML"):
        load_design(bad)
    binary = tmp_path / "binary.toml"
    binary.write_bytes(b"\xff\xfe\x00")
    with pytest.raises(DesignError, match=r"^binary\.toml: expected a UTF-8 text file"):
        load_design(binary)


def test_a_source_that_is_neither_a_path_nor_a_dict():
    with pytest.raises(DesignError, match=r"^<list>: expected a path to a TOML design file"):
        load_design([1, 2])  # type: ignore[arg-type]


# --------------------------------------------------------------------------------------------
# fuzz: mutated designs either load or raise DesignError, never anything else
# --------------------------------------------------------------------------------------------

_BASES = {"demo": demo_raw(), **{p.stem: tomllib.loads(p.read_text("utf-8")) for p in SAMPLES}}

_REPLACEMENTS = [
    None,
    True,
    0,
    -1,
    -3.5,
    2.5,
    math.nan,
    math.inf,
    10**400,
    "",
    "banana",
    "-5 V",
    "22 uF",
    "3 mohm",
    "1e999 V",
    "25 degC",
    "3 K",
    "40 %",
    [],
    {},
    [1, 2],
    {"typ": "1 V"},
    {"typ": "2 V", "min": "1 V"},
    [{"at": "25 degC"}],
    {"r": "1 ohm", "at": "300 K"},
    "22\nuF",  # a TOML multi-line string: the problem must stay on one line
    {"typ\nx": "1 V"},
]
_UNITS = ["V", "mV", "A", "ohm", "mohm", "uH", "nF", "nC", "uJ", "kHz", "ns", "degC", "K", "K/W"]


def _paths(obj, prefix=()):
    if isinstance(obj, dict):
        for key, value in obj.items():
            yield (*prefix, key)
            yield from _paths(value, (*prefix, key))
    elif isinstance(obj, list):
        for n, value in enumerate(obj):
            yield (*prefix, n)
            yield from _paths(value, (*prefix, n))


def _mutate(raw, path, op, payload):
    parent = raw
    for key in path[:-1]:
        parent = parent[key]
    key = path[-1]
    old = parent[key]
    if op == "delete":
        del parent[key]
    elif op == "replace":
        parent[key] = copy.deepcopy(payload)
    elif op == "scramble_unit" and isinstance(old, str):
        parent[key] = re.sub(r"[^\d.eE+\-\s].*$", str(payload), old)
    elif op == "negate" and isinstance(old, str | int | float) and not isinstance(old, bool):
        parent[key] = f"-{old}" if isinstance(old, str) else -old
    elif op == "unknown_key" and isinstance(old, dict):
        old[f"{key}_x"] = 1


_MUTATION = st.tuples(
    st.integers(min_value=0, max_value=10**6),
    st.sampled_from(["delete", "replace", "scramble_unit", "negate", "unknown_key"]),
    st.one_of(st.sampled_from(_REPLACEMENTS), st.sampled_from(_UNITS)),
)


@settings(
    max_examples=300,
    derandomize=True,
    database=None,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)
@given(base=st.sampled_from(sorted(_BASES)), mutations=st.lists(_MUTATION, min_size=1, max_size=4))
def test_fuzz_mutated_designs_load_or_raise_design_error(base, mutations):
    raw = copy.deepcopy(_BASES[base])
    for pick, op, payload in mutations:
        paths = list(_paths(raw))
        if not paths:
            break
        _mutate(raw, paths[pick % len(paths)], op, payload)
    try:
        design = load_design(raw)
    except DesignError as exc:
        assert exc.problems
        for line in exc.problems:
            assert line.startswith("<dict>: "), line
            assert "\n" not in line
        return
    # a design the loader accepts must solve honestly: finite numbers where a point is not
    # flagged, no negative loss, Vin·I_in = Pout + every loss within 1e-3 (conservation of
    # energy, SPEC §2.1), and every flagged point with its reason
    op = design.operating
    budget = solve(design, vin=np.array([op.vin.min, op.vin.max]), load_fraction=0.3)
    outcome, detail = fuzz.judge_budget(budget)
    assert outcome in ("solved", "flagged"), detail
