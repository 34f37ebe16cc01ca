"""The DCM turn-on attribution: node charge at turn-on after the idle ring."""

from __future__ import annotations

import numpy as np

from lossbudget.losses.edges import dcm_turn_on_energies


def test_zero_idle_time_is_the_hard_turn_on():
    # Hand derivation on the C ∝ v^-1/2 law, Q = a·√V, E = ∫ v dQ = a·V^1.5/3 (Q·V/3, SPEC
    # §2.3): the switch turns on hard from V, dissipating its own E_self(V) plus the charge
    # of the opposite device recharged from the bus, Q_opp·V − E_opp = 2·a_opp·V^1.5/3; with
    # D + D2 = 1 there is no idle time, so the DCM value must equal it and nothing decays.
    v = np.array([30.0, 48.0])
    a_s, a_o = 2.0e-9, 5.0e-9
    got = dcm_turn_on_energies(
        v, fsw=200e3, dcm=True, v_block=v, v_set=0.5 * v, duty=0.6, d2=0.4, q=10.0,
        l=22e-6, a_self=a_s, a_opp=a_o, mode="ring",
    )
    np.testing.assert_allclose(got["e_coss"], v**1.5 * (a_s + 2.0 * a_o) / 3.0, rtol=1e-9)
    np.testing.assert_allclose(got["e_decay"], 0.0, atol=1e-15)


def test_per_point_charges_equal_one_call_per_pair():
    # design variants: two pairs of node charges in one call give each pair's own values
    v = np.full(4, 40.0)
    args = {"fsw": 200e3, "dcm": True, "v_block": v, "v_set": np.full(4, 14.0), "duty": 0.3,
            "d2": np.array([0.3, 0.4, 0.3, 0.4]), "q": 8.0, "l": 22e-6}
    a_s = np.array([2e-9, 2e-9, 3e-9, 3e-9])
    a_o = np.array([5e-9, 5e-9, 1e-9, 1e-9])
    both = dcm_turn_on_energies(v, a_self=a_s, a_opp=a_o, **args)
    for k in (slice(0, 2), slice(2, 4)):
        one = dcm_turn_on_energies(
            v[k], a_self=float(a_s[k][0]), a_opp=float(a_o[k][0]),
            **{n: (x[k] if np.ndim(x) else x) for n, x in args.items()},
        )
        np.testing.assert_allclose(both["e_coss"][k], one["e_coss"], rtol=1e-12)
        np.testing.assert_allclose(both["e_decay"][k], one["e_decay"], rtol=1e-12)
    assert np.all(both["e_decay"] > 0)  # a real idle ring dissipates
