"""Ranking design variants: compare(), the Pareto front, the optimum frequency, the command."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import lossbudget as lb
from lossbudget import factorial as vm
from lossbudget.cli import main
from lossbudget.ranking import compare, optimum_frequency, pareto_front

SAMPLES = Path(__file__).resolve().parents[1] / "sample_inputs"
GROW = SAMPLES / "grow_light_led_boost.toml"
GROW_PARTS = SAMPLES / "parts" / "grow_light_parts.toml"


@pytest.fixture(scope="module")
def grow_frame():
    v = vm.variants(GROW, parts=GROW_PARTS, vary={"operating.fsw": ["150 kHz", "300 kHz"]})
    return v, compare(v)


def _dominated_brute_force(c: np.ndarray, eligible: np.ndarray) -> np.ndarray:
    """Reference: a candidate is dominated when another eligible one is no worse anywhere and
    better somewhere (Pareto dominance, common practice), by explicit comparison of pairs."""
    n = c.shape[0]
    out = np.zeros(n, dtype=bool)
    for i in range(n):
        for j in range(n):
            if i != j and eligible[j] and all(c[j] <= c[i]) and any(c[j] < c[i]):
                out[i] = True
    return out


def test_pareto_front_holds_no_dominated_candidate():
    rng = np.random.default_rng(3)
    c = rng.integers(0, 6, size=(300, 3)).astype(float)  # many ties on purpose
    eligible = rng.random(300) > 0.2
    front = pareto_front(c, eligible=eligible)
    dominated = _dominated_brute_force(c, eligible)
    assert not np.any(front & dominated)
    np.testing.assert_array_equal(front, eligible & ~dominated)
    # a single criterion: the front is every eligible candidate at the minimum
    one = pareto_front(c[:, :1], eligible=eligible)
    np.testing.assert_array_equal(one, eligible & (c[:, 0] == c[eligible, 0].min()))


def test_compare_front_and_rank(grow_frame):
    v, f = grow_frame
    assert len(f) == len(v) == 36
    assert sorted(f["variant_id"]) == list(range(36))
    crit = f[["objective_loss", "cost", "area_m2"]].to_numpy(float)
    eligible = (f["status"] != "fail").to_numpy() & np.isfinite(crit).all(axis=1)
    dominated = _dominated_brute_force(crit, eligible)
    front = f["pareto"].to_numpy(bool)
    assert front.any()
    assert not np.any(front & dominated)
    assert not np.any(front & (f["status"] == "fail").to_numpy())
    # rank: limits that hold first (ok, caution), failing ones last; each by the objective
    order = f["status"].map({"ok": 0, "caution": 1, "fail": 2}).to_numpy()
    assert np.all(np.diff(order) >= 0)
    for s in ("ok", "caution", "fail"):
        goal = f.loc[f["status"] == s, "objective_loss"].to_numpy()
        assert np.all(np.diff(goal[np.isfinite(goal)]) >= 0)
    assert f["rank"].tolist() == list(range(1, 37))


def test_compare_weighted_efficiency_and_losses_match_each_design(grow_frame):
    # Check value: EN 50530:2010 European weighting (5/10/20/30/50/100 % with
    # 0.03/0.06/0.13/0.10/0.48/0.20) applied to each variant's own design solved alone.
    v, f = grow_frame
    fr = np.array([0.05, 0.10, 0.20, 0.30, 0.50, 1.00])
    w = np.array([0.03, 0.06, 0.13, 0.10, 0.48, 0.20])
    op = v.base.operating
    for i in (0, 7, 35):
        row = f.loc[f["variant_id"] == i].iloc[0]
        d = v.design(i)
        eff = lb.solve(d, vin=op.vin.nom, load_fraction=fr).efficiency
        assert row["eff_european"] == pytest.approx(float(eff @ w), rel=1e-12)
        rated = lb.solve(d, vin=[op.vin.min, op.vin.nom, op.vin.max], load_fraction=1.0)
        np.testing.assert_allclose(
            [row["loss_rated_vin_min_w"], row["loss_rated_vin_nom_w"],
             row["loss_rated_vin_max_w"]],
            rated.total_loss, rtol=1e-12,
        )
        assert row["objective_loss"] == pytest.approx(1.0 - row["eff_european"], rel=1e-12)
        assert row["variant"] == v.labels[i]


def test_compare_status_matches_the_single_design_check(grow_frame):
    # The variant check runs the single design's checks on the envelope grid without the
    # local refinement; a status can differ only where refinement moves a worst point across
    # a limit, so compare the rows' statuses where the grid margin is not within 1 %.
    v, f = grow_frame
    for i in (0, 10, 30):
        rep = lb.check_limits(v.design(i))
        single = {(r.part, r.quantity): r for r in rep.rows}
        table = f.attrs["limits_table"]
        rows = table[table["variant_id"] == i]
        for r in rows.itertuples(index=False):
            key = (r.part, r.quantity)
            if key not in single or r.part == "stage":
                continue
            if np.isfinite(r.headroom) and abs(r.headroom) < 0.01:
                continue
            assert r.status == single[key].status, (i, key)
            assert r.worst == pytest.approx(single[key].worst, rel=0.02), (i, key)


def _closed_form_design() -> dict:
    """A diode boost in which only two things depend on fsw (invented values, test only):
    the ripple's share of the resistive losses, falling as 1/fsw², and the edge energies
    (datasheet-style reference energies, linear in current) and gate charge, rising ∝ fsw.
    No core, winding, node charge, recovery or leakage data: those are not modelled. The
    thermal paths are 0.01 K/W so that every part stays within a few mK of the ambient."""
    th = {"rth_jc": "0.01 K/W", "sink": "board"}
    ref = {"e": "86 nJ", "at_v": "48 V", "at_i": "4 A"}
    return {
        "design": {"name": "closed-form optimum", "topology": "boost", "rectifier": "diode"},
        "operating": {"vin": "24 V", "vout": "48 V", "iout_rated": "2 A", "fsw": "150 kHz",
                      "ambient": "25 degC", "max_duty": 0.9},
        "switch": {"vds_rated": "100 V", "rds_on": "30 mohm", "v_th": "2 V",
                   "v_plateau": "4 V", "qg": "2 nC", "qgs": "1 nC", "qgd": "1 nC",
                   "rg": "1 ohm", "eon": ref, "eoff": ref, "tj_max": "150 degC",
                   "thermal": th},
        "driver": {"v_drive": "10 V", "r_source": "1 ohm", "r_sink": "1 ohm",
                   "rg_on": "1 ohm", "rg_off": "1 ohm", "supply": "aux"},
        "rectifier": {"vr_rated": "100 V", "vf0": "0.1 V", "rd": "20 mohm",
                      "tj_max": "150 degC", "thermal": th},
        "inductor": {"l": "47 uH", "dcr": "30 mohm", "t_max": "125 degC",
                     "thermal": {"rth_ha": "0.01 K/W"}},
        "capacitor": [{"name": "cout", "position": "output", "c": "100 uF", "esr": "10 mohm",
                       "v_rated": "100 V", "t_max": "105 degC",
                       "thermal": {"rth_ha": "0.01 K/W"}}],
        "thermal": {"sink": [{"name": "board", "rth_to_ambient": "0.01 K/W"}]},
    }


def test_optimum_frequency_of_a_closed_form_case_within_the_grid_step():
    # Derivation (CCM boost; R. W. Erickson, D. Maksimović, Fundamentals of Power
    # Electronics, 2nd ed., 2001, ch. 2 ripple ΔI = Vin·D/(L·fsw) and the RMS of a trapezoid
    # I² + ΔI²/12 over each interval): the switch carries the inductor current for D, the
    # diode and the output bank's ESR for 1 − D, the winding always, so the ripple adds
    #   P_ripple = c·ΔI²/12 = K/fsw²,  c = R_sw·D + (R_d + ESR)·(1 − D) + DCR,
    #   K = c·(Vin·D/L)²/12.
    # Edge energies scaled linearly in current from a reference (common practice) at the
    # valley and the peak, I_v + I_pk = 2·I_L, plus the gate charge from an auxiliary rail:
    #   P_edge = B·fsw,  B = E_ref·(V/V_ref)·(2·I_L/I_ref) + Qg·V_drive.
    # d(K/f² + B·f)/df = 0 gives f* = (2K/B)^(1/3). Lossless D = 1 − Vin/Vout and
    # I_L = I_out/(1 − D) stand in for the loss-inclusive values (losses ≈ 1.2 % of the
    # power here, which moves f* by well under the grid step).
    design = lb.load_design(_closed_form_design())
    vin, vout, iout, ell = 24.0, 48.0, 2.0, 47e-6
    duty = 1.0 - vin / vout
    i_l = iout / (1.0 - duty)
    c = 0.030 * duty + (0.020 + 0.010) * (1.0 - duty) + 0.030
    k = c * (vin * duty / ell) ** 2 / 12.0
    b = 86e-9 * (vout / 48.0) * (2.0 * i_l / 4.0) + 2e-9 * 10.0
    f_star = (2.0 * k / b) ** (1.0 / 3.0)
    step = 2.5e3
    grid = np.arange(100e3, 250e3 + 1.0, step)
    v = vm.variants(design, vary={"operating.fsw": grid})
    frame = compare(v, objective="full_load")
    opt = optimum_frequency(v, frame)
    assert len(opt) == 1 and not opt["at_edge"].iloc[0]
    assert abs(opt["fsw_opt_hz"].iloc[0] - f_star) <= step
    # the loss curve is the sum the derivation names: its minimum is interior
    losses = frame.sort_values("variant_id")["loss_full_w"].to_numpy()
    j = int(np.argmin(losses))
    assert 0 < j < grid.size - 1


# --------------------------------------------------------------------------------------------
# the command
# --------------------------------------------------------------------------------------------


def test_cli_compare_writes_the_set(tmp_path):
    out = tmp_path / "cart"
    result = CliRunner().invoke(main, [
        "compare", str(GROW), "--parts", str(GROW_PARTS),
        "--vary", "operating.fsw=150 kHz:300 kHz:2", "--out", str(out),
    ])
    assert result.exit_code == 0, result.output
    text = result.output
    assert "36 candidates (3 switch × 2 rectifier × 3 inductor × 2 operating.fsw)" in text
    assert "rank  candidate" in text
    assert "optimum switching frequency per candidate" in text
    assert "caution:" in text
    lines = [ln for ln in text.splitlines() if ln.strip().startswith("1  ")]
    assert lines, text
    for name in ("candidates.xlsx", "pareto.png", "efficiency_best.png", "loss_vs_fsw.png"):
        assert (out / name).stat().st_size > 0
    assert not list(out.glob(".*.part")) and not list(out.glob(".lossbudget-*"))
    from openpyxl import load_workbook

    wb = load_workbook(out / "candidates.xlsx", read_only=True)
    assert wb.sheetnames == ["candidates", "limits", "optimum_fsw", "notes"]
    rows = list(wb["candidates"].iter_rows(values_only=True))
    assert rows[0][:3] == ("rank", "variant_id", "variant")
    assert len(rows) == 37
    assert [r[0] for r in rows[1:]] == list(range(1, 37))


def test_cli_compare_failing_candidates_show_their_limit():
    result = CliRunner().invoke(main, ["compare", str(GROW), "--parts", str(GROW_PARTS)])
    assert result.exit_code == 0, result.output
    fails = [ln for ln in result.output.splitlines() if " FAIL " in ln]
    assert fails
    assert all("inductor.i_limit" in ln or "." in ln.split("FAIL")[1] for ln in fails)


@pytest.mark.parametrize(
    ("args", "expected"),
    [
        (["--vary", "operating.fsw=100 kHz:200 kHz"], "expected START:STOP:COUNT"),
        (["--vary", "inductor.lx=1 uH:2 uH:3"], "--vary: inductor.lx: not a key"),
        (["--vary", "inductor.l=1 uF:2 uF:3"], "expected inductance"),
        ([], "give --parts PARTS.toml, --vary"),
    ],
)
def test_cli_compare_bad_options_exit_2_one_line(args, expected):
    result = CliRunner().invoke(main, ["compare", str(GROW), *args])
    assert result.exit_code == 2
    assert expected in result.output
    assert len(result.output.strip().splitlines()) == 1


def test_cli_compare_bad_parts_file(tmp_path):
    path = tmp_path / "greenhouse_parts.toml"
    path.write_text('[[inductor]]\nname = "L1"\nl = "22 uF"\n')
    result = CliRunner().invoke(main, ["compare", str(GROW), "--parts", str(path)])
    assert result.exit_code == 2
    assert 'greenhouse_parts.toml: inductor[0].l: expected inductance (H), got "22 uF"' \
        in result.output
    assert not (tmp_path / "out").exists()


def test_variant_limit_check_is_the_same_in_blocks(monkeypatch):
    # memory is bounded by checking blocks of variants; the result must not depend on it
    import pandas as pd

    from lossbudget import limits

    v = vm.variants(GROW, parts=GROW_PARTS)
    whole = lb.check_limits(v)
    monkeypatch.setattr(limits, "VARIANT_BLOCK_POINTS", 2000)  # a few variants a block
    blocks = lb.check_limits(v)
    np.testing.assert_array_equal(whole.worst_status, blocks.worst_status)
    np.testing.assert_array_equal(whole.worst_limit, blocks.worst_limit)
    pd.testing.assert_frame_equal(whole.table, blocks.table)


def test_optimum_frequency_per_candidate_with_fsw_not_the_last_key():
    # Each candidate's optimum is the argmin of its own rows (checked by filtering the frame)
    design = lb.load_design(_closed_form_design())
    grid = np.arange(100e3, 250e3 + 1.0, 10e3)
    v = vm.variants(design, vary={"operating.fsw": grid, "inductor.l": ["33 uH", "68 uH"]})
    frame = compare(v, objective="full_load")
    opt = optimum_frequency(v, frame)
    assert opt["candidate"].tolist() == ["l=33 uH", "l=68 uH"]
    for label, f_opt in zip(opt["candidate"], opt["fsw_opt_hz"], strict=True):
        ell = 33e-6 if label == "l=33 uH" else 68e-6
        rows = frame[np.isclose([v.design(i).inductor.l.typ for i in frame["variant_id"]], ell)]
        assert f_opt == rows.loc[rows["objective_loss"].idxmin(), "operating.fsw"]
    # a larger inductance has less ripple to trade: its optimum frequency is lower (f* ∝ L^-2/3)
    assert opt["fsw_opt_hz"].iloc[1] < opt["fsw_opt_hz"].iloc[0]
