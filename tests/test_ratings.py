"""Ratings at every point (SPEC §2.10): the over_rating flag, point's report, the point table
and the map's shading.

The check values are the comparisons themselves, computed here from the design's datasheet
points: the saturation current linear between its temperature points and continued past the
hottest (common practice), the blocking voltage of the buck's switch, Vin (Erickson &
Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 2), plus the allowance.
"""

from __future__ import annotations

import importlib.resources
import tomllib

import numpy as np
from click.testing import CliRunner

import lossbudget as lb
from lossbudget.cli import main

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"


def _demo():
    return lb.load_design(DEMO)


def _i_sat_by_hand(t):
    """Demo inductor: 21 A at 25 degC, 17 A at 100 degC; linear, continued past 100 degC."""
    return 21.0 + (17.0 - 21.0) * (t - 25.0) / 75.0


def test_peak_current_over_saturation_at_temperature_is_flagged_with_part_and_quantity():
    b = lb.solve(_demo(), vin=24.0, load=np.array([4.0, 6.0, 8.0, 10.0]))
    assert not b.flagged.any()
    i_pk = b.stress("inductor", "i_pk")
    over = i_pk > _i_sat_by_hand(b.temperature("inductor"))
    assert over.any() and not over.all()  # the sweep crosses the rating
    hot = b.temperature("inductor") > 125.0  # demo inductor.t_max
    np.testing.assert_array_equal(b.flags["over_rating"], over | hot)
    for k in np.flatnonzero(over):
        assert "inductor i_pk" in b.rating_reasons[k]
    for k in np.flatnonzero(hot):
        assert "inductor t_hot" in b.rating_reasons[k]
    assert b.rating_reasons[0] == ""


def test_blocking_voltage_plus_spike_over_rating_is_flagged():
    raw = tomllib.loads(DEMO.read_text(encoding="utf-8"))
    raw["switch"]["vds_rated"] = "52 V"  # 48 V + 6 V spike passes it
    b = lb.solve(lb.load_design(raw), vin=24.0, load=2.0)
    v = float(b.stress("switch", "v_pk")) + 6.0
    assert v > 52.0
    assert bool(b.flags["over_rating"])
    assert "switch v_pk" in str(b.rating_reasons)
    table = b.point_table()
    assert "switch v_pk" in table["over_rating"][0]


def test_point_prints_ratings_with_design_and_rated_limits():
    result = CliRunner().invoke(main, ["point", str(DEMO), "--load", "10 A"])
    assert result.exit_code == 0, result.output
    out = result.output
    assert "OVER RATING: " in out and "inductor i_pk" in out
    assert "design limit (degC)" in out and "rated (degC)" in out
    assert "design limit" in out and "rated" in out
    # the inductor's temperature row: the moderate profile's design limit (t_max − 15 K,
    # lossbudget/data/derating.toml) beside the rating, 125 degC
    rows = [x.split() for x in out.splitlines()]
    temp = next(r for r in rows if r[:1] == ["inductor"] and len(r) >= 6 and r[2] == "110")
    assert temp[3] == "125" and temp[-2:] == ["OVER", "RATING"]
    ipk = next(r for r in rows if r[:2] == ["inductor", "i_pk"])
    assert "OVER" in ipk
    nominal = CliRunner().invoke(main, ["point", str(DEMO)])
    assert "OVER RATING" not in nominal.output


def test_unsolvable_point_at_low_frequency_is_flagged_not_a_number():
    """--fsw 1 kHz: the ripple is 200 times the nominal; the point cannot be solved (the
    inductor runs away thermally) and says why, never a made-up number."""
    result = CliRunner().invoke(main, ["point", str(DEMO), "--fsw", "1 kHz"])
    assert result.exit_code == 4  # nothing solved (the exit statuses in the README)
    assert "not solved:" in result.output


def test_map_shades_over_rating_points(tmp_path):
    """The map's over-rating region is hatched in vermillion; a map without such points has
    none of that colour beyond anti-aliased text (pixel count, as the flagged-grey test)."""
    from matplotlib.image import imread

    from lossbudget.output import plots

    d = _demo()
    edge = np.array([int(plots.OVER_RATING_EDGE[k:k + 2], 16) / 255 for k in (1, 3, 5)])

    def count(budget, name):
        rgb = imread(plots.efficiency_map(budget, tmp_path / name))[..., :3]
        return int(np.all(np.abs(rgb - edge) < 0.08, axis=2).sum())

    clean = lb.sweep(d, vin=np.linspace(18, 32, 5), load=np.linspace(0.5, 4.0, 6))
    over = lb.sweep(d, vin=np.linspace(18, 32, 5), load=np.linspace(0.5, 9.0, 6))
    assert not clean.flags["over_rating"].any() and over.flags["over_rating"].any()
    assert count(over, "over.png") > count(clean, "clean.png") + 500
