"""The DCM node ring against an independent integration and the series RLC closed form.

The reference here integrates the ring with scipy's ``solve_ivp`` on the node charge, in
physical units, with the clamps at 0 V and at the blocking voltage as events; it shares only
the C ∝ v^-1/2 charge law's inverse (a closed form checked in test_mosfet.py) with the model.
Its own check is the series RLC step response with a linear capacitance (any circuit-theory
text: v = V_set + A·e^(−σt)·[cos ω_d t + (σ/ω_d)·sin ω_d t], σ = R/2L, ω_d = √(ω0² − σ²),
REFERENCES §13.1). Part values are example values, not check values.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import solve_ivp

from lossbudget.losses import mosfet as m
from lossbudget.losses import ring as rg
from lossbudget.losses import ring_trajectory as rt

L = 22e-6
V_B = 48.0
A_S = m.charge_coefficient_from_q(60e-9, v_ref=50.0)
A_O = m.charge_coefficient_from_q(25e-9, v_ref=48.0)


def _reference(t_end, *, v_set, v_block, l, a_s, a_o, r, c_lin=None):
    """Switch voltage, dissipated energy and current of the ring at t_end (solve_ivp).

    State: node charge q (switch charge less opposite charge), inductor current i into the
    node, energy w dissipated in r. With ``c_lin`` the capacitance is linear instead.
    """
    if c_lin is not None:
        q_lo, q_hi = -c_lin * v_set, c_lin * (v_block - v_set)

        def v_of(q):
            return v_set + q / c_lin
    else:
        q_lo, q_hi = -a_o * np.sqrt(v_block), a_s * np.sqrt(v_block)

        def v_of(q):
            g = a_s * np.sqrt(v_block) - min(max(q, q_lo), q_hi)
            return float(m.residual_voltage(v_block, charge_moved=g, a_self=a_s, a_opp=a_o))

    def free(_, y):
        return [y[1], (v_set - v_of(y[0]) - r * y[1]) / l, r * y[1] ** 2]

    def low(_, y):
        return y[0] - q_lo

    low.terminal, low.direction = True, -1

    def clamped(vc):
        return lambda _, y: [0.0, (v_set - vc - r * y[1]) / l, r * y[1] ** 2]

    def current_zero(_, y):
        return y[1]

    current_zero.terminal = True
    t, y, mode = 0.0, [q_hi, 0.0, 0.0], "free"
    tol = {"rtol": 1e-10, "atol": [1e-15, 1e-10, 1e-18], "method": "DOP853"}
    while t < t_end:
        if mode == "free":
            sol = solve_ivp(free, (t, t_end), y, events=[low], max_step=(t_end - t) / 40, **tol)
            t, y = sol.t[-1], list(sol.y[:, -1])
            if sol.status == 1:
                y[0], mode = q_lo, "clamped"
        else:
            sol = solve_ivp(clamped(0.0), (t, t_end), y, events=[current_zero], **tol)
            t, y = sol.t[-1], list(sol.y[:, -1])
            if sol.status == 1:
                y[1], mode = 0.0, "free"
    return v_of(y[0]), y[2], y[1]


def _omega0(v_set, a_o=A_O):
    return float(rg.ring_frequency_small_signal(v_set=v_set, v_block=V_B, l=L, a_self=A_S,
                                                a_opp=a_o))


def test_reference_matches_the_series_rlc_closed_form():
    # Source: series RLC step response (any circuit-theory text; REFERENCES §13.1). A linear
    # 1 nF node from 48 V about 24 V, Q = 8: the reference integrator reproduces it.
    c, v_set, q = 1e-9, 24.0, 8.0
    w0 = 1.0 / np.sqrt(L * c)
    r = w0 * L / q
    sig = r / (2 * L)
    wd = np.sqrt(w0**2 - sig**2)
    for t in (0.3e-6, 0.77e-6, 1.9e-6):
        v_ref, w_ref, i_ref = _reference(t, v_set=v_set, v_block=V_B, l=L, a_s=0, a_o=0, r=r,
                                         c_lin=c)
        a = V_B - v_set
        v_rlc = v_set + a * np.exp(-sig * t) * (np.cos(wd * t) + sig / wd * np.sin(wd * t))
        assert_allclose(v_ref, v_rlc, atol=1e-6 * a)
        # energy: ½C·A² at the start = dissipated + ½C(v − V_set)² + ½L·i²
        left = 0.5 * c * (v_ref - v_set) ** 2 + 0.5 * L * i_ref**2
        assert_allclose(w_ref + left, 0.5 * c * a * a, rtol=1e-7)


@pytest.mark.parametrize(
    ("s", "q", "periods"),
    [
        (0.75, 10.0, 1.3),  # the buck's range, no clamp
        (0.8, 60.0, 5.2),  # lightly damped, several cycles
        (0.62, 300.0, 3.7),  # very lightly damped
        (0.55, 2.0, 2.0),  # damped: the time-sampled part of the table
        (0.3, 20.0, 2.6),  # reaches 0 V: body-diode clamp, then the ring from 0 V at rest
        (0.15, 120.0, 4.1),  # long clamp at a low settled voltage
        (0.9, 30.0, 30.0),  # past the table's 24 periods
    ],
)
def test_ring_against_solve_ivp_on_the_nonlinear_capacitance(s, q, periods):
    # Check values: the solve_ivp reference above (SPEC §2.3: within 1 % of the swing). The
    # swing the ring makes is the amplitude A = V_b − V_set; the tolerance is 1 % of it for
    # the voltage and 2 % of the ring energy for the dissipation.
    v_set = s * V_B
    w0 = _omega0(v_set)
    r = float(rg.ring_resistance_from_q(q, omega0=w0, l=L))
    t = periods * 2 * np.pi / w0
    v, e = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=q)
    v_ref, e_ref, _ = _reference(t, v_set=v_set, v_block=V_B, l=L, a_s=A_S, a_o=A_O, r=r)
    amp = V_B - v_set
    assert abs(v - v_ref) <= 0.01 * amp
    e0 = rg.ring_energy(V_B, v_set=v_set, v_block=V_B, a_self=A_S, a_opp=A_O)
    assert abs(e - e_ref) <= 0.02 * e0


def test_ring_in_its_linear_limit_is_the_rlc_step_response():
    # Source: series RLC step response (REFERENCES §13.1). With no opposite capacitance and a
    # swing of 1 % of the settled voltage the node capacitance is C_self(V_set) within
    # ±0.5 %, so the ring is the RLC's with C = C_self(V_set) up to a phase drift of
    # ~0.25 % of ω0·t: 3 % of the amplitude over 1.5 periods is the tolerance.
    v_set = 0.99 * V_B
    q = 15.0
    w0 = _omega0(v_set, a_o=0.0)
    c = float(rg.node_capacitance(v_set, v_block=V_B, a_self=A_S, a_opp=0.0))
    assert_allclose(w0, 1 / np.sqrt(L * c), rtol=1e-12)
    sig = w0 / (2 * q)
    wd = np.sqrt(w0**2 - sig**2)
    t = np.linspace(0.0, 1.5, 13) * 2 * np.pi / w0
    v, _ = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=0.0, q=q)
    a = V_B - v_set
    v_rlc = v_set + a * np.exp(-sig * t) * (np.cos(wd * t) + sig / wd * np.sin(wd * t))
    assert np.max(np.abs(v - v_rlc)) <= 0.03 * a


def test_zero_idle_time_is_the_hard_turn_on_exactly():
    # SPEC §2.3: at t_idle → 0 the turn-on equals the CCM hard value exactly. The ring starts
    # at the blocking voltage (here with a diode's 0.5 V above the edge voltage), the
    # partial-swing rule clips the residual at the edge voltage.
    v_edge = 48.0
    v, e = rt.ring_state(0.0, v_set=24.0, v_block=v_edge + 0.5, l=L, a_self=A_S, a_opp=A_O,
                         q=[5.0, 50.0])
    assert np.all(v == v_edge + 0.5)
    assert np.all(e == 0.0)
    on = m.partial_swing_coss_energy(v_edge, v_residual=v, a_self=A_S, a_opp=A_O)
    hard = m.hard_turn_on_coss_energy(v_edge, a_self=A_S, a_opp=A_O)
    assert np.all(on == hard)


def test_ring_energy_is_decay_plus_what_is_left():
    # Energy balance of the damped ring (charge balance on the node, SPEC §2.3): the ring
    # energy at the start ∫ from V_set to V_b of (v − V_set)·C_node dv equals what R_ring has
    # dissipated plus what the node and the inductor still hold. A ring that does not reach
    # 0 V exchanges no energy with a clamp. Closed form against quadrature, then the
    # reference's state, then the model after the ring has settled (Q = 4, 24 periods).
    v_set = 30.0
    u = np.linspace(v_set, V_B, 400_001)[:-1]
    c_node = 0.5 * A_S / np.sqrt(u) + 0.5 * A_O / np.sqrt(V_B - u)
    quad = np.trapezoid((u - v_set) * c_node, u)
    e0 = float(rg.ring_energy(V_B, v_set=v_set, v_block=V_B, a_self=A_S, a_opp=A_O))
    assert_allclose(e0, quad, rtol=2e-3)
    q = 4.0
    w0 = _omega0(v_set)
    r = float(rg.ring_resistance_from_q(q, omega0=w0, l=L))
    for periods in (0.7, 2.4):
        t = periods * 2 * np.pi / w0
        v_ref, w_ref, i_ref = _reference(t, v_set=v_set, v_block=V_B, l=L, a_s=A_S, a_o=A_O,
                                         r=r)
        left = rg.ring_energy(v_ref, v_set=v_set, v_block=V_B, a_self=A_S, a_opp=A_O)
        assert_allclose(w_ref + left + 0.5 * L * i_ref**2, e0, rtol=1e-6)
        _, e = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=q)
        assert abs(e - w_ref) <= 0.02 * e0
    v_end, e_end = rt.ring_state(24 * 2 * np.pi / w0, v_set=v_set, v_block=V_B, l=L,
                                 a_self=A_S, a_opp=A_O, q=q)
    assert_allclose(v_end, v_set, atol=1e-3 * (V_B - v_set))
    assert_allclose(e_end, e0, rtol=5e-3)


def test_settled_ring_and_turn_on_account_for_the_hard_edge():
    # Charge balance on the node (derived, SPEC §2.3): from V_b = V to V_set the ring
    # dissipates U0 and returns V_set·ΔQ to the source (ΔQ the node charge moved, through the
    # inductor); the turn-on from V_set takes the partial swing. Together they are the hard
    # turn-on energy: U0 + E_partial(V_set) + V_set·ΔQ = E_self(V) + Q_opp(V)·V − E_opp(V).
    v = 48.0
    for v_set in (5.0, 24.0, 40.0):
        u0 = rg.ring_energy(v, v_set=v_set, v_block=v, a_self=A_S, a_opp=A_O)
        dq = (m.node_charge(v, a=A_S) - m.node_charge(v_set, a=A_S)
              + m.node_charge(v - v_set, a=A_O))
        part = m.partial_swing_coss_energy(v, v_residual=v_set, a_self=A_S, a_opp=A_O)
        hard = m.hard_turn_on_coss_energy(v, a_self=A_S, a_opp=A_O)
        assert_allclose(u0 + part + v_set * dq, hard, rtol=1e-12)


def test_valley_is_never_above_the_ring_and_both_settle_alike():
    # What must hold (derived): with damping each valley is higher than the one before, so
    # the last valley reached lies at or below the ring's voltage at the same time, and the
    # energy dissipated by then is no more; at t = 0 both are the blocking voltage; once
    # the ring has settled, both are V_set. Over settled values with and without a clamp.
    t = np.linspace(0.0, 8.0, 161)[:, None] * 2 * np.pi / _omega0(24.0)
    v_set = np.array([10.0, 24.0, 40.0])[None, :]
    for q in (3.5, 25.0, 400.0):
        v, e = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=q)
        vv, ev = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=q,
                               valley=True)
        assert np.all(vv <= v + 1e-9)
        assert np.all(ev <= e + 1e-15)
        assert np.all(vv[0] == V_B)
    v, _ = rt.ring_state(1e-3, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=5.0)
    vv, _ = rt.ring_state(1e-3, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=5.0,
                          valley=True)
    assert_allclose(v, v_set, atol=1e-6)
    assert_allclose(vv, v_set, atol=1e-6)


def test_core_series_resistance_from_steinmetz():
    # Source: sinusoidal Steinmetz P = k·f^α·B^β·V_e (Steinmetz 1892; REFERENCES §4.1), and
    # a series resistance that dissipates ½·R·I² at peak current I (hand derivation).
    # 2 A peak, 22 uH, 20 turns, 50 mm², 3 cm³: B = 22e-6·2/(20·50e-6) = 0.044 T.
    k, alpha, beta, f = 2.0, 1.4, 2.6, 1.2e6
    b = 22e-6 * 2.0 / (20 * 50e-6)
    p = k * f**alpha * b**beta * 3e-6
    r = rg.core_series_resistance_steinmetz(
        [2.0, 0.0], f=f, l=22e-6, turns=20, ae=50e-6, ve=3e-6, k=k, alpha=alpha, beta=beta
    )
    assert_allclose(r, [2 * p / 4.0, 0.0], rtol=1e-12, atol=0.0)


def test_q_and_resistance_are_inverse():
    # Series RLC: Q = ω0·L/R (any circuit-theory text).
    assert_allclose(rg.ring_resistance_from_q(10.0, omega0=2e6, l=5e-6), 1.0, rtol=1e-15)
    assert_allclose(rg.ring_q_from_resistance(1.0, omega0=2e6, l=5e-6), 10.0, rtol=1e-15)


def test_grid_equals_point_by_point():
    # Contract (STYLE §4): the ring broadcasts; a grid equals its points.
    t = np.array([[0.0, 3e-7, 1.1e-6], [2e-6, 5e-6, 4e-5]])
    v_set = np.array([[10.0, 24.0, 40.0], [30.0, 5.0, 44.0]])
    q = np.array([[2.0, 50.0, 300.0], [0.5, 20.0, 8.0]])
    for valley in (False, True):
        v, e = rt.ring_state(t, v_set=v_set, v_block=V_B, l=L, a_self=A_S, a_opp=A_O, q=q,
                             valley=valley)
        assert v.shape == t.shape
        for idx in np.ndindex(*t.shape):
            vp, ep = rt.ring_state(t[idx], v_set=v_set[idx], v_block=V_B, l=L, a_self=A_S,
                                   a_opp=A_O, q=q[idx], valley=valley)
            assert_allclose([v[idx], e[idx]], [vp, ep], rtol=1e-12, atol=0.0)
    # no node charge: the node sits at the settled voltage
    v, e = rt.ring_state(1e-6, v_set=24.0, v_block=V_B, l=L, a_self=0.0, a_opp=0.0, q=10.0)
    assert v == 24.0 and e == 0.0
