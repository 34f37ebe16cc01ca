"""Tests of lossbudget.thermal: hand-solved networks and the coupled fixed point.

Sources: J. P. Holman, Heat Transfer, 10th ed., McGraw-Hill, 2010 (thermal-resistance
analogy: series resistances add, parallel ones add as conductances; REFERENCES §9.2); the
shared-heatsink relation T_S = T_A + θ_SA·ΣP, T_J = T_S + P·(θ_JC + θ_CS) (common practice,
REFERENCES §9.2); the linear-loss closed form and the loop-gain stability criterion of the
electro-thermal fixed point (derived, REFERENCES §9.5); scipy.optimize.brentq as an
independent root finder. Part values are invented; every check value is computed in the test.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from lossbudget.thermal import build_network, solve_coupled

# ---------------------------------------------------------------------------------------------
# Networks solved by hand
# ---------------------------------------------------------------------------------------------


def test_series_chain_junction_case_sink_ambient():
    # Source: Holman, Heat Transfer (2010), series resistances add.
    # Junction -1.5 K/W- case -0.5 K/W- heatsink -4 K/W- ambient, 3 W at the junction, 40 degC:
    #   T_sink = 40 + 4*3 = 52, T_case = 52 + 0.5*3 = 53.5, T_j = 53.5 + 1.5*3 = 58.
    net = build_network(
        ["switch", "switch.case", "heatsink"],
        [("switch", "switch.case", 1.5), ("switch.case", "heatsink", 0.5),
         ("heatsink", "ambient", 4.0)],
    )
    t = net.temperatures([3.0, 0.0, 0.0], ambient=40.0)
    assert_allclose(t, [58.0, 53.5, 52.0], rtol=0, atol=1e-9)
    # Z(switch, switch) is the sum of the chain: 1.5 + 0.5 + 4 = 6 K/W.
    assert_allclose(net.transfer_resistance[net.index("switch"), 0], 6.0, rtol=0, atol=1e-9)


def test_parallel_paths_add_as_conductances():
    # Source: Holman, Heat Transfer (2010), parallel paths R = 1/sum(1/R_i).
    # Inductor to ambient through 20 K/W and 30 K/W, and a second 60 K/W listed for the same
    # pair: 1/R = 1/20 + 1/30 + 1/60 = (3 + 2 + 1)/60 = 1/10, so R = 10 K/W; 2 W -> 20 K.
    net = build_network(
        ["inductor"],
        [("inductor", "ambient", 20.0), ("ambient", "inductor", 30.0),
         ("inductor", "ambient", 60.0)],
    )
    assert_allclose(net.transfer_resistance, [[10.0]], rtol=0, atol=1e-9)
    assert_allclose(net.temperature_rise([2.0]), [20.0], rtol=0, atol=1e-9)


def test_sink_shared_by_two_parts():
    # Source: common practice (REFERENCES §9.2): T_S = T_A + θ_SA*(P1 + P2),
    # T_Jk = T_S + P_k*(θ_JC,k + θ_CS,k).
    # θ_SA = 2.5; switch θ_JC + θ_CS = 1.2 + 0.3; rectifier 2.0 + 0.5; P = 4 W and 2 W; 30 degC:
    #   T_S = 30 + 2.5*6 = 45; T_switch = 45 + 4*1.5 = 51; T_rect = 45 + 2*2.5 = 50.
    net = build_network(
        ["switch", "switch.case", "rectifier", "rectifier.case", "heatsink"],
        [("switch", "switch.case", 1.2), ("switch.case", "heatsink", 0.3),
         ("rectifier", "rectifier.case", 2.0), ("rectifier.case", "heatsink", 0.5),
         ("heatsink", "ambient", 2.5)],
    )
    t = net.temperatures([4.0, 0.0, 2.0, 0.0, 0.0], ambient=30.0)
    assert_allclose(t[[0, 2, 4]], [51.0, 50.0, 45.0], rtol=0, atol=1e-9)
    # Case nodes: T_C = T_S + P*θ_CS: 45 + 4*0.3 = 46.2 and 45 + 2*0.5 = 46.
    assert_allclose(t[[1, 3]], [46.2, 46.0], rtol=0, atol=1e-9)


def test_case_node_with_two_paths():
    # Source: Holman, Heat Transfer (2010), series and parallel resistances.
    # Junction -2- case; from the case 40 K/W to ambient (top) in parallel with the chain
    # case -3- board -10- ambient. 1.06 W at the junction, 25 degC.
    #   R_case-ambient = 40*13/(40 + 13) = 520/53 K/W; T_case = 25 + 1.06*520/53 = 25 + 10.4;
    #   T_j = 35.4 + 2*1.06 = 37.52; the case rise divides over the chain by 10/13:
    #   T_board = 25 + 10.4*10/13 = 25 + 8 = 33.
    net = build_network(
        ["switch", "switch.case", "board"],
        [("switch", "switch.case", 2.0), ("switch.case", "ambient", 40.0),
         ("switch.case", "board", 3.0), ("board", "ambient", 10.0)],
    )
    t = net.temperatures([1.06, 0.0, 0.0], ambient=25.0)
    assert_allclose(t, [37.52, 35.4, 33.0], rtol=0, atol=1e-9)


def test_sink_to_sink_link():
    # Hand calculation, nodal analysis (Holman, Heat Transfer, 2010, conduction analogy).
    # heatsink -5- ambient, board -8- ambient, heatsink -3- board; switch -1- heatsink,
    # inductor -6- board. Conductances g_h = 1/5, g_b = 1/8, g_l = 1/3:
    #   [g_h + g_l, -g_l; -g_l, g_b + g_l] [dT_h; dT_b] = [P_s; P_l],
    #   det = g_h*g_b + g_l*(g_h + g_b) = 1/40 + 13/120 = 2/15,
    #   dT_h = ((g_b + g_l)*P_s + g_l*P_l)*15/2 = 3.4375*P_s + 2.5*P_l,
    #   dT_b = (g_l*P_s + (g_h + g_l)*P_l)*15/2 = 2.5*P_s + 4*P_l.
    # P_s = 4 W, P_l = 2 W, 40 degC: T_h = 40 + 13.75 + 5 = 58.75, T_b = 40 + 10 + 8 = 58,
    # T_switch = 58.75 + 1*4 = 62.75, T_inductor = 58 + 6*2 = 70.
    net = build_network(
        ["switch", "inductor", "heatsink", "board"],
        [("switch", "heatsink", 1.0), ("inductor", "board", 6.0),
         ("heatsink", "ambient", 5.0), ("board", "ambient", 8.0), ("heatsink", "board", 3.0)],
    )
    t = net.temperatures([4.0, 2.0, 0.0, 0.0], ambient=40.0)
    assert_allclose(t, [62.75, 70.0, 58.75, 58.0], rtol=0, atol=1e-9)
    sinks = [net.index("heatsink"), net.index("board")]
    assert_allclose(net.transfer_resistance[np.ix_(sinks, sinks)], [[3.4375, 2.5], [2.5, 4.0]],
                    rtol=0, atol=1e-9)
    # Z = G^-1 (definition): G·Z = I.
    assert_allclose(net.conductance @ net.transfer_resistance, np.eye(4), rtol=0, atol=1e-12)


def test_rise_broadcasts_over_leading_axes():
    # Invariant: one matrix product over a (3, 4) grid equals the point-by-point rises, and
    # the ambient broadcasts over the leading axes.
    net = build_network(
        ["switch", "inductor", "heatsink"],
        [("switch", "heatsink", 1.0), ("inductor", "ambient", 15.0),
         ("heatsink", "ambient", 3.0), ("inductor", "heatsink", 7.0)],
    )
    rng = np.random.default_rng(7)
    power = rng.uniform(0.0, 5.0, size=(3, 4, 3))
    ambient = rng.uniform(-20.0, 60.0, size=(3, 1))
    grid = net.temperatures(power, ambient=ambient)
    assert grid.shape == (3, 4, 3)
    for i in range(3):
        for k in range(4):
            one = net.temperatures(power[i, k], ambient=ambient[i, 0])
            assert_allclose(grid[i, k], one, rtol=1e-12, atol=0)
    with pytest.raises(ValueError, match="last axis"):
        net.temperature_rise(np.ones((4, 2)))


def test_node_without_path_to_ambient_raises():
    # A thermal island has no steady solution (G singular): the error names its nodes.
    with pytest.raises(ValueError, match=r"no path to 'ambient' from node\(s\) cout, inductor"):
        build_network(
            ["switch", "cout", "inductor"],
            [("switch", "ambient", 20.0), ("cout", "inductor", 5.0)],
        )


@pytest.mark.parametrize(
    ("entry", "message"),
    [
        (("switch", "ambient", 0.0), "positive finite"),
        (("switch", "ambient", -3.0), "positive finite"),
        (("switch", "ambient", math.inf), "positive finite"),
        (("switch", "ambient", math.nan), "positive finite"),
        (("switch", "ambient", "hot"), "expected a number"),
        (("switch", "heatsnk", 2.0), "unknown node.*'heatsnk'"),
        (("switch", "switch", 2.0), "joins a node to itself"),
        (("switch", 2.0), r"\(node_a, node_b, r_k_per_w\)"),
    ],
)
def test_bad_resistance_raises(entry, message):
    with pytest.raises(ValueError, match=message):
        build_network(["switch", "heatsink"], [("heatsink", "ambient", 3.0), entry])


@pytest.mark.parametrize(
    ("nodes", "message"),
    [
        (["switch", "ambient"], "reserved"),
        (["switch", "switch"], "duplicate node name"),
        ([], "at least one node"),
        (["switch", ""], "non-empty"),
    ],
)
def test_bad_nodes_raise(nodes, message):
    with pytest.raises(ValueError, match=message):
        build_network(nodes, [("switch", "ambient", 3.0)])


def test_index_of_unknown_node_raises():
    net = build_network(["switch"], [("switch", "ambient", 3.0)])
    assert net.index("switch") == 0
    with pytest.raises(ValueError, match="no node 'ambient'"):
        net.index("ambient")


# ---------------------------------------------------------------------------------------------
# Coupled fixed point
# ---------------------------------------------------------------------------------------------

# One part whose loss rises linearly with temperature, P = P0*(1 + a*(T - T0)), through
# R_TH to an ambient T_A. Derivation (REFERENCES §9.5, derived):
#   T = T_A + R*P0*(1 + a*(T - T0))  =>  T*(1 - a*R*P0) = T_A + R*P0*(1 - a*T0)
#   =>  T = (T_A + R*P0*(1 - a*T0)) / (1 - a*R*P0),   loop gain g = R*dP/dT = a*R*P0.
# For g >= 1 the only root lies below the ambient (or there is none): the iteration from the
# ambient grows without bound, a thermal runaway.
R_TH, P0, T0, T_A = 10.0, 0.5, 25.0, 25.0


def _one_part(a):
    net = build_network(["part"], [("part", "ambient", R_TH)])
    a = np.asarray(a, dtype=float)

    def power_of(t, index):
        return P0 * (1.0 + a[index, np.newaxis] * (t - T0))

    return net, power_of


def test_linear_loss_matches_closed_form_and_runaway_at_unit_gain():
    gains = np.array([0.2, 0.5, 0.8, 0.9, 0.95, 1.0, 1.05, 1.5])
    a = gains / (R_TH * P0)
    net, power_of = _one_part(a)
    sol = solve_coupled(power_of, net, ambient=np.full(gains.size, T_A))
    stable = gains < 1.0
    with np.errstate(divide="ignore"):  # g = 1: no finite root
        expected = (T_A + R_TH * P0 * (1.0 - a * T0)) / (1.0 - a * R_TH * P0)
    # For g > 1 the closed form's root lies below the ambient: unreachable from T_A.
    assert (expected[gains > 1.0] < T_A).all()
    assert_allclose(sol.temperatures[stable, 0], expected[stable], rtol=0, atol=0.01)
    # Reported temperatures satisfy the network for the reported powers exactly.
    assert_allclose(sol.temperatures[stable], T_A + R_TH * sol.powers[stable], rtol=1e-12)
    # The loop gain of a linear model is a*R*P0 at any temperature (forward difference of a
    # straight line: exact but for rounding).
    assert_allclose(sol.loop_gain[stable], gains[stable], rtol=1e-6)
    np.testing.assert_array_equal(sol.runaway, ~stable)
    np.testing.assert_array_equal(sol.solved, stable)
    assert not sol.not_converged.any()
    assert np.isnan(sol.temperatures[~stable]).all()
    assert np.isnan(sol.powers[~stable]).all()
    assert all(r.startswith("thermal runaway:") for r in sol.reason[~stable])
    assert all(r == "" for r in sol.reason[stable])


def test_linear_loss_iteration_count_bounded_and_growing():
    # Hand calculation: from T_A the k-th step is s_k = s_1*g^(k-1), s_1 = R*P0 = 5 K (T0 =
    # T_A). The stop test s_k/(1 - g) <= tol needs two gain ratios (k >= 3), so the point stops
    # at k = max(3, 1 + ceil(ln(tol*(1 - g)/s_1)/ln g)); one iteration either side for rounding
    # at the threshold.
    gains = np.array([0.1, 0.3, 0.5, 0.7, 0.8, 0.9, 0.95])
    net, power_of = _one_part(gains / (R_TH * P0))
    tol = 0.01
    sol = solve_coupled(power_of, net, ambient=np.full(gains.size, T_A), tol=tol)
    s1 = R_TH * P0
    k = np.maximum(3, 1 + np.ceil(np.log(tol * (1.0 - gains) / s1) / np.log(gains)))
    assert sol.solved.all()
    assert (np.abs(sol.iterations - k) <= 1).all(), (sol.iterations, k)
    assert (np.diff(sol.iterations) > 0).all()
    assert sol.iterations.max() < 300


def test_stable_gain_too_hot_passes_ceiling():
    # Gain 0.99: T = 25 + 5/(1 - 0.99) = 525 degC (closed form above) is past the 300 degC
    # ceiling, so the iterate crosses it: runaway, naming the node.
    net, power_of = _one_part([0.99 / (R_TH * P0)])
    sol = solve_coupled(power_of, net, ambient=[T_A])
    assert sol.runaway[0]
    assert sol.reason[0] == "thermal runaway: node part passed 300 degC"


def test_not_converged_after_max_iter():
    # Gain 0.9 needs about 67 iterations (count above); five are not enough.
    net, power_of = _one_part([0.9 / (R_TH * P0)])
    sol = solve_coupled(power_of, net, ambient=[T_A], max_iter=5)
    assert sol.not_converged[0] and not sol.runaway[0]
    assert sol.iterations[0] == 5
    assert np.isnan(sol.temperatures[0]).all()
    assert sol.reason[0].startswith("not converged after 5 iterations")


def test_repelling_root_reached_exactly_is_flagged_by_the_jacobian():
    # Derived (REFERENCES §9.5): a fixed point is stable iff R*dP/dT < 1. Loss constant
    # P0 = 5 W up to T1 = 75 degC, then rising with slope 0.2 W/K; R = 10 K/W, T_A = 25:
    # the first step lands on T = 25 + 10*5 = 75 exactly, the second step is zero, but the
    # slope just above is R*0.2 = 2 >= 1: flagged by the Jacobian check.
    net = build_network(["part"], [("part", "ambient", 10.0)])

    def power_of(t, index):
        return 5.0 + 0.2 * np.maximum(t - 75.0, 0.0)

    sol = solve_coupled(power_of, net, ambient=[25.0])
    assert sol.runaway[0]
    assert_allclose(sol.loop_gain[0], 2.0, rtol=1e-6)
    assert sol.reason[0] == "thermal runaway: loop gain 2.000 >= 1 (network)"


def _two_parts_on_a_sink(theta_sa):
    # switch -2- heatsink, rectifier -3- heatsink, heatsink -theta_sa- ambient.
    # Linear losses P_i = P0_i*(1 + a_i*(T_i - 25)), slopes k_i = P0_i*a_i (coefficients
    # exaggerated to bring the pair near its limit).
    net = build_network(
        ["switch", "rectifier", "heatsink"],
        [("switch", "heatsink", 2.0), ("rectifier", "heatsink", 3.0),
         ("heatsink", "ambient", theta_sa)],
    )
    p0 = np.array([1.0, 1.0, 0.0])
    a = np.array([0.075, 0.046, 0.0])

    def power_of(t, index):
        return p0 * (1.0 + a * (t - 25.0))

    return net, power_of, p0, a


def _spectral_radius_by_hand(z11, z12, z22, k1, k2):
    # M = Z·diag(k) = [[z11*k1, z12*k2], [z12*k1, z22*k2]]; eigenvalues of a 2x2:
    # lambda = tr/2 ± sqrt(tr^2/4 - det); both real here (M has positive entries).
    tr = z11 * k1 + z22 * k2
    det = (z11 * z22 - z12 * z12) * k1 * k2
    return tr / 2.0 + math.sqrt(tr * tr / 4.0 - det)


def test_two_parts_each_stable_alone_run_away_together():
    # theta_sa = 10 K/W: Z11 = 2 + 10 = 12, Z22 = 3 + 10 = 13, Z12 = 10 K/W;
    # k1 = 0.075, k2 = 0.046 W/K. Alone: Z11*k1 = 0.9 < 1, Z22*k2 = 0.598 < 1.
    # Together: tr = 0.9 + 0.598 = 1.498, det = (156 - 100)*0.00345 = 0.1932,
    # rho = 0.749 + sqrt(0.561001 - 0.1932) = 1.3555 > 1: runaway.
    rho = _spectral_radius_by_hand(12.0, 10.0, 13.0, 0.075, 0.046)
    assert_allclose(rho, 0.749 + math.sqrt(0.561001 - 0.1932), rtol=1e-12)
    assert rho > 1.0
    net, power_of, _, _ = _two_parts_on_a_sink(10.0)
    sol = solve_coupled(power_of, net, ambient=[25.0], heated=["switch", "rectifier"])
    assert sol.runaway[0]
    assert sol.reason[0].startswith("thermal runaway:")

    # Each part alone (the other unpowered) on the same sink is stable, as the gains say:
    # T_j = 25 + Z_jj*P0_j/(1 - Z_jj*k_j): switch 25 + 12/0.1 = 145, rectifier 25 + 13/0.402.
    for j, expected in ((0, 25.0 + 12.0 / 0.1), (1, 25.0 + 13.0 / 0.402)):
        mask = np.zeros(3)
        mask[j] = 1.0

        def alone(t, index, mask=mask):
            return mask * power_of(t, index)

        one = solve_coupled(alone, net, ambient=[25.0], heated=[j])
        assert one.solved[0]
        assert_allclose(one.temperatures[0, j], expected, rtol=0, atol=0.01)


def test_two_parts_on_a_better_sink_solve():
    # theta_sa = 2 K/W: Z11 = 4, Z22 = 5, Z12 = 2 K/W. tr = 0.3 + 0.23 = 0.53,
    # det = (20 - 4)*0.00345 = 0.0552, rho = 0.265 + sqrt(0.070225 - 0.0552) = 0.387577...
    rho = _spectral_radius_by_hand(4.0, 2.0, 5.0, 0.075, 0.046)
    assert_allclose(rho, 0.265 + math.sqrt(0.070225 - 0.0552), rtol=1e-12)
    net, power_of, p0, a = _two_parts_on_a_sink(2.0)
    sol = solve_coupled(power_of, net, ambient=[25.0], heated=[0, 1])
    assert sol.solved[0]
    assert_allclose(sol.loop_gain[0], rho, rtol=1e-6)
    # Linear fixed point in closed form: P = p0*(1 - 25 a) + diag(p0*a)*T, so
    # (I - Z·diag(p0*a))·T = T_A + Z·p0*(1 - 25 a), solved with numpy.
    z = net.transfer_resistance
    expected = np.linalg.solve(np.eye(3) - z * (p0 * a), 25.0 + z @ (p0 * (1.0 - 25.0 * a)))
    assert_allclose(sol.temperatures[0], expected, rtol=0, atol=0.01)
    # Every node heated (the default) gives the same loop gain: the sink column is zero.
    full = solve_coupled(power_of, net, ambient=[25.0])
    assert_allclose(full.loop_gain[0], rho, rtol=1e-6)


# Leakage-driven part: P(T) = P_FWD + I0*V*2^((T - 25)/10) (doubling every 10 K, common
# practice, SPEC §2.6) on a poor 40 K/W path.
R_POOR, P_FWD, I0, V_R = 40.0, 0.3, 0.25e-3, 20.0


def _leakage_power(t):
    return P_FWD + I0 * V_R * 2.0 ** ((t - 25.0) / 10.0)


def test_leakage_part_holds_at_low_ambient_on_the_lower_root_and_runs_away_when_hot():
    net = build_network(["rectifier"], [("rectifier", "ambient", R_POOR)])

    ambients = np.array([50.0, 70.0])

    def power_of(t, index):
        return _leakage_power(t)

    sol = solve_coupled(power_of, net, ambient=ambients)

    def residual(t, t_a):
        return t_a + R_POOR * _leakage_power(t) - t

    # The residual is convex; its minimum is where the loop gain R*dP/dT = 1:
    #   R*I0*V*ln2/10 * 2^((T - 25)/10) = 1  =>  T* = 25 + 10*log2(10/(R*I0*V*ln2)).
    t_star = 25.0 + 10.0 * math.log2(10.0 / (R_POOR * I0 * V_R * math.log(2.0)))
    # 50 degC: two roots, bracketed either side of T* and found with scipy's brentq.
    assert residual(t_star, 50.0) < 0.0
    lower = brentq(residual, 50.0, t_star, args=(50.0,), xtol=1e-12)
    upper = brentq(residual, t_star, 400.0, args=(50.0,), xtol=1e-12)
    assert sol.solved[0]
    assert_allclose(sol.temperatures[0, 0], lower, rtol=0, atol=0.01)
    assert upper - lower > 20.0
    gain_at_lower = R_POOR * I0 * V_R * math.log(2.0) / 10.0 * 2.0 ** ((lower - 25.0) / 10.0)
    assert gain_at_lower < 1.0
    assert_allclose(sol.loop_gain[0], gain_at_lower, rtol=1e-4)
    # 70 degC: the residual's minimum is positive, so no root exists: runaway.
    assert residual(t_star, 70.0) > 0.0
    assert sol.runaway[1]
    assert np.isnan(sol.temperatures[1]).all()


def test_many_points_at_once_equal_one_point_calls_and_nan_stays_local():
    # Invariant: the vectorised solve over a batch equals point-by-point solves.
    rng = np.random.default_rng(2024)
    npts = 12
    ambients = rng.uniform(-10.0, 60.0, npts)
    # T = 25 + (T_A - 20)/(1 - g) (closed form below) stays under 225 degC for g <= 0.8.
    gains = rng.uniform(0.0, 0.8, npts)
    gains[3] = 1.2  # one runaway in the batch
    a = gains / (R_TH * P0)
    undefined_at = 5

    def power_of(t, index):
        p = P0 * (1.0 + a[index, np.newaxis] * (t - T0))
        return np.where((index == undefined_at)[:, np.newaxis], np.nan, p)

    batch = solve_coupled(power_of, build_network(["part"], [("part", "ambient", R_TH)]),
                          ambient=ambients)
    for i in range(npts):
        def single(t, index, i=i):
            return power_of(t, np.full(index.shape, i))

        one = solve_coupled(single, build_network(["part"], [("part", "ambient", R_TH)]),
                            ambient=ambients[i:i + 1])
        assert_allclose(batch.temperatures[i], one.temperatures[0], rtol=1e-12, equal_nan=True)
        assert_allclose(batch.loop_gain[i], one.loop_gain[0], rtol=1e-12, equal_nan=True)
        assert batch.iterations[i] == one.iterations[0]
        assert batch.reason[i] == one.reason[0]

    assert batch.undefined[undefined_at] and not batch.runaway[undefined_at]
    assert batch.reason[undefined_at] == "loss model undefined"
    assert np.isnan(batch.temperatures[undefined_at]).all()
    assert batch.runaway[3]
    others = np.setdiff1d(np.arange(npts), [3, undefined_at])
    assert batch.solved[others].all()
    # Against the closed form of the linear model (REFERENCES §9.5).
    expected = (ambients + R_TH * P0 * (1.0 - a * T0)) / (1.0 - a * R_TH * P0)
    assert_allclose(batch.temperatures[others, 0], expected[others], rtol=0, atol=0.01)


def test_power_of_sees_only_the_active_points():
    # Contract: index is increasing and shrinks as points finish; a constant loss converges
    # on the second iteration (zero step) while a gain-0.8 point keeps iterating.
    net = build_network(["part"], [("part", "ambient", R_TH)])
    a = np.array([0.0, 0.8 / (R_TH * P0)])
    seen = []

    def power_of(t, index):
        seen.append(index.copy())
        return P0 * (1.0 + a[index, np.newaxis] * (t - T0))

    sol = solve_coupled(power_of, net, ambient=[T_A, T_A])
    assert sol.solved.all()
    assert sol.iterations[0] == 2
    assert all((np.diff(ix) > 0).all() for ix in seen)
    assert seen[0].tolist() == [0, 1] and seen[2].tolist() == [1]


def test_bad_arguments_raise():
    net = build_network(["part"], [("part", "ambient", R_TH)])

    def power_of(t, index):
        return np.zeros_like(t)

    with pytest.raises(ValueError, match="ambient must be finite"):
        solve_coupled(power_of, net, ambient=[np.nan])
    with pytest.raises(ValueError, match="tol"):
        solve_coupled(power_of, net, ambient=[25.0], tol=0.0)
    with pytest.raises(ValueError, match="heated"):
        solve_coupled(power_of, net, ambient=[25.0], heated=[3])
    with pytest.raises(ValueError, match="shape"):
        solve_coupled(lambda t, index: np.zeros((1, 2)), net, ambient=[25.0])
