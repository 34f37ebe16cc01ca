"""The DCM ring of the switch node: closed forms of its capacitance, energy, frequency, damping.

Pure functions of the ``losses/`` layer. When the rectifier current of a discontinuous stage
reaches zero, the switch node still holds the blocking voltage V_b and rings about its settled
value V_set with the inductance and the node capacitance, damped by a series resistance R_ring
(SPEC §2.3). The node capacitance is nonlinear: each device follows C ∝ v^−½ on its own voltage,
the switch on v and the opposite device (sync FET or diode) on V_b − v. This module holds the
node's capacitance and ring energy on that law, the small-signal ring frequency at which Q is
defined, Q and R_ring, and the core's series equivalent at the ring frequency; the ring's
trajectory itself is :mod:`lossbudget.losses.ring_trajectory`. Every function broadcasts with
numpy's rules.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from lossbudget.losses.mosfet import node_charge, node_energy

__all__ = [
    "core_series_resistance_steinmetz",
    "node_capacitance",
    "ring_energy",
    "ring_frequency_small_signal",
    "ring_q_from_resistance",
    "ring_resistance_from_q",
]


def _f(a):
    return np.asarray(a, dtype=float)


def node_capacitance(
    v: ArrayLike, *, v_block: ArrayLike, a_self: ArrayLike, a_opp: ArrayLike
) -> np.ndarray:
    """Small-signal capacitance of the switch node at a switch voltage.

    Parameters
    ----------
    v : array_like
        Voltage across the switch, 0 < v < V_b. [V]
    v_block : array_like
        Blocking voltage V_b that the two device voltages add up to. [V]
    a_self : array_like
        Charge coefficient of the switch (its qoss). [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device (qoss or qc). [C/V^0.5]

    Returns
    -------
    ndarray
        C_node(v) = C_self(v) + C_opp(V_b − v); infinite at an end where that device holds
        charge. [F]

    Notes
    -----
    C(u) = dQ/du = a/(2√u) for each device on the C ∝ v^−½ law, Q = a·√u.

    References
    ----------
    .. [1] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       depletion capacitance (C ∝ v^−½, REFERENCES.md §5.3, φ → 0 limit).
    """
    v = _f(v)
    v_b = _f(v_block)
    with np.errstate(divide="ignore", invalid="ignore"):
        return 0.5 * _f(a_self) / np.sqrt(v) + 0.5 * _f(a_opp) / np.sqrt(v_b - v)


def ring_energy(
    v: ArrayLike,
    *,
    v_set: ArrayLike,
    v_block: ArrayLike,
    a_self: ArrayLike,
    a_opp: ArrayLike,
) -> np.ndarray:
    """Energy held by the node capacitance relative to the settled voltage.

    Parameters
    ----------
    v : array_like
        Voltage across the switch, in [0, V_b]. [V]
    v_set : array_like
        Settled switch voltage V_set the node rings about. [V]
    v_block : array_like
        Blocking voltage V_b. [V]
    a_self : array_like
        Charge coefficient of the switch. [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device. [C/V^0.5]

    Returns
    -------
    ndarray
        U(v) = ∫ from V_set to v of (u − V_set)·C_node(u) du, never negative. [J]

    Notes
    -----
    The potential energy of the ring (the inductor holds ½·L·i² beside it). In closed form
    with A = V_b − V_set: U = [E_s(v) − E_s(V_set)] − V_set·[Q_s(v) − Q_s(V_set)]
    + A·[Q_o(A) − Q_o(V_b − v)] − [E_o(A) − E_o(V_b − v)], E = a·u^1.5/3, Q = a·√u. At the
    start of the ring (v = V_b) it is the energy the ring can dissipate.

    References
    ----------
    .. [1] Any circuit-theory text: energy of a capacitor, ∫ v dq; the C ∝ v^−½ law of
       [SZE] (REFERENCES.md §5.3). The closed form is derived here.
    """
    v_b = _f(v_block)
    vs = _f(v_set)
    v = np.clip(_f(v), 0.0, v_b)
    amp = v_b - vs
    e_self = (node_energy(v, a=a_self) - node_energy(vs, a=a_self)) - vs * (
        node_charge(v, a=a_self) - node_charge(vs, a=a_self)
    )
    e_opp = amp * (node_charge(amp, a=a_opp) - node_charge(v_b - v, a=a_opp)) - (
        node_energy(amp, a=a_opp) - node_energy(v_b - v, a=a_opp)
    )
    return np.maximum(e_self + e_opp, 0.0)


def ring_frequency_small_signal(
    *, v_set: ArrayLike, v_block: ArrayLike, l: ArrayLike, a_self: ArrayLike, a_opp: ArrayLike
) -> np.ndarray:
    """Small-signal angular frequency of the node ring at the settled voltage.

    Parameters
    ----------
    v_set : array_like
        Settled switch voltage. [V]
    v_block : array_like
        Blocking voltage. [V]
    l : array_like
        Inductance in the ring. [H]
    a_self : array_like
        Charge coefficient of the switch. [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device. [C/V^0.5]

    Returns
    -------
    ndarray
        ω0 = 1/√(L·C_node(V_set)). [rad/s]

    Notes
    -----
    The frequency at which ``operating.ring_q`` is defined (SPEC §2.3). The large ring runs
    at an amplitude-dependent frequency; this is its small-amplitude limit.

    References
    ----------
    .. [1] Any circuit-theory text: series RLC resonance, ω0 = 1/√(LC) (REFERENCES.md §13.1).
    """
    c = node_capacitance(v_set, v_block=v_block, a_self=a_self, a_opp=a_opp)
    return 1.0 / np.sqrt(_f(l) * c)


def ring_resistance_from_q(q: ArrayLike, *, omega0: ArrayLike, l: ArrayLike) -> np.ndarray:
    """Series resistance of a ring of given quality factor.

    Parameters
    ----------
    q : array_like
        Quality factor at ω0. [-]
    omega0 : array_like
        Small-signal ring frequency (:func:`ring_frequency_small_signal`). [rad/s]
    l : array_like
        Inductance. [H]

    Returns
    -------
    ndarray
        R_ring = ω0·L/Q. [ohm]

    Notes
    -----
    Series RLC: Q = ω0·L/R.

    References
    ----------
    .. [1] Any circuit-theory text: quality factor of a series RLC circuit.
    """
    return _f(omega0) * _f(l) / _f(q)


def ring_q_from_resistance(r: ArrayLike, *, omega0: ArrayLike, l: ArrayLike) -> np.ndarray:
    """Quality factor of the ring from its series resistance.

    Parameters
    ----------
    r : array_like
        Series resistance R_ring; positive. [ohm]
    omega0 : array_like
        Small-signal ring frequency. [rad/s]
    l : array_like
        Inductance. [H]

    Returns
    -------
    ndarray
        Q = ω0·L/R. [-]

    Notes
    -----
    Series RLC: Q = ω0·L/R; the inverse of :func:`ring_resistance_from_q`.

    References
    ----------
    .. [1] Any circuit-theory text: quality factor of a series RLC circuit.
    """
    with np.errstate(divide="ignore"):
        return _f(omega0) * _f(l) / _f(r)


def core_series_resistance_steinmetz(
    i_ring: ArrayLike,
    *,
    f: ArrayLike,
    l: ArrayLike,
    turns: ArrayLike,
    ae: ArrayLike,
    ve: ArrayLike,
    k: ArrayLike,
    alpha: ArrayLike,
    beta: ArrayLike,
) -> np.ndarray:
    """Equivalent series resistance of the core loss in a sinusoidal ring.

    Parameters
    ----------
    i_ring : array_like
        Peak ring current in one inductor part. [A]
    f : array_like
        Ring frequency. [Hz]
    l : array_like
        Inductance of one part. [H]
    turns : array_like
        Number of turns. [-]
    ae : array_like
        Effective core area. [m2]
    ve : array_like
        Effective core volume. [m3]
    k : array_like
        Steinmetz coefficient (f in Hz, B in T, W/m3). [W/m3]
    alpha : array_like
        Frequency exponent. [-]
    beta : array_like
        Flux-density exponent. [-]

    Returns
    -------
    ndarray
        R_core = 2·P_core/I_r²; 0 where I_r = 0. [ohm]

    Notes
    -----
    P_core = k·f^α·B^β·V_e with B = L·I_r/(N·A_e), the loss of a sinusoid of peak current
    I_r, matched by a series resistance that dissipates ½·R·I_r². It is a first-order
    estimate: with β ≠ 2 the equivalent resistance depends on the amplitude, and it is taken
    at the ring's initial amplitude.

    References
    ----------
    .. [1] C. P. Steinmetz, "On the law of hysteresis", Trans. AIEE 9, 1892; REFERENCES.md §4.1
       (sinusoidal Steinmetz equation). The series equivalent is derived here (SPEC §2.3).
    """
    i_r = np.abs(_f(i_ring))
    b = _f(l) * i_r / (_f(turns) * _f(ae))
    p = _f(k) * _f(f) ** _f(alpha) * b ** _f(beta) * _f(ve)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(i_r > 0.0, 2.0 * p / (i_r * i_r), 0.0)
