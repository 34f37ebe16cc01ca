"""The DCM ring of the switch node: the idle-interval oscillation and what it leaves at turn-on.

Pure functions of the ``losses/`` layer. When the rectifier current of a discontinuous stage
reaches zero, the switch node still holds the blocking voltage V_b and rings about its settled
value V_set with the inductance and the node capacitance, damped by a series resistance R_ring
(SPEC §2.3). The node capacitance is nonlinear: each device follows C ∝ v^−½ on its own voltage,
the switch on v and the opposite device (sync FET or diode) on V_b − v. The ring is integrated
with the node charge as the state (the opposite device's capacitance is infinite at the start),
clamped at 0 V (the switch's body diode) and at V_b (the rectifier conducting again).

For speed the integration is done once per charge split, on a normalised table over the settled
value s = V_set/V_b, the quality factor Q (defined at the small-signal ring frequency at V_set)
and the phase θ = ω0·t, and every operating point interpolates in it. Past the table's length
the ring continues on its small-signal (linear RLC) form about V_set, where its amplitude is
small. The ring current left at turn-on is not carried into the next on-interval (the output
says so). Every function broadcasts with numpy's rules.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

from lossbudget.losses.mosfet import node_charge, node_energy, residual_voltage

__all__ = [
    "core_series_resistance_steinmetz",
    "node_capacitance",
    "ring_energy",
    "ring_frequency_small_signal",
    "ring_q_from_resistance",
    "ring_resistance_from_q",
    "ring_state",
    "ring_table",
]

# table grid: settled values (uniform in arcsin √s), quality factors (log-uniform), phase
TABLE_S_NODES = 33
TABLE_Q = (0.3, 1000.0)
TABLE_Q_NODES = 29
TABLE_PERIODS = 24
TABLE_STEPS_PER_PERIOD = 64
_PHI_RANGE = (np.arcsin(np.sqrt(0.004)), np.arcsin(np.sqrt(0.996)))


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


@dataclass(frozen=True, slots=True, kw_only=True)
class RingTable:
    """The normalised ring over settled value, Q and phase, for one split of the charge.

    ``x`` is the switch voltage's deviation from the settled value over the amplitude,
    (v − V_set)/(V_b − V_set); ``w`` the energy dissipated in R_ring so far over the ring
    energy at the start; ``x_valley``, ``w_valley`` the same at the last valley reached (the
    ring's own values before the first valley). Axes: settled value s = V_set/V_b (uniform in
    arcsin √s), log Q, phase θ = ω0·t in steps of ``step``. ``u_end``, ``du_end``, ``w_end``:
    the deviation, its θ-derivative and w at the table's end, for the continuation.
    """

    share_self: float
    phi: np.ndarray
    log_q: np.ndarray
    step: float
    x: np.ndarray
    w: np.ndarray
    x_valley: np.ndarray
    w_valley: np.ndarray
    u_end: np.ndarray
    du_end: np.ndarray
    w_end: np.ndarray


def _c_norm(s, rho):
    """C_node(V_set)·√V_b/a_tot at s = V_set/V_b."""
    return 0.5 * (rho / np.sqrt(s) + (1.0 - rho) / np.sqrt(1.0 - s))


def ring_table(share_self: float) -> RingTable:
    """Integrate the normalised nonlinear ring once, over the table grid.

    Parameters
    ----------
    share_self : float
        The switch's share of the charge coefficients, ρ = a_self/(a_self + a_opp),
        in [0, 1]. [-]

    Returns
    -------
    RingTable
        The tabulated trajectories (see :class:`RingTable`). [-]

    Notes
    -----
    With x = v/V_b, charge y = ρ√x − (1 − ρ)√(1 − x) (node charge over a_tot·√V_b), current
    j = i·T0/(a_tot·√V_b), T0 = √(L·a_tot/√V_b), and phase θ = t/(T0·√c(s)),
    c(s) = ½(ρ/√s + (1 − ρ)/√(1 − s)), the ring reads
    dy/dθ = √c·j, dj/dθ = √c·(s − x(y) − r·j), dw/dθ = √c·r·j², r = 1/(Q·√c), from
    y = ρ (x = 1), j = 0; dy/dθ = 0 while the node is clamped at x = 0 with j < 0 or at
    x = 1 with j > 0. x(y) is the closed-form root of the charge equation
    (:func:`lossbudget.losses.mosfet.residual_voltage`). Classical fourth-order Runge–Kutta,
    64 steps per small-signal period, over 24 periods; the grid of settled values and Q is
    the table's, so this runs once per charge split (results are memoised). A Python loop
    runs over the fixed time steps of the table, never over operating points.

    References
    ----------
    .. [1] L. Huber, B. T. Irving, M. M. Jovanović, "Effect of valley switching and
       switching-frequency limitation on line-current distortions of DCM/CCM boundary boost
       PFC converters", IEEE Trans. Power Electron. 24(2), 2009 (the DCM node ring and its
       valleys); any circuit-theory text for the series RLC ring (REFERENCES.md §13.1).
    .. [2] E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential Equations I*,
       Springer, 1993, §II.1 (classical Runge–Kutta method).
    """
    return _ring_table(round(float(share_self), 12))


@lru_cache(maxsize=8)
def _ring_table(rho: float) -> RingTable:
    rho = min(max(rho, 0.0), 1.0)
    phi = np.linspace(*_PHI_RANGE, TABLE_S_NODES)
    log_q = np.linspace(np.log(TABLE_Q[0]), np.log(TABLE_Q[1]), TABLE_Q_NODES)
    s = np.sin(phi)[:, None] ** 2 * np.ones((1, TABLE_Q_NODES))
    q = np.exp(log_q)[None, :] * np.ones((TABLE_S_NODES, 1))
    sc = np.sqrt(_c_norm(s, rho))
    r = 1.0 / (q * sc)
    y_lo, y_hi = -(1.0 - rho), rho
    h = 2.0 * np.pi / TABLE_STEPS_PER_PERIOD
    n = TABLE_PERIODS * TABLE_STEPS_PER_PERIOD + 1

    def x_of(y):
        return residual_voltage(1.0, charge_moved=rho - np.clip(y, y_lo, y_hi), a_self=rho,
                                a_opp=1.0 - rho)

    def rhs(y, j):
        x = x_of(y)
        held = ((y <= y_lo) & (j < 0.0)) | ((y >= y_hi) & (j > 0.0))
        dy = np.where(held, 0.0, sc * j)
        return dy, sc * (s - x - r * j), sc * r * j * j

    y = np.full(s.shape, y_hi)
    j = np.zeros(s.shape)
    w = np.zeros(s.shape)
    xs = np.empty((*s.shape, n))
    ws = np.empty((*s.shape, n))
    xs[..., 0] = 1.0
    ws[..., 0] = 0.0
    for k in range(1, n):
        k1 = rhs(y, j)
        k2 = rhs(y + 0.5 * h * k1[0], j + 0.5 * h * k1[1])
        k3 = rhs(y + 0.5 * h * k2[0], j + 0.5 * h * k2[1])
        k4 = rhs(y + h * k3[0], j + h * k3[1])
        y = np.clip(y + h / 6.0 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0]), y_lo, y_hi)
        j = j + h / 6.0 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
        w = w + h / 6.0 * (k1[2] + 2 * k2[2] + 2 * k3[2] + k4[2])
        xs[..., k] = x_of(y)
        ws[..., k] = w
    # the last valley reached: a sample no higher than its neighbours and falling into it
    xv = xs.copy()
    wv = ws.copy()
    held_x = xs[..., 0].copy()
    held_w = ws[..., 0].copy()
    seen = np.zeros(s.shape, dtype=bool)
    for k in range(1, n - 1):
        low = (xs[..., k] <= xs[..., k - 1]) & (xs[..., k] <= xs[..., k + 1])
        low &= (xs[..., k] < xs[..., k - 1]) | (xs[..., k] <= 0.0)
        held_x = np.where(low, xs[..., k], held_x)
        held_w = np.where(low, ws[..., k], held_w)
        seen |= low
        xv[..., k] = np.where(seen, np.minimum(held_x, xs[..., k]), xs[..., k])
        wv[..., k] = np.where(seen, held_w, ws[..., k])
    xv[..., -1] = np.where(seen, np.minimum(held_x, xs[..., -1]), xs[..., -1])
    wv[..., -1] = np.where(seen, held_w, ws[..., -1])
    c = _c_norm(s, rho)
    amp = 1.0 - s
    u0 = ring_energy(1.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)[..., None]
    with np.errstate(invalid="ignore", divide="ignore"):
        u0 = np.where(u0 > 0.0, u0, 1.0)
    return RingTable(
        share_self=rho,
        phi=phi,
        log_q=log_q,
        step=h,
        x=(xs - s[..., None]) / amp[..., None],
        w=ws / u0,
        x_valley=(xv - s[..., None]) / amp[..., None],
        w_valley=wv / u0,
        u_end=(xs[..., -1] - s) / amp,
        du_end=j / np.sqrt(c) / amp,
        w_end=w / u0[..., 0],
    )


def _weights(value, start, step, count):
    pos = (value - start) / step
    i0 = np.clip(np.floor(pos), 0, count - 2).astype(np.intp)
    frac = np.clip(pos - i0, 0.0, 1.0)
    return i0, frac


def ring_state(
    t: ArrayLike,
    *,
    v_set: ArrayLike,
    v_block: ArrayLike,
    l: ArrayLike,
    a_self: float,
    a_opp: float,
    q: ArrayLike,
    valley: bool = False,
    table: RingTable | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Switch voltage of the ring and the energy it has dissipated, after a time.

    Parameters
    ----------
    t : array_like
        Time since the rectifier current reached zero; ≥ 0. [s]
    v_set : array_like
        Settled switch voltage V_set (Vin boost and inverting, Vin − Vout buck). [V]
    v_block : array_like
        Blocking voltage V_b the ring starts from (with the diode's V_F). [V]
    l : array_like
        Inductance of the stage. [H]
    a_self : float
        Charge coefficient of the switch (one per solve). [C/V^0.5]
    a_opp : float
        Charge coefficient of the opposite device (one per solve). [C/V^0.5]
    q : array_like
        Quality factor at the small-signal ring frequency at V_set. [-]
    valley : bool, optional
        Give the voltage and the dissipated energy at the last valley reached by ``t``
        (the ring's own values before the first valley) instead of at ``t``. [-]
    table : RingTable, optional
        A table from :func:`ring_table` for this charge split; built if omitted. [-]

    Returns
    -------
    v : ndarray
        Switch voltage, in [0, V_b]. [V]
    e_decay : ndarray
        Energy dissipated in R_ring since the start of the ring. [J]

    Notes
    -----
    Interpolated in the normalised table of :func:`ring_table`: linear in arcsin √s, log Q
    and θ = ω0·t (64 samples per small-signal period). s is held within [0.004, 0.996] and Q
    within [0.3, 1000]. Past 24 small-signal periods the ring continues on its linear form
    about V_set, u'' + u'/Q + u = 0 in θ from the table's last state (the large-amplitude
    nonlinearity has decayed by then; Q ≤ ½ is taken as settled), and its dissipation as the
    fall of ½·c·(u² + u'²); there the last valley is taken at the decaying envelope,
    V_set − A·e^(−θ/2Q), which lies at or below the voltage itself. With no node charge the
    node sits at V_set and dissipates nothing.

    References
    ----------
    .. [1] L. Huber, B. T. Irving, M. M. Jovanović, IEEE Trans. Power Electron. 24(2), 2009
       (DCM ring, valleys); any circuit-theory text for the series RLC step response as the
       linear limit, v = V_set + A·e^(−σt)·[cos ω_d t + (σ/ω_d) sin ω_d t]
       (REFERENCES.md §13.1); SPEC §2.3.
    """
    a_tot = float(a_self) + float(a_opp)
    t, v_set, v_block, q = np.broadcast_arrays(_f(t), _f(v_set), _f(v_block), _f(q))
    if a_tot <= 0.0:
        return np.clip(v_set, 0.0, v_block).copy(), np.zeros(np.shape(t))
    tab = table if table is not None else ring_table(float(a_self) / a_tot)
    rho = tab.share_self
    with np.errstate(invalid="ignore", divide="ignore"):
        s_raw = v_set / v_block
        ok = np.isfinite(s_raw) & (v_block > 0.0) & np.isfinite(t) & np.isfinite(q)
        s = np.clip(np.where(ok, s_raw, 0.5), np.sin(_PHI_RANGE[0]) ** 2,
                    np.sin(_PHI_RANGE[1]) ** 2)
        c = _c_norm(s, rho)
        t0 = np.sqrt(_f(l) * a_tot / np.sqrt(np.where(ok, v_block, 1.0)))
        theta = np.where(ok, np.maximum(t, 0.0), 0.0) / (t0 * np.sqrt(c))
        qq = np.clip(np.where(ok, q, 1.0), *TABLE_Q)
    phi = np.arcsin(np.sqrt(s))
    i_s, f_s = _weights(phi, tab.phi[0], tab.phi[1] - tab.phi[0], tab.phi.size)
    i_q, f_q = _weights(np.log(qq), tab.log_q[0], tab.log_q[1] - tab.log_q[0], tab.log_q.size)
    n_t = tab.x.shape[-1]
    i_t, f_t = _weights(theta, 0.0, tab.step, n_t)
    xs_arr, ws_arr = (tab.x_valley, tab.w_valley) if valley else (tab.x, tab.w)
    x = np.zeros(np.shape(s))
    w = np.zeros(np.shape(s))
    u_end = np.zeros(np.shape(s))
    du_end = np.zeros(np.shape(s))
    w_end = np.zeros(np.shape(s))
    for ds, ws_ in ((0, 1.0 - f_s), (1, f_s)):
        for dq, wq in ((0, 1.0 - f_q), (1, f_q)):
            wgt = ws_ * wq
            ii, qi = i_s + ds, i_q + dq
            x += wgt * ((1.0 - f_t) * xs_arr[ii, qi, i_t] + f_t * xs_arr[ii, qi, i_t + 1])
            w += wgt * ((1.0 - f_t) * ws_arr[ii, qi, i_t] + f_t * ws_arr[ii, qi, i_t + 1])
            u_end += wgt * tab.u_end[ii, qi]
            du_end += wgt * tab.du_end[ii, qi]
            w_end += wgt * tab.w_end[ii, qi]
    # table values are relative: deviation over the amplitude, energy over the initial
    # ring energy, so that neighbouring settled values blend like for like
    amp = 1.0 - s
    u_scale = ring_energy(1.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    x = s + amp * x
    w = w * u_scale
    w_end = w_end * u_scale
    u_end = u_end * amp
    du_end = du_end * amp
    # past the table: the linear ring about s from the table's last state
    theta_end = tab.step * (n_t - 1)
    past = theta > theta_end
    tau = np.where(past, theta - theta_end, 0.0)
    sig = 0.5 / qq
    under = qq > 0.5
    wd = np.sqrt(np.where(under, 1.0 - sig * sig, 1.0))
    decay = np.exp(-sig * tau)
    b = (du_end + sig * u_end) / wd
    u = np.where(under, decay * (u_end * np.cos(wd * tau) + b * np.sin(wd * tau)), 0.0)
    du = np.where(
        under, decay * (du_end * np.cos(wd * tau) - (u_end + sig * du_end) / wd * np.sin(wd * tau)),
        0.0,
    )
    e0 = 0.5 * c * (u_end * u_end + du_end * du_end)
    e1 = 0.5 * c * (u * u + du * du)
    w_lin = w_end + np.maximum(e0 - e1, 0.0)
    x_lin = u + s
    if valley:
        env = np.where(under, decay * np.sqrt(u_end * u_end + b * b), 0.0)
        x_lin = np.minimum(s - env, x_lin)
    x = np.where(past, np.clip(x_lin, 0.0, 1.0), x)
    w = np.where(past, w_lin, w)
    x = np.where(ok, x, np.nan)
    e_scale = a_tot * np.where(ok, v_block, np.nan) ** 1.5
    v = np.where(ok, x * v_block, np.nan)
    # the table's s is clipped at its ends: keep the settled voltage itself there
    return v, w * e_scale
