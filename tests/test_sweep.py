"""Tests of sweep.py: maps against single solves, load axes, weighted efficiency, summaries."""

from __future__ import annotations

import dataclasses
import importlib.resources
import math
import tomllib

import numpy as np
import pytest
from numpy.testing import assert_allclose

import lossbudget
from lossbudget import DesignError
from lossbudget.sweep import load_axis, map_summary, sweep_rows, weighted_efficiency

DEMO = importlib.resources.files("lossbudget") / "data" / "demo.toml"

# Source: EN 50530:2010 + A1:2013 (European weighting, from the JRC-Ispra work): weights of
# the efficiency at 5, 10, 20, 30, 50 and 100 % of rated power.
EURO_LOADS = (0.05, 0.10, 0.20, 0.30, 0.50, 1.00)
EURO_WEIGHTS = (0.03, 0.06, 0.13, 0.10, 0.48, 0.20)
# Source: W. Bower, C. Whitaker, W. Erdman, M. Behnke, M. Fitzgerald, "Performance Test
# Protocol for Evaluating Inverters Used in Grid-Connected Photovoltaic Systems", Sandia
# National Laboratories, 2004/2005 (CEC weighting): 10, 20, 30, 50, 75 and 100 %.
CEC_LOADS = (0.10, 0.20, 0.30, 0.50, 0.75, 1.00)
CEC_WEIGHTS = (0.04, 0.05, 0.12, 0.21, 0.53, 0.05)
# Source: 10 CFR Part 430, Subpart B, Appendix Z, and EU Code of Conduct on External Power
# Supplies, Version 5 (2013): arithmetic mean at 25, 50, 75, 100 % of rated output current.
MEAN_LOADS = (0.25, 0.50, 0.75, 1.00)


def _raw_demo() -> dict:
    return tomllib.loads(DEMO.read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def demo():
    return lossbudget.load_design(DEMO)


@pytest.fixture(scope="module")
def short_on_time():
    """The demo with a 1 us minimum on-time: at 32 V the 5 % load point needs a shorter one.

    Hand calculation: DCM boost at 5 % load, 32 V in, 48 V out, 22 uH, 200 kHz: the solved duty
    is about 0.17, so the on-time is about 0.85 us < 1 us; at 10 % load about 1.2 us.
    """
    raw = _raw_demo()
    raw["operating"]["min_on_time"] = "1 us"
    return lossbudget.load_design(raw)


# --------------------------------------------------------------------------------------------
# maps against single solves
# --------------------------------------------------------------------------------------------


def test_map_values_equal_solve_at_grid_points(demo):
    # Contract (STYLE §6.3): a grid result equals the point solved on its own. The coupled
    # thermal solve stops at an error within 0.01 K (SPEC §2.7), so points solved in another
    # batch may differ by that much: temperatures to 0.02 K, powers to a matching 1e-5.
    vin = np.linspace(18.0, 32.0, 6)
    load = np.linspace(0.4, 4.0, 8)
    grid = lossbudget.sweep(demo, vin=vin, load=load)
    assert grid.shape == (6, 8)
    for i, j in [(0, 0), (0, 7), (2, 3), (5, 0), (5, 7), (4, 1)]:
        one = lossbudget.solve(demo, vin=vin[i], load=load[j])
        assert_allclose(grid.efficiency[i, j], one.efficiency, rtol=1e-5)
        assert_allclose(grid.total_loss[i, j], one.total_loss, rtol=1e-5)
        assert_allclose(grid.duty[i, j], one.duty, rtol=1e-5)
        assert grid.dcm[i, j] == one.dcm
        for node in one.temperatures:
            assert_allclose(grid.temperature(node)[i, j], one.temperature(node), atol=0.02)
        for comp, mech in one.losses:
            assert_allclose(grid.loss(comp, mech)[i, j], one.loss(comp, mech), rtol=1e-5,
                            atol=1e-9)


def test_sweep_rows_equals_one_sweep(demo):
    # Invariant: solving in blocks of input-voltage rows changes nothing but the batching.
    vin = np.linspace(18.0, 32.0, 5)
    load = np.linspace(0.2, 4.0, 6)
    whole = lossbudget.sweep(demo, vin=vin, load=load)
    calls = []
    blocks = sweep_rows(demo, vin=vin, load=load, rows=2,
                        progress=lambda done, total: calls.append((done, total)))
    assert calls == [(2, 5), (4, 5), (5, 5)]
    assert blocks.shape == whole.shape
    assert_allclose(blocks.efficiency, whole.efficiency, rtol=1e-5)
    for node in whole.temperatures:
        assert_allclose(blocks.temperature(node), whole.temperature(node), atol=0.02)
    for key in whole.losses:
        assert_allclose(blocks.losses[key], whole.losses[key], rtol=1e-5, atol=1e-9)
    for key, st in whole.statuses.items():
        assert blocks.statuses[key].kind == st.kind
        np.testing.assert_array_equal(blocks.status(*key), whole.status(*key))
    np.testing.assert_array_equal(blocks.coords["vin"], whole.coords["vin"])
    np.testing.assert_array_equal(blocks.coords["load"], whole.coords["load"])
    np.testing.assert_array_equal(blocks.dcm, whole.dcm)
    assert len(blocks.point_table()) == 30


# --------------------------------------------------------------------------------------------
# load axes
# --------------------------------------------------------------------------------------------


def test_load_axis_linear_in_amperes(demo):
    axis = load_axis(demo, start=0.2, stop=4.0, count=20)
    assert_allclose(axis, np.linspace(0.2, 4.0, 20), rtol=1e-15)
    assert_allclose(np.diff(axis), 0.2, rtol=1e-12)  # hand calculation: (4 - 0.2) / 19


def test_load_axis_logarithmic_has_equal_ratios(demo):
    axis = load_axis(demo, start=0.04, stop=4.0, count=5, log=True)
    # hand calculation: two decades in four steps, ratio 10^(2/4) = sqrt(10)
    assert_allclose(axis, [0.04, 0.04 * 10**0.5, 0.4, 0.4 * 10**0.5, 4.0], rtol=1e-12)


def test_load_axis_percent_of_rated(demo):
    axis = load_axis(demo, start=5, stop=100, count=20, percent=True)
    # the demo's rated output current is 4 A: 5 % is 0.2 A, 100 % is 4 A
    assert demo.operating.iout_rated == 4.0
    assert_allclose(axis[[0, -1]], [0.2, 4.0], rtol=1e-12)
    assert_allclose(load_axis(demo, start=10, stop=100, count=2, percent=True, log=True),
                    [0.4, 4.0], rtol=1e-12)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"start": 0.0, "stop": 4.0, "count": 5, "log": True}, r"above 0 on a logarithmic"),
        ({"start": 0.2, "stop": 4.0, "count": 0}, r"point count of at least 1"),
        ({"start": 0.2, "stop": 4.0, "count": 2.5}, r"point count"),
        ({"start": -1.0, "stop": 4.0, "count": 5}, r"loads of 0 or more"),
        ({"start": 4.0, "stop": 0.2, "count": 5}, r"start <= stop"),
        ({"start": 0.2, "stop": 4.0, "count": 1}, r"2 or more points"),
        ({"start": 5, "stop": math.inf, "count": 3, "percent": True}, r"percent of rated"),
    ],
)
def test_load_axis_rejects_bad_ranges(demo, kwargs, match):
    with pytest.raises(DesignError, match=match):
        load_axis(demo, **kwargs)


# --------------------------------------------------------------------------------------------
# weighted efficiency
# --------------------------------------------------------------------------------------------


def _by_name(figures, vin):
    return {f.name: f for f in figures if f.vin == vin}


def test_weighted_figures_recomputed_from_the_published_weights(demo):
    # The weights as published sum to 1 (EN 50530; Bower et al.); a typo would show here.
    assert math.isclose(sum(EURO_WEIGHTS), 1.0, rel_tol=1e-12)
    assert math.isclose(sum(CEC_WEIGHTS), 1.0, rel_tol=1e-12)
    figures = weighted_efficiency(demo)
    op = demo.operating
    assert [f.vin for f in figures[::4]] == [op.vin.min, op.vin.nom, op.vin.max]
    for vin in (op.vin.min, op.vin.nom, op.vin.max):
        got = _by_name(figures, vin)
        assert set(got) == {"european", "cec", "mean_25_100", "at_10pct"}

        def eta(fraction, vin=vin):
            return float(lossbudget.solve(demo, vin=vin, load_fraction=fraction).efficiency)

        euro = sum(w * eta(f) for f, w in zip(EURO_LOADS, EURO_WEIGHTS, strict=True))
        cec = sum(w * eta(f) for f, w in zip(CEC_LOADS, CEC_WEIGHTS, strict=True))
        mean = sum(eta(f) for f in MEAN_LOADS) / 4.0
        # tolerance: the coupled solve's 0.01 K stopping error (SPEC §2.7) between batches
        assert_allclose(got["european"].value, euro, rtol=1e-6)
        assert_allclose(got["cec"].value, cec, rtol=1e-6)
        assert_allclose(got["mean_25_100"].value, mean, rtol=1e-6)
        assert_allclose(got["at_10pct"].value, eta(0.10), rtol=1e-6)
        assert all(f.reason == "" for f in got.values())
    assert "EN 50530" in figures[0].source
    assert "Sandia" in figures[1].source
    assert "Appendix Z" in figures[2].source
    assert "Code of Conduct" in figures[3].source


def test_weighted_figure_is_not_interpolated(demo):
    # The figure at the 10 % point must equal a solve at exactly 10 % of 4 A = 0.4 A, not a
    # value read off a coarse map (here the map's neighbours are 5 % and 20 %).
    coarse = lossbudget.sweep(demo, vin=[24.0], load_fraction=[0.05, 0.20])
    interpolated = float(np.mean(coarse.efficiency))
    exact = float(lossbudget.solve(demo, vin=24.0, load=0.4).efficiency)
    got = _by_name(weighted_efficiency(demo, vin=24.0), 24.0)["at_10pct"].value
    assert_allclose(got, exact, rtol=1e-6)
    assert abs(exact - interpolated) > 1e-4  # the check can tell the two apart


def test_flagged_point_makes_the_figure_na_with_its_reason(short_on_time):
    figures = weighted_efficiency(short_on_time)
    at_max = _by_name(figures, 32.0)
    euro = at_max["european"]
    assert math.isnan(euro.value)
    assert euro.reason.startswith("5 % load flagged:")
    assert "operating.min_on_time" in euro.reason
    # the other figures do not use the 5 % point and stay numbers
    for name in ("cec", "mean_25_100", "at_10pct"):
        assert math.isfinite(at_max[name].value), name
        assert at_max[name].reason == ""
    # at the nominal input the 5 % point's on-time is long enough
    assert math.isfinite(_by_name(figures, 24.0)["european"].value)


def test_weighted_figure_is_frozen(demo):
    fig = weighted_efficiency(demo, vin=24.0)[0]
    with pytest.raises(dataclasses.FrozenInstanceError):
        fig.value = 1.0  # type: ignore[misc]


# --------------------------------------------------------------------------------------------
# map summary
# --------------------------------------------------------------------------------------------


def test_map_summary_peak_and_rated_column(short_on_time):
    vin = np.linspace(18.0, 32.0, 6)
    load = load_axis(short_on_time, start=5, stop=100, count=8, percent=True)
    b = lossbudget.sweep(short_on_time, vin=vin, load=load)
    s = map_summary(b, rated_load=4.0)
    k = np.unravel_index(np.nanargmax(b.efficiency), b.shape)
    assert s.peak_efficiency == b.efficiency[k]
    assert (s.peak_vin, s.peak_load) == (vin[k[0]], load[k[1]])
    assert s.rated_load == 4.0
    np.testing.assert_array_equal(s.rated_vin, vin)
    np.testing.assert_array_equal(s.rated_efficiency, b.efficiency[:, -1])
    assert s.points == 48
    assert s.flagged_points == int(b.flagged.sum()) > 0
    assert s.flagged_reasons[0][0] == "on-time below operating.min_on_time"
    assert s.dcm_points == int((b.dcm & ~b.flagged).sum())
    # no rated current given: the map's largest load
    assert map_summary(b).rated_load == load[-1]
