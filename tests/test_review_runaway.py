"""A point that runs away shows the temperatures of the coupled solve's last iteration,
marked as diverging, instead of no temperatures."""

from __future__ import annotations

from importlib import resources

import numpy as np
from click.testing import CliRunner
from numpy.testing import assert_allclose

from lossbudget.cli import main
from lossbudget.thermal import build_network, solve_coupled

DEMO = (resources.files("lossbudget") / "data" / "demo.toml").read_text("utf-8")


def test_last_iteration_of_a_linear_runaway_by_hand():
    # one node, 10 K/W to a 25 degC ambient, loss P(T) = 1 W + 0.2 W/K (T - 25 degC): loop
    # gain R*dP/dT = 2 >= 1. Hand iteration from the ambient, T_{k+1} = 25 + 10 P(T_k):
    # 35, 55, 95 degC; the steps 10, 20, 40 K grow by 2 twice, so the solve stops there as a
    # runaway (two successive step ratios >= 1) with 95 degC as its last iterate. A stable
    # point (0.05 W/K, gain 0.5) beside it has a solution and no diverging temperature.
    net = build_network(["part"], [("part", "ambient", 10.0)])
    slope = np.array([0.2, 0.05])

    def power_of(t, index):
        return 1.0 + slope[index, np.newaxis] * (t - 25.0)

    sol = solve_coupled(power_of, net, ambient=[25.0, 25.0])
    assert sol.runaway.tolist() == [True, False]
    assert_allclose(sol.last_temperatures[0], [95.0], rtol=1e-12)
    assert np.isnan(sol.last_temperatures[1]).all()
    # the stable root: T = 25 + 10 (1 + 0.05 (T - 25)) -> T - 25 = 10 / (1 - 0.5) = 20 K
    assert_allclose(sol.temperatures[1], [45.0], atol=0.01)


def test_point_shows_the_diverging_temperatures_of_a_runaway(tmp_path):
    # the demo's board at 40 K/W instead of 6 K/W runs away at 24 V, 2.5 A, 55 degC
    path = tmp_path / "hot.toml"
    path.write_text(DEMO.replace('rth_to_ambient = "6 K/W"', 'rth_to_ambient = "40 K/W"'),
                    encoding="utf-8")
    result = CliRunner().invoke(main, ["point", str(path), "--vin", "24 V", "--load", "2.5 A",
                                       "--ambient", "55 degC"])
    assert result.exit_code == 4  # an unsolved point: the "no point could be solved" status
    out = result.stdout
    assert out.count("thermal runaway") == 1  # the reason once
    assert "DIVERGING, not a solution" in out
    rows = {ln.split()[0]: ln.split()[1:] for ln in out.splitlines()
            if ln.startswith("  ") and len(ln.split()) >= 2
            and ln.split()[0] in ("switch", "rectifier", "inductor", "cin", "cout", "board")}
    assert set(rows) == {"switch", "rectifier", "inductor", "cin", "cout", "board"}
    rectifier = float(rows["rectifier"][0])
    # the last iterate below the 300 degC ceiling, above the rectifier's 150 degC rating
    assert 150.0 < rectifier < 300.0 and "past its limit" in " ".join(rows["rectifier"])
    # a point that solves shows the ordinary table, no diverging one
    ok = CliRunner().invoke(main, ["point", str(path), "--vin", "24 V", "--load", "0.5 A",
                                   "--ambient", "25 degC"])
    assert "DIVERGING" not in ok.stdout and "temperature (degC)" in ok.stdout
