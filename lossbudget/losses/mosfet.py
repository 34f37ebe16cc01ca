"""Loss models of a power MOSFET: conduction, switching edges, output charge, gate, recovery.

Pure functions of the ``losses/`` layer: arrays in, arrays out, no design objects and no I/O.
They hold Rds(on)(Tj), the gate-charge estimate of the switching times and the overlap energies,
the C ∝ v^−½ node-charge law shared by a MOSFET's output charge and a Schottky or SiC diode's
junction charge, the hard and partial-swing Coss energies with their attribution (SPEC §2.3),
dead-time body-diode conduction, the reverse-recovery split between diode and switch, and the
gate-drive power (REFERENCES §5). The solver decides which edge is hard and passes the currents,
voltages and datasheet figures in. Every function broadcasts with numpy's rules and returns NaN
where its model is undefined; temperatures are absolute, in degC.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from lossbudget.losses.diode import _line_through_points

__all__ = [
    "body_diode_conduction_time",
    "charge_coefficient_from_e",
    "charge_coefficient_from_q",
    "conduction_loss",
    "dead_time_energy",
    "gate_current_off",
    "gate_current_on",
    "gate_drive_power",
    "gate_plateau_charge_qgs2",
    "gate_resistance_share",
    "hard_turn_on_coss_energy",
    "node_charge",
    "node_charge_energy_equivalent",
    "node_energy",
    "partial_swing_coss_energy",
    "qrr_scaled",
    "rds_on_at",
    "rds_on_extrapolated",
    "recovery_energy_diode",
    "recovery_energy_switch",
    "recovery_energy_total",
    "reference_energy_scaled",
    "residual_voltage",
    "transition_time",
    "turn_off_energy",
    "turn_on_energy",
]

_ZERO_CELSIUS_K = 273.15


def _f(a):
    return np.asarray(a, dtype=float)


# --------------------------------------------------------------------------------------------
# Conduction
# --------------------------------------------------------------------------------------------


def rds_on_at(
    t_j: ArrayLike,
    *,
    t_points: ArrayLike,
    r_points: ArrayLike,
    exponent_single: float = 2.3,
) -> np.ndarray:
    """On-resistance at the junction temperature, power law in kelvin.

    Parameters
    ----------
    t_j : array_like
        Junction temperature. [degC]
    t_points : sequence of float
        Temperatures of the datasheet points, strictly increasing (1-D). [degC]
    r_points : sequence of float
        Rds(on) at ``t_points`` (same length), positive. [ohm]
    exponent_single : float, optional
        Exponent x taken when a single point is given. [-]

    Returns
    -------
    ndarray
        Rds(on) at ``t_j``; NaN at or below absolute zero. [ohm]

    Raises
    ------
    ValueError
        Where the points are empty, of unequal length, not strictly increasing, at or below
        absolute zero, or a resistance is not positive.

    Notes
    -----
    R(T) = R_k·(T/T_k)^x_k with T in kelvin (T = t + 273.15, so 25 degC is 298.15 K, not
    300 K). Two or more points: x_k = ln(R_{k+1}/R_k)/ln(T_{k+1}/T_k) per adjacent pair, the
    first and last segments' laws extended below and above the range (a straight line in
    log R against log T, continuous at every point). One point: x = ``exponent_single``.
    Above the highest point the value is an extrapolation; see :func:`rds_on_extrapolated`.

    References
    ----------
    .. [1] REFERENCES.md §5.1: power law with x ≈ 2.3–2.5, common practice; physical basis
       B. J. Baliga, *Fundamentals of Power Semiconductor Devices*, Springer, 2008 ([BAL])
       ch. 2, lattice-scattering electron mobility μ_n ∝ T^−2.42 (exponent from memory,
       verify). Low-voltage parts with a large channel share scale less steeply.
    """
    t_points_k = _f(t_points) + _ZERO_CELSIUS_K
    r_points = _f(r_points)
    if np.any(t_points_k <= 0.0) or np.any(r_points <= 0.0):
        raise ValueError("Rds(on) points need temperatures above absolute zero and R > 0")
    t_k = _f(t_j) + _ZERO_CELSIUS_K
    with np.errstate(divide="ignore", invalid="ignore"):
        log_t_k = np.where(t_k > 0.0, np.log(np.where(t_k > 0.0, t_k, 1.0)), np.nan)
    log_r = _line_through_points(
        log_t_k,
        xp=np.log(t_points_k),
        fp=np.log(r_points),
        slope_single=exponent_single,
    )
    return np.exp(log_r)


def rds_on_extrapolated(t_j: ArrayLike, *, t_points: ArrayLike) -> np.ndarray:
    """Flag junction temperatures above the highest Rds(on) point.

    Parameters
    ----------
    t_j : array_like
        Junction temperature. [degC]
    t_points : sequence of float
        Temperatures of the datasheet Rds(on) points (1-D). [degC]

    Returns
    -------
    ndarray of bool
        True where ``t_j`` lies above the highest point, so that :func:`rds_on_at`
        extrapolates; False elsewhere and at NaN. [-]

    Notes
    -----
    Flag = t_j > max(t_points). Below the lowest point the law is extrapolated too, but the
    resistance falls there, so the budget stays on the safe side and no flag is raised.

    References
    ----------
    .. [1] SPEC §2.6 (extrapolation above the highest point is flagged); common practice.
    """
    return _f(t_j) > np.max(_f(t_points), axis=-1)


def conduction_loss(r: ArrayLike, *, i_rms: ArrayLike) -> np.ndarray:
    """Joule conduction loss of a resistive channel.

    Parameters
    ----------
    r : array_like
        Channel (or any series) resistance at its temperature. [ohm]
    i_rms : array_like
        RMS current through it over the switching period. [A]

    Returns
    -------
    ndarray
        Average conduction loss. [W]

    Notes
    -----
    P = R·I_rms², exact for a linear resistance carrying any waveform of that RMS value.

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003 ([MUR]) ch. 2; R. W. Erickson,
       D. Maksimović, *Fundamentals of Power Electronics*, 3rd ed., Springer, 2020 ([EM])
       ch. 3 (REFERENCES.md §5.1).
    """
    i_rms = _f(i_rms)
    return _f(r) * i_rms * i_rms


# --------------------------------------------------------------------------------------------
# Node charge law (MOSFET Qoss, Schottky/SiC junction charge qc)
# --------------------------------------------------------------------------------------------


def charge_coefficient_from_q(q_ref: ArrayLike, *, v_ref: ArrayLike) -> np.ndarray:
    """Charge coefficient of the C ∝ v^−½ law from a charge figure.

    Parameters
    ----------
    q_ref : array_like
        Stored charge Qoss (or a diode's qc) at ``v_ref``. [C]
    v_ref : array_like
        Voltage at which ``q_ref`` is given; positive. [V]

    Returns
    -------
    ndarray
        Charge coefficient a; NaN where ``v_ref`` ≤ 0. [C/V^0.5]

    Notes
    -----
    Q(v) = a·√v, so a = Q_ref/√V_ref. The law is the abrupt-junction depletion capacitance
    C(v) = C0·(1 + v/φ)^−½ in the limit φ → 0, C(v) = a/(2√v); it fits a Schottky or SiC
    junction and a planar MOSFET well and a superjunction MOSFET poorly (its C(v) falls by
    orders of magnitude in a few tens of volts).

    References
    ----------
    .. [1] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007
       ([SZE]), depletion capacitance of an abrupt junction; closed forms derived in
       REFERENCES.md §5.3.
    """
    v_ref = _f(v_ref)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(v_ref > 0.0, _f(q_ref) / np.sqrt(np.abs(v_ref)), np.nan)


def charge_coefficient_from_e(e_ref: ArrayLike, *, v_ref: ArrayLike) -> np.ndarray:
    """Charge coefficient of the C ∝ v^−½ law from an energy figure.

    Parameters
    ----------
    e_ref : array_like
        Stored energy Eoss at ``v_ref``. [J]
    v_ref : array_like
        Voltage at which ``e_ref`` is given; positive. [V]

    Returns
    -------
    ndarray
        Coefficient a with E(v) = a·v^1.5/3; NaN where ``v_ref`` ≤ 0. [C/V^0.5]

    Notes
    -----
    E(v) = ∫₀^v u·C(u) du = a·v^1.5/3 for C(u) = a/(2√u), so a = 3·E_ref/V_ref^1.5 and
    E(v) = E_ref·(v/V_ref)^1.5. Used for energies only where the datasheet gives eoss; charges
    keep the qoss coefficient where that is given too.

    References
    ----------
    .. [1] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007
       ([SZE]), depletion capacitance; definition E_oss = ∫ v·C(v) dv and the closed forms
       derived in REFERENCES.md §5.3.
    """
    v_ref = _f(v_ref)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(v_ref > 0.0, 3.0 * _f(e_ref) / np.abs(v_ref) ** 1.5, np.nan)


def node_charge(v: ArrayLike, *, a: ArrayLike) -> np.ndarray:
    """Charge stored at voltage ``v`` under the C ∝ v^−½ law.

    Parameters
    ----------
    v : array_like
        Voltage across the device; a negative value is taken as zero. [V]
    a : array_like
        Charge coefficient from :func:`charge_coefficient_from_q`. [C/V^0.5]

    Returns
    -------
    ndarray
        Stored charge Q(v) = ∫₀^v C(u) du. [C]

    Notes
    -----
    Q(v) = a·√max(v, 0). Time-related effective capacitance Q/v = 2·C(v).

    References
    ----------
    .. [1] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007
       ([SZE]), depletion capacitance; REFERENCES.md §5.3 (φ → 0 limit, derived).
    """
    return _f(a) * np.sqrt(np.maximum(_f(v), 0.0))


def node_energy(v: ArrayLike, *, a: ArrayLike) -> np.ndarray:
    """Energy stored at voltage ``v`` under the C ∝ v^−½ law.

    Parameters
    ----------
    v : array_like
        Voltage across the device; a negative value is taken as zero. [V]
    a : array_like
        Coefficient from :func:`charge_coefficient_from_e` (an eoss figure) or
        :func:`charge_coefficient_from_q` (a qoss figure alone). [C/V^0.5]

    Returns
    -------
    ndarray
        Stored energy E(v) = ∫₀^v u·C(u) du. [J]

    Notes
    -----
    E(v) = a·max(v, 0)^1.5/3 = Q·v/3: a third of Q·v, against a half for a linear
    capacitance. Energy-related effective capacitance 2E/v² = (4/3)·C(v).

    References
    ----------
    .. [1] S. M. Sze, K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007
       ([SZE]), depletion capacitance; REFERENCES.md §5.3 (φ → 0 limit, derived).
    """
    return _f(a) * np.maximum(_f(v), 0.0) ** 1.5 / 3.0


def _energy_coefficient(a, ae):
    return _f(a) if ae is None else _f(ae)


def partial_swing_coss_energy(
    v: ArrayLike,
    *,
    v_residual: ArrayLike,
    a_self: ArrayLike,
    a_opp: ArrayLike,
    ae_self: ArrayLike | None = None,
    ae_opp: ArrayLike | None = None,
) -> np.ndarray:
    """Coss energy of a hard turn-on from a residual voltage.

    Parameters
    ----------
    v : array_like
        Edge voltage V: the bus voltage the two devices share between them. [V]
    v_residual : array_like
        Voltage v_r left across the incoming switch when it turns on, clipped to [0, V]
        (from :func:`residual_voltage`; V for a fully hard edge). [V]
    a_self : array_like
        Charge coefficient of the incoming switch (its qoss). [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device: the other MOSFET's qoss or the
        diode's qc. [C/V^0.5]
    ae_self : array_like or None, optional
        Energy coefficient of the incoming switch from its eoss figure
        (:func:`charge_coefficient_from_e`); None takes ``a_self``, i.e. E = Q·V/3. [C/V^0.5]
    ae_opp : array_like or None, optional
        Energy coefficient of the opposite device from its eoss figure; None takes
        ``a_opp``. [C/V^0.5]

    Returns
    -------
    ndarray
        Energy dissipated in the incoming switch's channel at this turn-on. [J]

    Notes
    -----
    Charge balance on the node while the incoming switch falls from v_r to 0 and the
    opposite device rises from V − v_r to V: the switch's own stored energy E_self(v_r) is
    burnt in its channel, and the opposite device's extra charge is drawn from the bus at V
    through the channel, which burns the bus energy less the energy stored:

        E = E_self(v_r) + V·[Q_opp(V) − Q_opp(V − v_r)] − [E_opp(V) − E_opp(V − v_r)].

    With one figure per device this is evaluated exactly on the C ∝ v^−½ law. Where an eoss
    figure is given too, the opposite device's term is written as its full-swing value
    Q_opp(V)·V − E_opp(V) (charge from qoss, energy from eoss, as SPEC §2.3 states it) times
    the fraction w(x) = ½·(1 − s)²·(s + 2), s = √(1 − x), x = v_r/V, that the C ∝ v^−½ law
    gives for a partial swing; w(0) = 0, w(1) = 1, so the rule equals the full hard-turn-on
    energy at v_r = V and 0 at v_r = 0, and it never turns negative, which subtracting two
    inconsistent power laws directly could. A full-swing term below zero (an eoss figure
    above qoss·V, not physical) is clipped at zero. The inductor current flowing during
    the edge and the ringing are not included.

    References
    ----------
    .. [1] REFERENCES.md §5.3, loss attribution (common practice): the incoming switch
       dissipates its own E_oss and Q_oss·V − E_oss of the opposite device; SPEC §2.3
       (charge balance on the node for a partial swing). The w(x) form is derived here
       from the C ∝ v^−½ law ([SZE], depletion capacitance).
    """
    v = np.maximum(_f(v), 0.0)
    v_r = np.clip(_f(v_residual), 0.0, v)
    ae_self = _energy_coefficient(a_self, ae_self)
    ae_opp = _energy_coefficient(a_opp, ae_opp)
    v_15 = v**1.5
    full_opp = np.maximum(_f(a_opp) * v_15 - ae_opp * v_15 / 3.0, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        x = np.where(v > 0.0, v_r / np.where(v > 0.0, v, 1.0), 0.0)
    s = np.sqrt(1.0 - x)
    one_minus_s = x / (1.0 + s)  # 1 − √(1 − x) without cancellation at small x
    w = 0.5 * one_minus_s * one_minus_s * (s + 2.0)
    return node_energy(v_r, a=ae_self) + full_opp * w


def hard_turn_on_coss_energy(
    v: ArrayLike,
    *,
    a_self: ArrayLike,
    a_opp: ArrayLike,
    ae_self: ArrayLike | None = None,
    ae_opp: ArrayLike | None = None,
) -> np.ndarray:
    """Coss energy of a hard turn-on from the full edge voltage.

    Parameters
    ----------
    v : array_like
        Edge voltage across the incoming switch before it turns on. [V]
    a_self : array_like
        Charge coefficient of the incoming switch (its qoss). [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device: the sync MOSFET's qoss or the diode's
        qc. [C/V^0.5]
    ae_self : array_like or None, optional
        Energy coefficient of the incoming switch from its eoss figure
        (:func:`charge_coefficient_from_e`); None takes ``a_self``. [C/V^0.5]
    ae_opp : array_like or None, optional
        Energy coefficient of the opposite device from its eoss figure; None takes
        ``a_opp``. [C/V^0.5]

    Returns
    -------
    ndarray
        Energy dissipated in the incoming switch at the turn-on. [J]

    Notes
    -----
    E = E_self(V) + Q_opp(V)·V − E_opp(V): the switch's own stored energy, plus the charge
    of the opposite device recharged from the bus through the switch's channel less the
    energy that charge leaves stored. Energies come from eoss where the datasheet gives it
    (``ae_*``) and from the qoss law E = Q·V/3 otherwise; charges come from qoss. The
    coefficients are separate arguments rather than (figure, voltage) pairs so that each
    broadcasts as one array and every caller converts a figure once. It is
    :func:`partial_swing_coss_energy` at v_r = V.

    References
    ----------
    .. [1] REFERENCES.md §5.3, loss attribution in a hard turn-on (common practice); SPEC
       §2.3, CCM hard-switched edge.
    """
    return partial_swing_coss_energy(
        v, v_residual=v, a_self=a_self, a_opp=a_opp, ae_self=ae_self, ae_opp=ae_opp
    )


def node_charge_energy_equivalent(v: ArrayLike, *, e_node: ArrayLike) -> np.ndarray:
    """Energy-equivalent node charge, Q_er = 2·E_node/V.

    Parameters
    ----------
    v : array_like
        Edge voltage V the node swings across. [V]
    e_node : array_like
        Energy the node swing leaves to be dissipated at the next hard turn-on,
        E_self(V) + Q_opp(V)·V − E_opp(V) (:func:`hard_turn_on_coss_energy`). [J]

    Returns
    -------
    ndarray
        Q_er = 2·E_node/V; 0 where V ≤ 0. [C]

    Notes
    -----
    During a turn-off whose voltage rises linearly over t_rv at a constant load current I,
    the channel dissipates ∫ v·(I − C_node(v)·dv/dt) dt = ½·V·I·t_rv − ∫₀^V v·C_node(v) dv,
    and with C_node(v) = C_self(v) + C_opp(V − v) the integral is E_self(V) + V·Q_opp(V) −
    E_opp(V): exactly what the next hard turn-on charges as ``coss``. Passing Q_er to
    :func:`turn_off_energy` makes the two edges count that energy once. On the C ∝ v^−½ law
    Q_er = (2/3)·Q_self + (4/3)·Q_opp, against Q_self + Q_opp for the node's charge itself;
    the two rules differ by V·(Q_self − Q_opp)/6 per cycle.

    References
    ----------
    .. [1] REFERENCES.md §5.3 (stored charge and energy of a nonlinear capacitance, and the
       hard turn-on attribution, common practice); SPEC §2.3 (gate-charge timing). The
       equivalence is derived here from the linear voltage rise of the gate-charge model.
    """
    v = _f(v)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(v > 0.0, 2.0 * _f(e_node) / np.where(v > 0.0, v, 1.0), 0.0)


def residual_voltage(
    v: ArrayLike, *, charge_moved: ArrayLike, a_self: ArrayLike, a_opp: ArrayLike
) -> np.ndarray:
    """Voltage left across the incoming switch after the dead time.

    Parameters
    ----------
    v : array_like
        Edge voltage V across the incoming switch when the outgoing device opens. [V]
    charge_moved : array_like
        Charge the node current moves during the dead time, |I|·t_dead; a negative value
        is taken as zero. [C]
    a_self : array_like
        Charge coefficient of the incoming switch (its qoss). [C/V^0.5]
    a_opp : array_like
        Charge coefficient of the opposite device (its qoss or qc). [C/V^0.5]

    Returns
    -------
    ndarray
        Residual voltage v_r in [0, V]; 0 where the charge covers the whole swing
        Q_self(V) + Q_opp(V), V where no charge is moved. [V]

    Notes
    -----
    The moved charge discharges the incoming switch from V to v_r and charges the opposite
    device from 0 to V − v_r (the inductor current held constant over the dead time):

        g(v_r) = a_self·(√V − √v_r) + a_opp·√(V − v_r) = charge_moved.

    Monotone, so the root is unique: dg/dv_r = −a_self/(2√v_r) − a_opp/(2√(V − v_r)) < 0 on
    (0, V) for a_self + a_opp > 0, and g falls from g(0) = Q_self(V) + Q_opp(V) to
    g(V) = 0; every charge in between has exactly one v_r. The root is found in closed form
    rather than by bisection: with v_r = V·sin²θ, θ ∈ [0, π/2], the equation reads
    a_self·sinθ − a_opp·cosθ = a_self − m, m = charge_moved/√V, i.e.
    R·sin(θ − φ) = c with R = √(a_self² + a_opp²), φ = atan2(a_opp, a_self), c = a_self − m,
    and θ − φ ∈ [−φ, π/2 − φ] ⊂ [−π/2, π/2] where sin is one-to-one. It is evaluated as
    θ = φ + atan2(c, √((R − c)(R + c))) with R − c and R + c each formed as a sum of
    non-negative terms, so the charge equation holds to rounding (about 1e-15 relative)
    over the whole range, also at the ends where √v_r and √(V − v_r) have infinite slope.
    Where V ≤ 0 or the devices hold no charge, v_r = 0.

    References
    ----------
    .. [1] SPEC §2.3, forced-continuous operation with reversed current and dead time not
       long enough (charge balance on the node); the C ∝ v^−½ law from [SZE], depletion
       capacitance (REFERENCES.md §5.3). The closed-form solution is derived here.
    """
    v = np.maximum(_f(v), 0.0)
    a_s = _f(a_self)
    a_o = _f(a_opp)
    q_total = a_s + a_o
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.maximum(_f(charge_moved), 0.0) / np.sqrt(v)
        covered = (v <= 0.0) | (q_total <= 0.0) | (m >= q_total)  # NaN stays NaN
        m = np.minimum(m, q_total)
        r = np.hypot(a_s, a_o)
        r_minus_c = a_o * a_o / (r + a_s) + m
        r_plus_c = a_s * a_s / (r + a_o) + (q_total - m)
        theta = np.arctan2(a_o, a_s) + np.arctan2(a_s - m, np.sqrt(r_minus_c * r_plus_c))
        v_r = v * np.sin(np.clip(theta, 0.0, 0.5 * np.pi)) ** 2
    return np.where(covered, 0.0, np.minimum(v_r, v))


# --------------------------------------------------------------------------------------------
# Gate-charge timing and overlap energies
# --------------------------------------------------------------------------------------------


def gate_plateau_charge_qgs2(
    qgs: ArrayLike, *, v_th: ArrayLike, v_plateau: ArrayLike
) -> np.ndarray:
    """Gate charge from threshold to plateau, Qgs2, from Qgs.

    Parameters
    ----------
    qgs : array_like
        Gate-source charge from zero to the plateau (datasheet Qgs). [C]
    v_th : array_like
        Gate threshold voltage. [V]
    v_plateau : array_like
        Miller plateau voltage at the switched current. [V]

    Returns
    -------
    ndarray
        Qgs2, the charge delivered while the drain current rises or falls; NaN unless
        0 ≤ v_th < v_plateau. [C]

    Notes
    -----
    Qgs2 = Qgs·(V_pl − V_th)/V_pl: Ciss taken constant below the plateau, so the charge is
    proportional to the gate-voltage step. Give a datasheet ``qgs2`` instead where known.

    References
    ----------
    .. [1] SPEC §2.3, gate-charge timing; REFERENCES.md §5.2, gate-charge estimate of the
       transition times (common practice, plateau-current approximation; no single
       authoritative source).
    """
    v_th = _f(v_th)
    v_plateau = _f(v_plateau)
    ok = (v_th >= 0.0) & (v_plateau > v_th)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(ok, _f(qgs) * (v_plateau - v_th) / v_plateau, np.nan)


def gate_current_on(
    *,
    v_drive: ArrayLike,
    v_plateau: ArrayLike,
    r_source: ArrayLike,
    rg_on: ArrayLike,
    rg: ArrayLike,
) -> np.ndarray:
    """Gate current on the Miller plateau at turn-on.

    Parameters
    ----------
    v_drive : array_like
        Driver output voltage in the on state. [V]
    v_plateau : array_like
        Miller plateau voltage. [V]
    r_source : array_like
        Driver pull-up (source) resistance. [ohm]
    rg_on : array_like
        External turn-on gate resistor. [ohm]
    rg : array_like
        Internal gate resistance of the MOSFET. [ohm]

    Returns
    -------
    ndarray
        Gate current during the plateau; zero or negative where V_drive ≤ V_pl (the part
        cannot be turned on; :func:`transition_time` then returns NaN). [A]

    Notes
    -----
    I_g,on = (V_drive − V_pl)/(r_source + rg_on + rg), taken constant over the current rise
    and the voltage fall (plateau-current approximation; during the current rise the gate
    voltage is below the plateau, so the real current is larger and the estimate is on the
    slow, pessimistic side). Common-source inductance is ignored.

    References
    ----------
    .. [1] REFERENCES.md §5.2, gate-charge estimate (common practice); SPEC §2.3.
    """
    return (_f(v_drive) - _f(v_plateau)) / (_f(r_source) + _f(rg_on) + _f(rg))


def gate_current_off(
    *, v_plateau: ArrayLike, r_sink: ArrayLike, rg_off: ArrayLike, rg: ArrayLike
) -> np.ndarray:
    """Gate current on the Miller plateau at turn-off.

    Parameters
    ----------
    v_plateau : array_like
        Miller plateau voltage. [V]
    r_sink : array_like
        Driver pull-down (sink) resistance. [ohm]
    rg_off : array_like
        External turn-off gate resistor. [ohm]
    rg : array_like
        Internal gate resistance of the MOSFET. [ohm]

    Returns
    -------
    ndarray
        Gate current drawn out of the gate during the plateau. [A]

    Notes
    -----
    I_g,off = V_pl/(r_sink + rg_off + rg), with the driver pulling the gate to 0 V (no
    negative off-state drive), taken constant over the voltage rise and the current fall
    (plateau-current approximation).

    References
    ----------
    .. [1] REFERENCES.md §5.2, gate-charge estimate (common practice); SPEC §2.3.
    """
    return _f(v_plateau) / (_f(r_sink) + _f(rg_off) + _f(rg))


def transition_time(charge: ArrayLike, *, i_gate: ArrayLike) -> np.ndarray:
    """Duration of a switching transition from its gate charge.

    Parameters
    ----------
    charge : array_like
        Gate charge of the transition: Qgs2 for the current rise or fall (t_ri, t_fi),
        Qgd for the voltage fall or rise (t_fv, t_rv). [C]
    i_gate : array_like
        Gate current during the transition (:func:`gate_current_on` or
        :func:`gate_current_off`). [A]

    Returns
    -------
    ndarray
        Transition time; NaN where ``i_gate`` ≤ 0. [s]

    Notes
    -----
    t = Q/I_g with a constant gate current. Qgd is voltage dependent and the datasheet
    figure belongs to its test voltage; using it at another voltage is an approximation.

    References
    ----------
    .. [1] REFERENCES.md §5.2, t_i = Q_gs2/I_g, t_v = Q_gd/I_g (common practice).
    """
    i_gate = _f(i_gate)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(i_gate > 0.0, _f(charge) / i_gate, np.nan)


def turn_on_energy(
    v_edge: ArrayLike, i: ArrayLike, *, t_ri: ArrayLike, t_fv: ArrayLike
) -> np.ndarray:
    """Overlap energy of a hard turn-on, linearised waveforms.

    Parameters
    ----------
    v_edge : array_like
        Blocking voltage across the switch before the edge. [V]
    i : array_like
        Current the switch takes over at the edge (valley current in CCM); ≤ 0 gives no
        overlap. [A]
    t_ri : array_like
        Current rise time. [s]
    t_fv : array_like
        Voltage fall time. [s]

    Returns
    -------
    ndarray
        Overlap energy dissipated in the channel; 0 where I ≤ 0. [J]

    Notes
    -----
    E_on = ½·V·I·(t_ri + t_fv) for I > 0 (clamped inductive switching: the current rises
    at full voltage, then the voltage falls at full current). The stored Coss energy and
    the opposite diode's recovery are separate terms (:func:`hard_turn_on_coss_energy`,
    :func:`recovery_energy_switch`).

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003 ([MUR]) ch. 2, linearised switching
       waveforms (eq. (2-6), number from memory, verify); R. W. Erickson, D. Maksimović,
       *Fundamentals of Power Electronics*, 3rd ed., Springer, 2020 ([EM]) ch. 4,
       switching loss (REFERENCES.md §5.2).
    """
    v_edge = _f(v_edge)
    i = _f(i)
    return np.where(i > 0.0, 0.5 * v_edge * i * (_f(t_ri) + _f(t_fv)), 0.0)


def turn_off_energy(
    v_edge: ArrayLike,
    i: ArrayLike,
    *,
    t_rv: ArrayLike,
    t_fi: ArrayLike,
    q_node: ArrayLike,
) -> np.ndarray:
    """Overlap energy of a hard turn-off, node charge taken out of it.

    Parameters
    ----------
    v_edge : array_like
        Blocking voltage across the switch after the edge. [V]
    i : array_like
        Current the switch carries when it opens (peak current in CCM); ≤ 0 gives no
        overlap. [A]
    t_rv : array_like
        Voltage rise time from the gate-charge model; positive. [s]
    t_fi : array_like
        Current fall time. [s]
    q_node : array_like
        Node charge the channel is relieved of during the voltage rise. The solver passes
        the energy-equivalent charge 2·E_node(V)/V (:func:`node_charge_energy_equivalent`),
        so that the turn-off removes from the channel exactly the energy the next hard
        turn-on charges as ``coss``; both devices' Qoss (or qc) is the older, charge-based
        rule, V·(Q_self − Q_opp)/6 apart on the C ∝ v^−½ law. [C]

    Returns
    -------
    ndarray
        Overlap energy dissipated in the channel; never negative. [J]

    Notes
    -----
    E_off = ½·V·i_ch·(t_rv + t_fi), i_ch = max(I − Q_node/t_rv, 0).

    Derived from the gate-charge model (not a published form): the gate holds the plateau
    for t_rv, so the node voltage must rise by V in that time; the node capacitance takes
    the charge Q_node for it, i.e. a current Q_node/t_rv on average, and that share of the
    load current flows into the capacitances, not the channel. The channel keeps
    i_ch = I − Q_node/t_rv during the voltage rise and lets it fall to zero in t_fi, which
    gives the two triangles above. With the energy-equivalent charge the voltage-rise
    triangle is ½·V·I·t_rv − E_node, the channel energy of a linear rise with the node
    capacitance taking C_node(v)·dv/dt, as long as the channel current stays positive.
    Where Q_node/I ≥ t_rv (light load) the load current
    alone charges the node faster than the gate lets it rise: the turn-off is capacitive
    and nearly lossless (E_off = 0), and the energy then stored in the node is counted once,
    in ``coss`` at the next turn-on. The rule is continuous across I = Q_node/t_rv (i_ch → 0
    from both sides) and non-decreasing in I. At Q_node = 0 it is [MUR]'s ½·V·I·(t_rv + t_fi).

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland, W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003 ([MUR]) ch. 2, linearised switching
       waveforms (REFERENCES.md §5.2); the node-charge correction is derived from the
       gate-charge model (SPEC §2.3).
    """
    v_edge = _f(v_edge)
    i = _f(i)
    with np.errstate(invalid="ignore", divide="ignore"):
        i_ch = np.maximum(i - _f(q_node) / _f(t_rv), 0.0)
    return 0.5 * v_edge * i_ch * (_f(t_rv) + _f(t_fi))


def reference_energy_scaled(
    e_ref: ArrayLike,
    *,
    at_v: ArrayLike,
    at_i: ArrayLike,
    v: ArrayLike,
    i: ArrayLike,
) -> np.ndarray:
    """Datasheet switching energy scaled to the operating edge.

    Parameters
    ----------
    e_ref : array_like
        Switching energy (eon or eoff) given at ``at_v`` and ``at_i``. [J]
    at_v : array_like
        Voltage at which ``e_ref`` is given. [V]
    at_i : array_like
        Current at which ``e_ref`` is given. [A]
    v : array_like
        Edge voltage at the operating point. [V]
    i : array_like
        Switched current at the operating point; ≤ 0 gives zero. [A]

    Returns
    -------
    ndarray
        Switching energy at the edge. [J]

    Notes
    -----
    E = E_ref·(V/V_ref)·(I/I_ref) for I > 0. Linear in V and I as the overlap triangle is;
    the gate resistance, temperature and stray inductance of the datasheet test circuit stay
    in the figure. What the figure already includes (Coss, recovery) is for the caller to
    leave out of the other terms.

    References
    ----------
    .. [1] SPEC §2.3, reference switching energies; linear scaling is common practice (no
       single published source), consistent with the linearised overlap of [MUR] ch. 2.
    """
    i = _f(i)
    return np.where(i > 0.0, _f(e_ref) * (_f(v) / _f(at_v)) * (i / _f(at_i)), 0.0)


# --------------------------------------------------------------------------------------------
# Dead time and reverse recovery
# --------------------------------------------------------------------------------------------


def body_diode_conduction_time(t_dead: ArrayLike, *, i: ArrayLike, q_node: ArrayLike) -> np.ndarray:
    """Body-diode conduction time within one dead time.

    Parameters
    ----------
    t_dead : array_like
        Dead time between one switch opening and the other closing. [s]
    i : array_like
        Node (inductor) current during the dead time; its sign is ignored. [A]
    q_node : array_like
        Charge the node needs to swing across the edge voltage: both devices' Qoss or
        qc. [C]

    Returns
    -------
    ndarray
        Time the body diode conducts; 0 at zero current. [s]

    Notes
    -----
    t = max(t_dead − Q_node/|I|, 0): the node current first swings the node in Q_node/|I|
    (current constant over the dead time), then the body diode clamps it for the rest.
    Where the swing outlasts the dead time the diode does not conduct and the incoming
    switch turns on from a residual voltage (:func:`residual_voltage`).

    References
    ----------
    .. [1] SPEC §2.3 (at the main switch's turn-off the body diode conducts for
       t_dead − Q_node/I); REFERENCES.md §5.4, dead-time conduction (common practice).
    """
    i_abs = np.abs(_f(i))
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.maximum(_f(t_dead) - _f(q_node) / i_abs, 0.0)
    return np.where(i_abs > 0.0, t, 0.0)


def dead_time_energy(vsd: ArrayLike, *, i: ArrayLike, t_conduct: ArrayLike) -> np.ndarray:
    """Body-diode conduction energy of one dead interval.

    Parameters
    ----------
    vsd : array_like
        Body-diode forward voltage at the current and temperature. [V]
    i : array_like
        Current through the body diode; its sign is ignored. [A]
    t_conduct : array_like
        Conduction time (:func:`body_diode_conduction_time`). [s]

    Returns
    -------
    ndarray
        Energy dissipated in the body diode. [J]

    Notes
    -----
    E = V_SD·|I|·t, current constant over the interval. Sum both dead times of a period and
    multiply by fsw for the power: P = V_SD·(I_1·t_1 + I_2·t_2)·fsw.

    References
    ----------
    .. [1] REFERENCES.md §5.4, dead-time body-diode conduction (common practice).
    """
    return _f(vsd) * np.abs(_f(i)) * _f(t_conduct)


def qrr_scaled(
    qrr_ref: ArrayLike,
    *,
    i: ArrayLike,
    i_ref: ArrayLike,
    t_j: ArrayLike,
    t_ref: ArrayLike,
    per_kelvin: ArrayLike = 0.01,
) -> np.ndarray:
    """Reverse-recovery charge at the edge current and temperature.

    Parameters
    ----------
    qrr_ref : array_like
        Recovered charge given at ``i_ref`` and ``t_ref``. [C]
    i : array_like
        Forward current of the diode when it is commutated; ≤ 0 gives no recovery. [A]
    i_ref : array_like
        Forward current at which ``qrr_ref`` is given. [A]
    t_j : array_like
        Junction temperature of the diode. [degC]
    t_ref : array_like
        Temperature at which ``qrr_ref`` is given. [degC]
    per_kelvin : array_like, optional
        Relative rise of Qrr per kelvin above ``t_ref``. [1/K]

    Returns
    -------
    ndarray
        Recovered charge at the edge. [C]

    Notes
    -----
    Qrr = Qrr_ref·(I/I_ref)·(1 + k·max(T_j − T_ref, 0)) for I > 0, 0 otherwise, k = 1 %/K by
    default. Linear in the forward current (the stored charge of a diode is τ·I_F in the
    charge-control picture) and rising with temperature with the carrier lifetime; the
    di/dt dependence is left in the figure. Unchanged below T_ref, on the safe side. Where
    the datasheet gives Qrr over temperature, interpolate those points instead.

    References
    ----------
    .. [1] SPEC §2.3, reverse recovery; REFERENCES.md §5.4 (Qrr grows with T_j, I_F and
       di/dt). The linear current law and the +1 %/K figure are common practice, the
       figure from memory (no source at hand).
    """
    i = _f(i)
    rise = np.maximum(_f(t_j) - _f(t_ref), 0.0)
    scale = (i / _f(i_ref)) * (1.0 + _f(per_kelvin) * rise)
    return np.where(i > 0.0, _f(qrr_ref) * scale, 0.0)


def recovery_energy_total(qrr: ArrayLike, *, v: ArrayLike) -> np.ndarray:
    """Energy drawn from the bus by one reverse recovery.

    Parameters
    ----------
    qrr : array_like
        Recovered charge at the edge (:func:`qrr_scaled`). [C]
    v : array_like
        Edge voltage the diode blocks after recovery. [V]

    Returns
    -------
    ndarray
        Energy drawn from the bus by the recovery, shared by diode and switch. [J]

    Notes
    -----
    E = Qrr·V: the recovered charge passes from the bus through the incoming switch and the
    diode while the diode's voltage builds up to V.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, *Fundamentals of Power Electronics*, 3rd ed.,
       Springer, 2020 ([EM]) ch. 4, diode recovered charge (the switching energy gains a
       V·Q_r term; exact form from memory, verify), REFERENCES.md §5.4.
    """
    return _f(qrr) * _f(v)


def recovery_energy_diode(
    qrr: ArrayLike, *, v: ArrayLike, erec: ArrayLike | None = None
) -> np.ndarray:
    """Share of a reverse recovery dissipated in the diode itself.

    Parameters
    ----------
    qrr : array_like
        Recovered charge at the edge. [C]
    v : array_like
        Edge voltage the diode blocks after recovery. [V]
    erec : array_like or None, optional
        Datasheet recovery energy of the diode; None takes the soft-diode estimate. [J]

    Returns
    -------
    ndarray
        Recovery energy kept by the diode, never above Qrr·V. [J]

    Notes
    -----
    E_rec = ¼·Qrr·V for a soft diode (the recovery current tails off while the voltage
    rises), nearly zero for a snappy one; a given ``erec`` wins, capped at the total Qrr·V
    so that the switch's share never turns negative (and zero where Qrr is zero, e.g. a
    zero-current edge in DCM).

    References
    ----------
    .. [1] REFERENCES.md §5.4, diode-side recovery energy ¼·Q_rr·V_R for a soft diode
       (common practice); attribution per SPEC §2.3.
    """
    total = recovery_energy_total(qrr, v=v)
    if erec is None:
        return 0.25 * total
    return np.minimum(_f(erec), total)


def recovery_energy_switch(
    qrr: ArrayLike, *, v: ArrayLike, erec: ArrayLike | None = None
) -> np.ndarray:
    """Share of a reverse recovery dissipated in the incoming switch.

    Parameters
    ----------
    qrr : array_like
        Recovered charge at the edge. [C]
    v : array_like
        Edge voltage the diode blocks after recovery. [V]
    erec : array_like or None, optional
        Datasheet recovery energy of the diode; None takes the soft-diode estimate. [J]

    Returns
    -------
    ndarray
        Recovery energy dissipated in the incoming switch. [J]

    Notes
    -----
    E_sw = Qrr·V − E_rec, with E_rec from :func:`recovery_energy_diode`; the two shares sum
    to Qrr·V exactly.

    References
    ----------
    .. [1] REFERENCES.md §5.4, reverse recovery (the incoming switch takes Q_rr·V − E_rec);
       R. W. Erickson, D. Maksimović, *Fundamentals of Power Electronics*, 3rd ed.,
       Springer, 2020 ([EM]) ch. 4 (from memory, verify); SPEC §2.3.
    """
    return recovery_energy_total(qrr, v=v) - recovery_energy_diode(qrr, v=v, erec=erec)


# --------------------------------------------------------------------------------------------
# Gate drive
# --------------------------------------------------------------------------------------------


def gate_drive_power(qg: ArrayLike, *, v_supply: ArrayLike, fsw: ArrayLike) -> np.ndarray:
    """Power drawn from the driver supply to switch one gate.

    Parameters
    ----------
    qg : array_like
        Total gate charge at the drive voltage (per part; multiply by the count). [C]
    v_supply : array_like
        Voltage of the rail the driver draws the gate charge from (V_drive from an auxiliary
        rail, Vin through a linear regulator). [V]
    fsw : array_like
        Switching frequency. [Hz]

    Returns
    -------
    ndarray
        Gate-drive power drawn from the supply. [W]

    Notes
    -----
    P = Qg·V_supply·fsw: the charge Qg is drawn once per period from the supply, whatever
    the gate capacitance's non-linearity. Of it, Qg·V_drive·fsw is burnt in the gate loop
    (see :func:`gate_resistance_share`) and Qg·(V_supply − V_drive)·fsw in a linear
    regulator.

    References
    ----------
    .. [1] REFERENCES.md §5.4, gate drive P_g = Q_g·V_drv·f_sw (common practice: follows
       from the charge drawn from the driver supply); SPEC §2.2, ``driver``.
    """
    return _f(qg) * _f(v_supply) * _f(fsw)


def gate_resistance_share(
    *,
    rg: ArrayLike,
    r_source: ArrayLike,
    rg_on: ArrayLike,
    r_sink: ArrayLike,
    rg_off: ArrayLike,
) -> np.ndarray:
    """Fraction of the gate energy burnt in the internal gate resistance.

    Parameters
    ----------
    rg : array_like
        Internal gate resistance of the MOSFET. [ohm]
    r_source : array_like
        Driver pull-up (source) resistance. [ohm]
    rg_on : array_like
        External turn-on gate resistor. [ohm]
    r_sink : array_like
        Driver pull-down (sink) resistance. [ohm]
    rg_off : array_like
        External turn-off gate resistor. [ohm]

    Returns
    -------
    ndarray
        Fraction of Qg·V_drive per cycle dissipated in ``rg`` (it heats the MOSFET's
        node; the rest heats the driver and the external resistors). [-]

    Notes
    -----
    share = ½·rg/(r_source + rg_on + rg) + ½·rg/(r_sink + rg_off + rg): half of Qg·V_drive
    is burnt while charging the gate and half while discharging it, each half split among
    the series resistances in proportion to resistance. The half-and-half split is exact for
    a linear gate capacitance; the Miller plateau shifts it somewhat.

    References
    ----------
    .. [1] REFERENCES.md §5.4, gate drive: split among R_g,int, R_g,ext and the driver in
       proportion to resistance (common practice); SPEC §2.2, ``driver``.
    """
    rg = _f(rg)
    on = rg / (_f(r_source) + _f(rg_on) + rg)
    off = rg / (_f(r_sink) + _f(rg_off) + rg)
    return 0.5 * on + 0.5 * off
