"""Design variants: the parts file, the factorial, and the variant axis of the engine."""

from __future__ import annotations

import copy
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

import lossbudget as lb
from lossbudget import factorial as vm
from lossbudget.losses.diode import linear_in_temperature
from lossbudget.losses.mosfet import rds_on_at
from lossbudget.thermal import build_network

SAMPLES = Path(__file__).resolve().parents[1] / "sample_inputs"
GROW = SAMPLES / "grow_light_led_boost.toml"
GROW_PARTS = SAMPLES / "parts" / "grow_light_parts.toml"
FAN = SAMPLES / "fan_tray_sync_buck.toml"


def _raw(path: Path) -> dict:
    with path.open("rb") as fh:
        return tomllib.load(fh)


def _assert_same_budget(b, i, alone):
    """Variant ``i`` of a variant budget against the budget of its design solved alone."""
    assert set(alone.losses) <= set(b.losses)
    for key in alone.losses:
        np.testing.assert_allclose(
            b.losses[key][i], alone.losses[key], rtol=1e-12, atol=1e-300, equal_nan=True,
            err_msg=str(key),
        )
    for key in alone.stresses:
        np.testing.assert_allclose(
            b.stresses[key][i], alone.stresses[key], rtol=1e-12, equal_nan=True,
            err_msg=str(key),
        )
    for node in alone.temperatures:
        np.testing.assert_allclose(
            b.temperatures[node][i], alone.temperatures[node], rtol=1e-12, equal_nan=True,
            err_msg=node,
        )
    for name in ("efficiency", "duty", "d2", "vout_pp", "source_input_power"):
        np.testing.assert_allclose(
            getattr(b, name)[i], getattr(alone, name), rtol=1e-12, equal_nan=True, err_msg=name
        )
    # the loop gain is a forward-difference estimate with a step of sqrt(eps) of the absolute
    # temperature: its own precision is about 1e-8, so the rounding of a per-variant matrix
    # product shows there first (common practice: W. H. Press et al., Numerical Recipes, 3rd
    # ed., 2007, numerical derivatives, section 5.7 from memory)
    np.testing.assert_allclose(b.loop_gain[i], alone.loop_gain, rtol=1e-6, equal_nan=True)
    for name, flag in alone.flags.items():
        np.testing.assert_array_equal(b.flags[name][i], flag, err_msg=name)
    np.testing.assert_array_equal(b.reason[i], alone.reason)
    np.testing.assert_array_equal(b.mode[i], alone.mode)
    for key in alone.statuses:
        np.testing.assert_array_equal(b.status(*key)[i], alone.status(*key), err_msg=str(key))


# --------------------------------------------------------------------------------------------
# the engine: a variant solve equals each variant solved alone
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("corner", ["typ", "worst"])
def test_variant_solve_equals_each_design_alone_boost(corner):
    # Check value: the single-design engine, itself checked against the switched-circuit
    # reference (tests/test_solver_reference.py); the variant axis must not change a number.
    # The three switches differ in their thermal resistances too, so the coupled solve runs
    # on a stack of per-variant networks.
    v = vm.variants(GROW, parts=GROW_PARTS, vary={"operating.fsw": ["200 kHz", "450 kHz"]})
    assert len(v) == 3 * 2 * 3 * 2
    vin = np.array([10.0, 12.0, 14.0])
    frac = np.array([0.05, 0.4, 1.0])
    b = lb.sweep(v, vin=vin, load_fraction=frac, corner=corner)
    assert b.shape == (len(v), 3, 3)
    for i in range(0, len(v), 5):
        alone = lb.sweep(v.design(i), vin=vin, load_fraction=frac, corner=corner)
        _assert_same_budget(b, i, alone)


def test_variant_solve_equals_each_design_alone_sync_buck_structure_groups():
    # Alternatives whose optional data differ in kind (an inductor given by a measured
    # rac_rdc, another by its winding geometry; a rectifier with and without v_gs) solve in
    # structure groups; the numbers must still equal each design alone.
    raw = _raw(FAN)
    rect = raw["rectifier"]
    r2 = {
        **rect,
        "name": "R2",
        "rds_on": [{"typ": "2.5 mohm", "at": "25 degC"}, {"typ": "4.6 mohm", "at": "125 degC"}],
        "qg": "80 nC",
        "qoss": {"q": "150 nC", "at": "50 V"},
        "thermal": {"rth_jc": "0.6 K/W", "sink": "board"},
    }
    ind = raw["inductor"]
    i2 = {**ind, "name": "I2", "l": "22 uH", "dcr": "9 mohm",
          "winding": {"layers": 2, "wire_diameter": "1.2 mm", "porosity": 0.8}}
    i3 = {**ind, "name": "I3", "l": "10 uH", "dcr": "4 mohm", "thermal": {"rth_ha": "25 K/W"}}
    cout = {k: x for k, x in raw["capacitor"][1].items() if k not in ("name", "position")}
    parts = {
        "rectifier": [{**rect, "name": "R1"}, r2],
        "inductor": [{**ind, "name": "I1"}, i2, i3],
        "capacitor": {"cout": [{**cout, "name": "C1"}, {**cout, "name": "C2", "c": "100 uF",
                                                        "count": 3}]},
    }
    v = vm.variants(FAN, parts=parts, vary={"driver.dead_time": ["20 ns", "40 ns"]})
    assert len(v) == 24
    assert len(v.groups()) > 1
    vin = np.array([38.0, 58.0])
    frac = np.array([0.05, 0.3, 1.0])
    b = lb.sweep(v, vin=vin, load_fraction=frac)
    for i in range(len(v)):
        _assert_same_budget(b, i, lb.sweep(v.design(i), vin=vin, load_fraction=frac))


def test_variant_solve_broadcasts_like_solve():
    # solve() with a Variants: the variant axis leads, the given axes broadcast behind it.
    v = vm.variants(GROW, vary={"inductor.l": ["15 uH", "22 uH", "33 uH"]})
    b = lb.solve(v, vin=[10.0, 14.0], load_fraction=1.0)
    assert b.shape == (3, 2)
    for i in range(3):
        alone = lb.solve(v.design(i), vin=[10.0, 14.0], load_fraction=1.0)
        np.testing.assert_allclose(b.efficiency[i], alone.efficiency, rtol=1e-12)
    table = b.point_table()
    assert list(table.columns[:3]) == ["point_id", "variant", "vin_v"]
    assert table["variant"].tolist() == [lbl for lbl in v.labels for _ in range(2)]


# --------------------------------------------------------------------------------------------
# the factorial
# --------------------------------------------------------------------------------------------


def test_factorial_count_order_and_labels():
    v = vm.variants(
        GROW,
        parts=GROW_PARTS,
        vary={"operating.fsw": ["200 kHz", "300 kHz"], "inductor.core.turns": [14, 16]},
    )
    # 3 switches × 2 rectifiers × 3 inductors × 2 frequencies × 2 turn counts
    assert len(v) == 3 * 2 * 3 * 2 * 2
    labels = list(v.labels)
    assert len(set(labels)) == len(labels)
    assert labels[0] == (
        "Q-A 60 V 6.5 mohm, 5x6 / D-A 60 V 5 A, flat lead / L-A 22 uH, 12.5 mm / "
        "fsw=200 kHz / turns=14"
    )
    assert labels[1].endswith("fsw=200 kHz / turns=16")  # the last key runs fastest
    assert labels[-1].startswith("Q-C 60 V 12 mohm, 3x3 / D-B")
    d5 = v.design(3)  # turns 16 (index 1), fsw 300 kHz (index 1)
    assert d5.operating.fsw.nom == pytest.approx(300e3)
    assert d5.inductor.core.turns == 16
    # costs and areas add over the chosen parts (the sample file's own figures)
    assert v.cost[0] == pytest.approx(0.62 + 0.18 + 0.55)
    assert v.area[0] == pytest.approx((36 + 10 + 160) * 1e-6)


def test_vary_keeps_the_spread_of_a_worst_case_value():
    # inductor.l = { typ = 22 uH, min = 18.7 uH }: set to 33 uH, the worst case scales with it
    v = vm.variants(GROW, vary={"inductor.l": ["33 uH"]})
    assert v.design(0).inductor.l.typ == pytest.approx(33e-6)
    assert v.design(0).inductor.l.worst == pytest.approx(18.7e-6 * 33 / 22)


def test_budget_refusal_names_the_count():
    with pytest.raises(lb.DesignError, match=r"18,000 variants .*budget of 10,000"):
        vm.variants(GROW, parts=GROW_PARTS, vary={"inductor.l": np.linspace(10e-6, 40e-6, 1000)})
    assert len(vm.variants(GROW, parts=GROW_PARTS, budget=18)) == 18
    with pytest.raises(lb.DesignError, match=r"18 variants"):
        vm.variants(GROW, parts=GROW_PARTS, budget=17)


# --------------------------------------------------------------------------------------------
# bad parts files and vary entries: one line each, file, key path, expected
# --------------------------------------------------------------------------------------------


def _parts():
    return copy.deepcopy(_raw(GROW_PARTS))


def _problems(parts=None, vary=None) -> list[str]:
    with pytest.raises(lb.DesignError) as info:
        vm.variants(GROW, parts=parts, vary=vary)
    return info.value.problems


@pytest.mark.parametrize(
    ("edit", "expected"),
    [
        (lambda p: p["switch"][1].update(rds_on="3 uF"),
         r"^<dict>: switch\[1\]\.rds_on: expected resistance \(ohm\), got \"3 uF\"$"),
        (lambda p: p["inductor"][2].pop("dcr"),
         r"^<dict>: inductor\[2\]\.dcr: missing required key$"),
        (lambda p: p["rectifier"][0].update(vf=1), r"^<dict>: rectifier\[0\]\.vf: unknown key"),
        (lambda p: p.update(mosfet=[]), r"^<dict>: mosfet: unknown slot; valid slots"),
        (lambda p: p.update(capacitor={"cbulk": [{"c": "1 uF"}]}),
         r"^<dict>: capacitor\.cbulk: no bank of that name in the design; banks: cin, "),
        (lambda p: p["switch"][0].update(cost=-1),
         r"^<dict>: switch\[0\]\.cost: expected a number >= 0"),
        (lambda p: p["switch"][0].update(area="3 mm"),
         r"^<dict>: switch\[0\]\.area: expected area"),
        (lambda p: p["switch"][2].update(name="Q-A 60 V 6.5 mohm, 5x6"),
         r"^<dict>: switch\[2\]\.name: expected distinct names"),
        (lambda p: p["switch"][0]["thermal"].update(sink="heatsink"),
         r"^<dict>: switch\[0\]\.thermal\.sink: no sink 'heatsink' in the design"),
        (lambda p: p.update(inductor={"l": "22 uH"}),
         r"^<dict>: inductor: expected an array of tables \(\[\[inductor\]\]\)$"),
    ],
)
def test_bad_parts_file_one_line_errors(edit, expected):
    parts = _parts()
    edit(parts)
    problems = _problems(parts=parts)
    assert any(re.search(expected, p) for p in problems), problems
    assert all("\n" not in p for p in problems)


def test_bad_parts_file_reports_every_problem_in_one_pass():
    parts = _parts()
    parts["switch"][1]["rds_on"] = "3 uF"
    parts["inductor"][0]["l"] = "22 uF"
    parts["rectifier"][1]["tj_max"] = "150 V"
    problems = _problems(parts=parts)
    assert len(problems) == 3, problems
    assert [p.split(": ")[1] for p in problems] == [
        "switch[1].rds_on",
        "rectifier[1].tj_max",
        "inductor[0].l",
    ]


def test_bad_parts_toml_file_names_the_file(tmp_path):
    path = tmp_path / "cart_parts.toml"
    path.write_text('[[switch]]\nname = "S1"\nrds_on = "8 mohm"\nvds_rated = "100 uH"\n')
    with pytest.raises(lb.DesignError) as info:
        vm.variants(GROW, parts=path)
    problems = info.value.problems
    assert "cart_parts.toml: switch[0].vds_rated: expected voltage (V), got \"100 uH\"" in problems
    assert "cart_parts.toml: switch[0].thermal: missing required key" in problems
    path.write_text("[[switch]\n")
    with pytest.raises(lb.DesignError, match=r"^cart_parts\.toml: not valid TOML"):
        vm.variants(GROW, parts=path)


@pytest.mark.parametrize(
    ("vary", "expected"),
    [
        ({"inductor.lx": [1e-6]}, r"^vary: inductor\.lx: not a key of the design"),
        ({"inductor.l": ["22 uF"]}, r"^vary: inductor\.l\[0\]: expected inductance \(H\)"),
        ({"inductor.l": []}, r"^vary: inductor\.l: expected at least one value$"),
        ({"design.name": ["x"]}, r"^vary: design\.name: not a key of the design"),
        ({"capacitor.cx.c": ["1 uF"]}, r"no capacitor bank 'cx'"),
        ({"operating.vout": ["30 V"]}, r"^vary: operating\.vout: the operating envelope is"),
    ],
)
def test_bad_vary_entries(vary, expected):
    problems = _problems(vary=vary)
    assert any(re.search(expected, p) for p in problems), problems


# --------------------------------------------------------------------------------------------
# the pieces the variant axis adds to shared models
# --------------------------------------------------------------------------------------------


def test_network_stack_matches_series_and_parallel_rules():
    # Source: J. P. Holman, Heat Transfer, 10th ed., 2010, thermal-resistance analogy:
    # series resistances add, parallel ones add as conductances. Node j -> sink (r1), sink ->
    # ambient (r2) in parallel with j -> ambient (r3): Z_jj = 1/(1/(r1 + r2) + 1/r3).
    r1 = np.array([1.0, 2.0, 0.5])
    r2 = np.array([10.0, 12.0, 8.0])
    r3 = 30.0
    net = build_network(
        ["j", "sink"], [("j", "sink", r1), ("sink", "ambient", r2), ("j", "ambient", r3)]
    )
    assert net.transfer_resistance.shape == (3, 2, 2)
    expected = 1.0 / (1.0 / (r1 + r2) + 1.0 / r3)
    np.testing.assert_allclose(net.transfer_resistance[:, 0, 0], expected, rtol=1e-12)
    # and each slice of the stack equals the network built from that variant's scalars
    for k in range(3):
        one = build_network(
            ["j", "sink"],
            [("j", "sink", r1[k]), ("sink", "ambient", r2[k]), ("j", "ambient", r3)],
        )
        np.testing.assert_allclose(net.transfer_resistance[k], one.transfer_resistance,
                                   rtol=1e-13)


def test_curves_with_one_table_per_point_match_numpy_interp():
    # Check value: numpy.interp on each point's own table (inside the points' range, where
    # the piecewise-linear rule and interp agree); a single table keeps its old path.
    rng = np.random.default_rng(7)
    t_pts = np.array([[25.0, 100.0, 150.0], [0.0, 60.0, 125.0], [25.0, 75.0, 175.0]])
    vals = rng.uniform(0.2, 0.6, size=(3, 3))
    t = np.array([80.0, 30.0, 160.0])
    got = linear_in_temperature(t, t_points=t_pts, values=vals)
    want = [np.interp(t[k], t_pts[k], vals[k]) for k in range(3)]
    np.testing.assert_allclose(got, want, rtol=1e-13)
    # Rds(on): a straight line in log R against log T per table (REFERENCES §5.1)
    r = rds_on_at(t, t_points=t_pts, r_points=vals)
    want_r = [
        np.exp(np.interp(np.log(t[k] + 273.15), np.log(t_pts[k] + 273.15), np.log(vals[k])))
        for k in range(3)
    ]
    np.testing.assert_allclose(r, want_r, rtol=1e-12)


def test_variants_whose_mechanisms_differ_in_treatment_report_each_their_own():
    # One diode without junction charge and leakage data: its variant's recovery and leakage
    # are "not modelled" where the others compute them; each variant's statuses and numbers
    # must read as its own design's.
    raw = _raw(GROW_PARTS)
    bare = copy.deepcopy(raw["rectifier"][1])
    bare["name"] = "D-C without charge data"
    del bare["qc"], bare["leakage"]
    parts = {"switch": raw["switch"][:1], "rectifier": [*raw["rectifier"], bare]}
    v = vm.variants(GROW, parts=parts)
    assert [g.size for g in v.groups()] == [2, 1]
    b = lb.sweep(v, vin=[10.0, 14.0], load_fraction=[0.05, 1.0])
    for i in range(len(v)):
        _assert_same_budget(b, i, lb.sweep(v.design(i), vin=[10.0, 14.0],
                                           load_fraction=[0.05, 1.0]))
    assert b.status("rectifier", "leakage")[2, 0, 0] == "not_modelled: rectifier.leakage"
    assert b.status("rectifier", "leakage")[0, 0, 0] == "computed"


def test_recorded_test_conditions_do_not_split_groups():
    # rds_on's v_gs (the datasheet's gate voltage) is recorded, never used by the solve
    raw = _raw(GROW_PARTS)
    a, b = copy.deepcopy(raw["switch"][0]), copy.deepcopy(raw["switch"][1])
    a["rds_on"][0]["v_gs"] = "10 V"
    v = vm.variants(GROW, parts={"switch": [a, b]})
    assert len(v.groups()) == 1


@pytest.mark.parametrize("mode", ["ring", "averaged", "valley"])
def test_variant_solve_equals_each_design_alone_in_dcm_ring_modes(mode):
    # DCM points (3 % and 8 % load) with switches and rectifiers of different node charge:
    # the ring tables differ per charge split, each variant must read as its design alone
    raw = _raw(GROW)
    raw["operating"]["dcm_turn_on"] = mode
    v = vm.variants(lb.load_design(raw), parts=GROW_PARTS)
    vin, frac = [10.0, 14.0], [0.03, 0.08, 1.0]
    b = lb.sweep(v, vin=vin, load_fraction=frac)
    assert b.dcm.any()
    for i in range(0, len(v), 4):
        _assert_same_budget(b, i, lb.sweep(v.design(i), vin=vin, load_fraction=frac))
