"""The DCM ring's trajectory: the idle-interval oscillation and what it leaves at turn-on.

Pure functions of the ``losses/`` layer. When the rectifier current of a discontinuous stage
reaches zero, the switch node still holds the blocking voltage V_b and rings about its settled
value V_set with the inductance and the node capacitance, damped by a series resistance R_ring
(SPEC §2.3). The node capacitance is nonlinear: each device follows C ∝ v^−½ on its own voltage,
the switch on v and the opposite device (sync FET or diode) on V_b − v. The ring is integrated
with the node charge as the state (the opposite device's capacitance is infinite at the start),
clamped at 0 V (the switch's body diode) and at V_b (the rectifier conducting again).

For speed the integration is done once per charge split, on a normalised table over the settled
value s = V_set/V_b, the quality factor Q (defined at the small-signal ring frequency at V_set)
and the time (damped rings) or the ring's own phase (lightly damped ones), and every operating
point interpolates in it. A ring that reaches 0 V is held there and starts afresh from 0 V at
rest, so two rings from rest are tabulated and the clamp between them is solved in closed form.
Past the table's length the last cycle repeats, decaying at the small-signal rate. The ring
current left at turn-on is not carried into the next on-interval (the output says so). Every
function broadcasts with numpy's rules.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

from lossbudget.losses.mosfet import residual_voltage
from lossbudget.losses.ring import ring_energy

__all__ = ["ring_state", "ring_table"]

# table grid: settled values (uniform in arcsin √s), quality factors (log-uniform); the
# damped rings (Q below Q_SPLIT) in time, the others in their own phase
TABLE_S_NODES = 41
TABLE_Q_LOW = (0.3, 4.0, 5)
TABLE_Q_HIGH = (2.5, 1000.0, 13)
Q_SPLIT = 3.0
TABLE_PERIODS = 24
TABLE_STEPS_PER_PERIOD = 48
_INTEGRATED_PERIODS = 32
_S_RANGE = (0.004, 0.996)



def _f(a):
    return np.asarray(a, dtype=float)


@dataclass(frozen=True, slots=True, kw_only=True)
class RingPart:
    """One tabulated ring from rest: over settled value, Q and time or phase.

    Values are relative, so that neighbouring settled values blend like for like: ``low``
    and ``high`` each hold (y, w, y_valley, w_valley): the node charge's deviation from its
    settled value over the start's deviation, the energy dissipated in R_ring over the ring
    energy at the start, and the same at the last valley reached. ``low`` (Q up to
    4) is sampled uniformly in θ = ω0·t; ``high`` (Q from 2.5) uniformly in the ring's own
    phase Φ (the unwrapped angle of its phase-plane trajectory), ``theta`` giving the time
    at which each phase is reached, so that rings of neighbouring settled values blend in
    step. ``left``: the ring energy still held at the end of ``high``, relative.
    """

    low: tuple[np.ndarray, ...]
    high: tuple[np.ndarray, ...]
    theta: np.ndarray
    left: np.ndarray


@dataclass(frozen=True, slots=True, kw_only=True)
class RingTable:
    """The normalised ring for one charge split (see :func:`ring_table`).

    Axes: settled value s = V_set/V_b (uniform in arcsin √s, ``phi``), log Q (``log_q_low``,
    ``log_q_high``), sample (``step`` apart in θ or Φ). ``top``: the ring from the blocking
    voltage; ``bottom``: the ring from 0 V at rest, which follows a clamp at 0 V. ``margin``:
    the energy left on reaching 0 V over the ring energy at the start, less the energy held
    at 0 V (negative where the first descent turns above 0 V: no clamp); ``theta_c``,
    ``w_c``: when the first descent reaches 0 V and what it has dissipated by then.
    """

    share_self: float
    phi: np.ndarray
    log_q_low: np.ndarray
    log_q_high: np.ndarray
    step: float
    top: RingPart
    bottom: RingPart
    margin: np.ndarray
    theta_c: np.ndarray
    w_c: np.ndarray


def _y_of_x(x, rho):
    """Normalised node charge y = ρ√x − (1 − ρ)√(1 − x) at x = v/V_b."""
    return rho * np.sqrt(x) - (1.0 - rho) * np.sqrt(1.0 - x)


def _x_of_y(y, rho):
    """Inverse of :func:`_y_of_x` (closed form, :func:`residual_voltage`)."""
    y = np.clip(y, -(1.0 - rho), rho)
    return residual_voltage(1.0, charge_moved=rho - y, a_self=rho, a_opp=1.0 - rho)


def _c_norm(s, rho):
    """C_node(V_set)·√V_b/a_tot at s = V_set/V_b."""
    return 0.5 * (rho / np.sqrt(s) + (1.0 - rho) / np.sqrt(1.0 - s))


def ring_table(share_self: float) -> RingCache:
    """The normalised nonlinear ring of one charge split, tabulated.

    Parameters
    ----------
    share_self : float
        The switch's share of the charge coefficients, ρ = a_self/(a_self + a_opp),
        in [0, 1]. [-]

    Returns
    -------
    RingCache
        The table, memoised per charge split and integrated when an operating point first
        needs it (see :class:`RingTable`). [-]

    Notes
    -----
    With x = v/V_b, charge y = ρ√x − (1 − ρ)√(1 − x) (node charge over a_tot·√V_b), current
    j = i·T0/(a_tot·√V_b), T0 = √(L·a_tot/√V_b), and θ = t/(T0·√c(s)),
    c(s) = ½(ρ/√s + (1 − ρ)/√(1 − s)), the ring reads
    dy/dθ = √c·j, dj/dθ = √c·(s − x(y) − r·j), dw/dθ = √c·r·j², r = 1/(Q·√c), from
    x = 1, j = 0. The state is ψ with x = sin²ψ (dy/dψ = ρ·cos ψ + (1 − ρ)·sin ψ > 0, so the
    infinite capacitance at either end is no singularity), or the charge y itself where one
    device holds under 1 % of the charge (x(y) then in closed form per step).
    Where the first descent reaches 0 V, the switch's body diode clamps the node until the
    current has returned to zero; the ring then starts afresh from 0 V at rest and, damped,
    never reaches 0 V or V_b again. So two rings from rest are tabulated, from V_b and from
    0 V, and the clamp between them is solved in closed form per point. Classical
    fourth-order Runge–Kutta, 48 steps per small-signal period. The ring's phase is the
    unwrapped angle of ((y − y_s)/√c, −j), which advances by 2π per cycle at any amplitude;
    the lightly damped rings are resampled on it, so that the amplitude-dependent period of
    the nonlinear ring does not smear the blend between neighbouring settled values. A
    Python loop runs over the fixed steps and trajectories of the table, never over
    operating points; the table is memoised per charge split.

    References
    ----------
    .. [1] L. Huber, B. T. Irving, M. M. Jovanović, "Effect of valley switching and
       switching-frequency limitation on line-current distortions of DCM/CCM boundary boost
       PFC converters", IEEE Trans. Power Electron. 24(2), 2009 (the DCM node ring and its
       valleys); any circuit-theory text for the series RLC ring (REFERENCES.md §13.1).
    .. [2] E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential Equations I*,
       Springer, 1993, §II.1 (classical Runge–Kutta method).
    """
    return _ring_table(round(min(max(float(share_self), 0.0), 1.0), 12))


def _phi_nodes():
    return np.linspace(np.arcsin(np.sqrt(_S_RANGE[0])), np.arcsin(np.sqrt(_S_RANGE[1])),
                       TABLE_S_NODES)


def _integrate(rho, s, q, n, *, top):
    """RK4 of the normalised ring from rest over n steps: x, w, j, phase (s × q × n).

    ``top`` (broadcast over s × q): start from the blocking voltage, else from 0 V.
    """
    sc = np.sqrt(_c_norm(s, rho))
    r = 1.0 / (q * sc)
    y_s = rho * np.sqrt(s) - (1.0 - rho) * np.sqrt(1.0 - s)
    h = 2.0 * np.pi / TABLE_STEPS_PER_PERIOD
    end = 0.5 * np.pi

    # the state: ψ with x = sin²ψ, where both devices hold charge (dy/dψ = ρ·cos ψ +
    # (1 − ρ)·sin ψ > 0, so the infinite capacitance at either end is no singularity);
    # the charge y itself where one device holds (nearly) none
    by_angle = 0.01 <= rho <= 0.99
    y_lo, y_hi = -(1.0 - rho), rho

    def rhs(z, j):
        if by_angle:
            sn, cs = np.sin(z), np.cos(z)
            x = sn * sn
            dz = sc * j / (rho * cs + (1.0 - rho) * sn)
            held = ((z <= 0.0) & (j < 0.0)) | ((z >= end) & (j > 0.0))
        else:
            x = _x_of_y(z, rho)
            dz = sc * j
            held = ((z <= y_lo) & (j < 0.0)) | ((z >= y_hi) & (j > 0.0))
        return np.where(held, 0.0, dz), sc * (s - x - r * j), sc * r * j * j

    z_lo, z_hi = (0.0, end) if by_angle else (y_lo, y_hi)
    # RK4 at two table samples a step; the sample between is the cubic Hermite midpoint
    # from the states and slopes at both ends (fourth order, like the steps), written in
    # place: fresh memory is dear, its page faults cost more than the arithmetic here.
    hh = 2.0 * h
    m = (n - 1) // 2
    z = np.where(top, z_hi, z_lo) * np.ones(s.shape)
    j = np.zeros(s.shape)
    w = np.zeros(s.shape)
    fine = np.empty((3, 2 * m + 1, *s.shape))
    fine[:, 0] = z, j, w
    prev_state = prev_slope = None
    z_raw = z
    for k in range(m + 1):
        k1 = rhs(z, j)
        if prev_state is not None:
            for c in range(3):
                fine[c, 2 * k - 1] = 0.5 * (prev_state[c] + (z_raw, j, w)[c]) + hh / 8.0 * (
                    prev_slope[c] - k1[c])
        if k == m:
            break
        prev_state, prev_slope = (z, j, w), k1
        k2 = rhs(np.clip(z + 0.5 * hh * k1[0], z_lo, z_hi), j + 0.5 * hh * k1[1])
        k3 = rhs(np.clip(z + 0.5 * hh * k2[0], z_lo, z_hi), j + 0.5 * hh * k2[1])
        k4 = rhs(np.clip(z + hh * k3[0], z_lo, z_hi), j + hh * k3[1])
        z_raw = z + hh / 6.0 * (k1[0] + 2 * k2[0] + 2 * k3[0] + k4[0])
        j = j + hh / 6.0 * (k1[1] + 2 * k2[1] + 2 * k3[1] + k4[1])
        w = w + hh / 6.0 * (k1[2] + 2 * k2[2] + 2 * k3[2] + k4[2])
        fine[:, 2 * k + 2] = z_raw, j, w  # unclipped, so that 0 V is placed between steps
        z = np.clip(z_raw, z_lo, z_hi)
    raw, js, ws = fine  # raw: the unclipped state, at or below z_lo where 0 V is reached
    psis = np.clip(raw, z_lo, z_hi)
    if z_lo != 0.0:
        raw = raw - z_lo
    if by_angle:
        ys = np.cos(psis)
        ys *= -(1.0 - rho)
        np.sin(psis, out=psis)
        ys += rho * psis
        xs = np.square(psis, out=psis)
    else:
        xs = _x_of_y(psis, rho)
        ys = psis
    ys -= y_s
    ys /= sc
    angle = np.arctan2(-js, ys, out=ys)
    step = np.diff(angle, axis=0)
    step -= 2.0 * np.pi * np.round(step / (2.0 * np.pi))
    # the phase from the start, whichever quadrant the start lies in
    phase = angle
    phase[0] = 0.0
    np.cumsum(step, axis=0, out=phase[1:])
    np.maximum.accumulate(phase, axis=0, out=phase)
    return tuple(np.moveaxis(a, 0, -1) for a in (xs, ws, js, phase, raw))


def _valleys(xs, ws, *, at_start):
    """The voltage and dissipation at the last valley reached (the ring's own before it)."""
    prev = np.concatenate([xs[..., :1], xs[..., :-1]], axis=-1)
    nxt = np.concatenate([xs[..., 1:], xs[..., -1:]], axis=-1)
    low = (xs <= prev) & (xs <= nxt) & ((xs < prev) | (xs <= 0.0))
    low[..., 0] = at_start
    k = np.arange(xs.shape[-1])
    last = np.maximum.accumulate(np.where(low, k, -1), axis=-1)
    seen = last >= 0
    idx = np.maximum(last, 0)
    held_x = np.take_along_axis(xs, idx, axis=-1)
    held_w = np.take_along_axis(ws, idx, axis=-1)
    return (np.where(seen, np.minimum(held_x, xs), xs), np.where(seen, held_w, ws))


def _part(rho, s, q, n_lo, integrated, *, top, valleys):
    """Tabulate one ring from rest (see :class:`RingPart`) from its integration.

    Without ``valleys`` the valley slots are None (only the "valley" turn-on needs them).
    """
    n_t = TABLE_PERIODS * TABLE_STEPS_PER_PERIOD + 1
    n_long = _INTEGRATED_PERIODS * TABLE_STEPS_PER_PERIOD + 1
    xs, ws, js, phase, raw = integrated
    xv, wv = _valleys(xs, ws, at_start=not top) if valleys else (None, None)
    # the node charge, relative to its start: it leaves the start ∝ t² (the voltage of a
    # device at 0 V only ∝ t⁴), which a linear blend in time keeps smooth
    y_s = _y_of_x(s, rho)
    dev = (_y_of_x(1.0 if top else 0.0, rho) - y_s)[..., None]
    u0 = ring_energy(1.0 if top else 0.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    u0 = np.where(u0 > 0.0, u0, 1.0)
    y3, u3 = y_s[..., None], u0[..., None]
    rel = ((_y_of_x(xs, rho) - y3) / dev, ws / u3)
    if valleys:
        rel = (*rel, (_y_of_x(xv, rho) - y3) / dev, wv / u3)
    del xv, wv
    low = tuple(a[:, :n_lo, :n_t] for a in rel)
    h = 2.0 * np.pi / TABLE_STEPS_PER_PERIOD
    theta_t = h * np.arange(n_long)
    grid = h * np.arange(n_t)
    shape = (s.shape[0], s.shape[1] - n_lo)
    th = np.empty((*shape, n_t))
    high = tuple(np.empty((*shape, n_t)) for _ in rel)
    x_end = np.empty(shape)
    j_end = np.empty(shape)
    for i, m in np.ndindex(*shape):
        ph = phase[i, n_lo + m] + 1e-12 * np.arange(n_long)  # strictly increasing
        th[i, m] = np.interp(grid, ph, theta_t, right=np.inf)
        for dst, src in zip(high, rel, strict=True):
            dst[i, m] = np.interp(grid, ph, src[i, n_lo + m])
        x_end[i, m] = np.interp(grid[-1], ph, xs[i, n_lo + m])
        j_end[i, m] = np.interp(grid[-1], ph, js[i, n_lo + m])
    left = ring_energy(x_end, v_set=s[:, n_lo:], v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    part = RingPart(low=low, high=high, theta=th,
                    left=(left + 0.5 * j_end * j_end) / u0[:, n_lo:])
    if not top:
        return part, None
    # the first arrival at 0 V, placed between steps on the unclipped angle
    hit = raw <= 0.0
    first = np.where(hit.any(axis=-1), hit.argmax(axis=-1), 0)
    k = np.maximum(first, 1)
    p0 = np.take_along_axis(raw, (k - 1)[..., None], -1)[..., 0]
    p1 = np.take_along_axis(raw, k[..., None], -1)[..., 0]
    frac = np.clip(p0 / np.where(p0 > p1, p0 - p1, 1.0), 0.0, 1.0)
    at = lambda a: (1.0 - frac) * np.take_along_axis(a, (k - 1)[..., None], -1)[..., 0] + (  # noqa: E731
        frac * np.take_along_axis(a, k[..., None], -1)[..., 0])
    clamped = hit.any(axis=-1)
    j_c = at(js)
    # the first descent's lowest point, where it turns above 0 V
    half = np.argmax(np.diff(xs, axis=-1) > 0.0, axis=-1)
    x_min = np.take_along_axis(xs, half[..., None], -1)[..., 0]
    u_zero = ring_energy(0.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    u_min = ring_energy(x_min, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    margin = np.where(clamped, 0.5 * j_c * j_c, u_min - u_zero) / u0
    return part, (margin, np.where(clamped, h * (k - 1 + frac), np.inf), at(ws) / u0)


_BOTTOM_BELOW = 0.72  # no ring from V_b reaches 0 V above s ≈ 0.64 at any ρ and Q ≤ 1000


@dataclass(frozen=True, slots=True, kw_only=True)
class RingCache:
    """The table of one charge split, integrated when an operating point first needs it.

    ``blocks`` holds the table without the valleys and, once the "valley" turn-on asks for
    it, with them. Only memoisation: a value never depends on what was built before.
    """

    share_self: float
    blocks: dict = field(default_factory=dict)


@lru_cache(maxsize=8)
def _ring_table(rho: float) -> RingCache:
    return RingCache(share_self=rho)


def _q_grids():
    lq_lo = np.linspace(np.log(TABLE_Q_LOW[0]), np.log(TABLE_Q_LOW[1]), TABLE_Q_LOW[2])
    lq_hi = np.linspace(np.log(TABLE_Q_HIGH[0]), np.log(TABLE_Q_HIGH[1]), TABLE_Q_HIGH[2])
    return lq_lo, lq_hi


def _block(cache: RingCache, *, valleys: bool) -> RingTable:
    """The whole table of the charge split, integrated on first use (with or without the
    valleys; the integration's cost is mostly per step, not per trajectory)."""
    if valleys in cache.blocks:
        return cache.blocks[valleys]
    rho = cache.share_self
    lq_lo, lq_hi = _q_grids()
    s1 = np.sin(_phi_nodes()) ** 2
    s = s1[:, None] * np.ones((1, lq_lo.size + lq_hi.size))
    q = np.exp(np.concatenate([lq_lo, lq_hi]))[None, :] * np.ones_like(s)
    # the ring from 0 V at rest follows a clamp, which only low settled values reach; both
    # rings in one integration (its cost is per step more than per trajectory)
    low_nodes = np.flatnonzero(s1 < _BOTTOM_BELOW)
    n_top = s1.size
    both_s = np.concatenate([s, s[low_nodes]])
    both_q = np.concatenate([q, q[low_nodes]])
    start_top = (np.arange(both_s.shape[0]) < n_top)[:, None]
    n_long = _INTEGRATED_PERIODS * TABLE_STEPS_PER_PERIOD + 1
    out = _integrate(rho, both_s, both_q, n_long, top=start_top)
    top, (margin, theta_c, w_c) = _part(rho, s, q, lq_lo.size,
                                        tuple(a[:n_top] for a in out), top=True,
                                        valleys=valleys)
    part, _ = _part(rho, s[low_nodes], q[low_nodes], lq_lo.size,
                    tuple(a[n_top:] for a in out), top=False, valleys=valleys)

    def pad(a, fill):
        out = np.full((s1.size, *a.shape[1:]), fill)
        out[low_nodes] = a
        return out

    bottom = RingPart(
        low=tuple(pad(a, 0.0) for a in part.low),
        high=tuple(pad(a, 0.0) for a in part.high),
        theta=pad(part.theta, np.inf),
        left=pad(part.left, 0.0),
    )
    tab = RingTable(
        share_self=rho,
        phi=_phi_nodes(),
        log_q_low=lq_lo,
        log_q_high=lq_hi,
        step=2.0 * np.pi / TABLE_STEPS_PER_PERIOD,
        top=top,
        bottom=bottom,
        margin=margin,
        theta_c=theta_c,
        w_c=w_c,
    )
    cache.blocks[valleys] = tab
    return tab


def _weights(value, start, step, count):
    pos = (value - start) / step
    i0 = np.clip(np.floor(pos), 0, count - 2).astype(np.intp)
    frac = np.clip(pos - i0, 0.0, 1.0)
    return i0, frac


def _corners(i_s, f_s, i_q, f_q):
    """The four table corners around each point and their bilinear weights."""
    return [
        (i_s + ds, i_q + dq, (f_s if ds else 1.0 - f_s) * (f_q if dq else 1.0 - f_q))
        for ds in (0, 1)
        for dq in (0, 1)
    ]


def _flat_corners(i_s, f_s, i_q, f_q, n_q, n_t):
    """Flat offsets into a (s, q, sample) table of the four corners, and their weights."""
    return [((ii * n_q + qi) * n_t, wgt) for ii, qi, wgt in _corners(i_s, f_s, i_q, f_q)]


def _blend(flat, corners, k):
    out = corners[0][1] * flat[corners[0][0] + k]
    for base, wgt in corners[1:]:
        out = out + wgt * flat[base + k]
    return out


def _lookup_low(tab, part, theta, i_s, f_s, lq, *, valley):
    """Damped rings (Q ≤ 3): linear in θ."""
    pick = 2 if valley else 0
    xa, wa = part.low[pick], part.low[pick + 1]
    n_q, n_t = xa.shape[1], xa.shape[2]
    i_q, f_q = _weights(lq, tab.log_q_low[0], tab.log_q_low[1] - tab.log_q_low[0], n_q)
    i_t, f_t = _weights(theta, 0.0, tab.step, n_t)
    corners = _flat_corners(i_s, f_s, i_q, f_q, n_q, n_t)
    xf, wf = xa.ravel(), wa.ravel()
    g_t = np.where(i_t == 0, f_t * f_t, f_t)  # the charge leaves its rest ∝ t²
    x = (1.0 - g_t) * _blend(xf, corners, i_t) + g_t * _blend(xf, corners, i_t + 1)
    w = (1.0 - f_t) * _blend(wf, corners, i_t) + f_t * _blend(wf, corners, i_t + 1)
    # past 24 periods a damped ring (Q ≤ 3) has settled: e^(−24π/3) ≈ 1e-11
    return np.where(theta > tab.step * (n_t - 1), 0.0, x), w


def _lookup_high(tab, part, theta, i_s, f_s, lq, qq, *, valley):
    """Lightly damped rings: in their own phase, the phase reached at θ found by bisection."""
    pick = 2 if valley else 0
    xa, wa = part.high[pick], part.high[pick + 1]
    n_q, n_t = xa.shape[1], xa.shape[2]
    i_q, f_q = _weights(lq, tab.log_q_high[0], tab.log_q_high[1] - tab.log_q_high[0], n_q)
    corners = _flat_corners(i_s, f_s, i_q, f_q, n_q, n_t)
    tf, xf, wf = part.theta.ravel(), xa.ravel(), wa.ravel()
    lo = np.zeros(np.shape(theta), dtype=np.intp)
    hi = np.full(np.shape(theta), n_t - 1, dtype=np.intp)
    th_end = _blend(tf, corners, hi)
    for _ in range(int(np.ceil(np.log2(n_t)))):
        mid = (lo + hi) // 2
        below = _blend(tf, corners, mid) <= theta
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    hi = np.minimum(lo + 1, n_t - 1)
    th_lo, th_hi = _blend(tf, corners, lo), _blend(tf, corners, hi)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.clip(np.where(th_hi > th_lo, (theta - th_lo) / (th_hi - th_lo), 0.0), 0, 1)
    g = np.where(lo == 0, frac * frac, frac)  # the charge leaves its rest ∝ t²
    x = (1.0 - g) * _blend(xf, corners, lo) + g * _blend(xf, corners, hi)
    w = (1.0 - frac) * _blend(wf, corners, lo) + frac * _blend(wf, corners, hi)
    # past the table: the last cycle repeats, decaying at the small-signal rate
    beyond = theta > th_end
    if np.any(beyond):
        per = TABLE_STEPS_PER_PERIOD
        k0 = n_t - 1 - per
        th_k0 = _blend(tf, corners, k0)
        with np.errstate(invalid="ignore", divide="ignore"):
            cyc = np.where(th_end > th_k0, th_end - th_k0, 2.0 * np.pi)
            d_theta = np.where(beyond, theta - th_end, 0.0)
            pos = np.mod(d_theta, cyc) / cyc * per
        kk = np.minimum(k0 + np.floor(pos).astype(np.intp), n_t - 2)
        fk = pos - np.floor(pos)
        if valley:
            x_rep = np.min(np.stack([_blend(xf, corners, k) for k in range(k0, n_t)], axis=-1),
                           axis=-1)
        else:
            x_rep = (1.0 - fk) * _blend(xf, corners, kk) + fk * _blend(xf, corners, kk + 1)
        x_rep = x_rep * np.exp(-d_theta / (2.0 * qq))
        left_end = _blend(part.left.ravel(), [(b // n_t, wgt) for b, wgt in corners], 0)
        w_rep = _blend(wf, corners, n_t - 1) + left_end * (1.0 - np.exp(-d_theta / qq))
        x = np.where(beyond, x_rep, x)
        w = np.where(beyond, w_rep, w)
    return x, w


def _lookup(tab: RingTable, part: RingPart, theta, i_s, f_s, lq, qq, *, valley):
    """Relative deviation and dissipation of one tabulated ring at θ (flat arrays)."""
    x = np.zeros(np.shape(theta))
    w = np.zeros(np.shape(theta))
    damped = qq <= Q_SPLIT
    for sel, low in ((np.flatnonzero(damped), True), (np.flatnonzero(~damped), False)):
        if sel.size == 0:
            continue
        if low:
            xs, ws = _lookup_low(tab, part, theta[sel], i_s[sel], f_s[sel], lq[sel],
                                 valley=valley)
        else:
            xs, ws = _lookup_high(tab, part, theta[sel], i_s[sel], f_s[sel], lq[sel], qq[sel],
                                  valley=valley)
        x[sel] = xs
        w[sel] = ws
    return x, w


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
    table: RingCache | None = None,
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
    table : RingCache, optional
        The table from :func:`ring_table` for this charge split; taken from it if
        omitted. [-]

    Returns
    -------
    v : ndarray
        Switch voltage, in [0, V_b]. [V]
    e_decay : ndarray
        Energy dissipated in R_ring since the start of the ring. [J]

    Notes
    -----
    Interpolated in the normalised table of :func:`ring_table`, bilinear in arcsin √s and
    log Q; for Q ≤ 3 linear in θ = ω0·t, above it in the ring's own phase (the phase whose
    blended time equals θ is found by bisection). Where the first descent reaches 0 V
    (blended energy margin above zero) the body diode holds the node there while the current
    returns to zero, j(θ) = s/r + (j_c − s/r)·e^(−√c·r·(θ − θ_c)) in closed form, with its
    dissipation ∫√c·r·j² dθ; the energy the current returns to the source meanwhile is no
    loss. Then the ring from 0 V at rest follows. s is held within [0.004, 0.996] and Q
    within [0.3, 1000]. Past the table (24 small-signal periods, or 24 cycles of the ring)
    the last tabulated cycle repeats at its last rate with its deviation from V_set decaying
    as e^(−Δθ/2Q) and the energy left as e^(−Δθ/Q) (the small-signal decay); the last valley
    there is the lowest point of that cycle, decayed likewise. With no node charge the node
    sits at V_set and dissipates nothing.

    Accuracy, against an integration by scipy's ``solve_ivp`` with the clamps as events
    (tests/losses/test_ring.py): within 1 % of the amplitude V_b − V_set, typically 0.5 %,
    over settled values and Q of the table. The exception is a lightly damped ring whose
    first descent only just reaches 0 V (V_set near 0.4·V_b at Q above ~30): it lingers at
    the bottom for a time that changes steeply with V_set, and after several cycles the
    interpolated phase can be off by up to ~6 % of the amplitude.

    References
    ----------
    .. [1] L. Huber, B. T. Irving, M. M. Jovanović, IEEE Trans. Power Electron. 24(2), 2009
       (DCM ring, valleys); any circuit-theory text for the series RLC step response as the
       linear limit, v = V_set + A·e^(−σt)·[cos ω_d t + (σ/ω_d) sin ω_d t]
       (REFERENCES.md §13.1); SPEC §2.3.
    """
    a_tot = float(a_self) + float(a_opp)
    t, v_set, v_block, q, l = np.broadcast_arrays(_f(t), _f(v_set), _f(v_block), _f(q), _f(l))
    shape = np.shape(t)
    if a_tot <= 0.0:
        return np.clip(v_set, 0.0, v_block).copy(), np.zeros(shape)
    t, v_set, v_block, q, l = (np.ravel(a) for a in (t, v_set, v_block, q, l))
    cache = table if table is not None else ring_table(float(a_self) / a_tot)
    rho = cache.share_self
    with np.errstate(invalid="ignore", divide="ignore"):
        s_raw = v_set / v_block
        ok = np.isfinite(s_raw) & (v_block > 0.0) & np.isfinite(t) & np.isfinite(q) & (q > 0)
        s = np.clip(np.where(ok, s_raw, 0.5), *_S_RANGE)
        c = _c_norm(s, rho)
        t0 = np.sqrt(l * a_tot / np.sqrt(np.where(ok, v_block, 1.0)))
        theta = np.where(ok, np.maximum(t, 0.0), 0.0) / (t0 * np.sqrt(c))
        qq = np.clip(np.where(ok, q, 1.0), TABLE_Q_LOW[0], TABLE_Q_HIGH[1])
    phi = np.arcsin(np.sqrt(s))
    nodes = _phi_nodes()
    i_s, f_s = _weights(phi, nodes[0], nodes[1] - nodes[0], nodes.size)
    if i_s.size == 0:
        return np.full(shape, np.nan), np.full(shape, np.nan)
    tab = _block(cache, valleys=valley)
    lq = np.log(qq)
    u_top = ring_energy(1.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    u_bot = ring_energy(0.0, v_set=s, v_block=1.0, a_self=rho, a_opp=1.0 - rho)
    # does the first descent reach 0 V? blended over the corners of both Q grids
    i_ql, f_ql = _weights(lq, tab.log_q_low[0], tab.log_q_low[1] - tab.log_q_low[0],
                          tab.log_q_low.size)
    i_qh, f_qh = _weights(lq, tab.log_q_high[0], tab.log_q_high[1] - tab.log_q_high[0],
                          tab.log_q_high.size)
    damped = qq <= Q_SPLIT
    n_lo = tab.log_q_low.size
    i_qc = np.where(damped, i_ql, i_qh + n_lo)
    f_qc = np.where(damped, f_ql, f_qh)
    corners = _corners(i_s, f_s, i_qc, f_qc)
    margin = sum(wgt * tab.margin[ii, qi] for ii, qi, wgt in corners)
    clamped = margin > 0.0
    # when it reaches 0 V: blended over the corners that clamp
    wsum = sum(wgt * (tab.margin[ii, qi] > 0) for ii, qi, wgt in corners)
    with np.errstate(invalid="ignore", divide="ignore"):
        theta_c = sum(np.where(tab.margin[ii, qi] > 0, wgt * tab.theta_c[ii, qi], 0.0)
                      for ii, qi, wgt in corners) / wsum
        w_c = sum(np.where(tab.margin[ii, qi] > 0, wgt * tab.w_c[ii, qi], 0.0)
                  for ii, qi, wgt in corners) / wsum
    theta_c = np.where(clamped & np.isfinite(theta_c), theta_c, np.inf)
    # the clamp at 0 V, closed form
    sc = np.sqrt(c)
    r = 1.0 / (qq * sc)
    j_c = -np.sqrt(2.0 * np.maximum(margin, 0.0) * u_top)
    b = s / r
    d = j_c - b
    a = sc * r
    span = np.log1p(-r * j_c / s) / a
    in_clamp = clamped & (theta >= theta_c)
    tau = np.clip(np.where(in_clamp, theta - theta_c, 0.0), 0.0, span)
    w_clamp = sc * r * (b * b * tau + 2.0 * b * d * (-np.expm1(-a * tau)) / a
                        + d * d * (-np.expm1(-2.0 * a * tau)) / (2.0 * a))
    after = in_clamp & (theta - theta_c > span)
    # the two rings from rest
    x_top = np.zeros(np.shape(theta))
    w_top = np.zeros(np.shape(theta))
    sel = np.flatnonzero(~in_clamp)
    if sel.size:
        x_top[sel], w_top[sel] = _lookup(tab, tab.top, theta[sel], i_s[sel], f_s[sel], lq[sel],
                                         qq[sel], valley=valley)
    x_bot = np.zeros(np.shape(theta))
    w_bot = np.zeros(np.shape(theta))
    sel = np.flatnonzero(after)
    if sel.size:
        x_bot[sel], w_bot[sel] = _lookup(
            tab, tab.bottom, theta[sel] - theta_c[sel] - span[sel], i_s[sel], f_s[sel],
            lq[sel], qq[sel], valley=valley,
        )
    y_s = _y_of_x(s, rho)
    x_top = _x_of_y(y_s + x_top * (rho - y_s), rho)
    x_bot = _x_of_y(y_s + x_bot * (-(1.0 - rho) - y_s), rho)
    dev = np.where(after, x_bot - s, np.where(in_clamp, -s, x_top - s))
    w = np.where(
        in_clamp,
        w_c * u_top + w_clamp + np.where(after, w_bot * u_bot, 0.0),
        w_top * u_top,
    )
    if valley:
        # a turn-on at the clamp window or after it: the last valley is at least 0 V there
        w = np.where(in_clamp & ~after, w_c * u_top + w_clamp, w)
        dev = np.where(in_clamp & ~after, -s, dev)
    x = np.clip(s + dev, 0.0, 1.0)
    # at zero time the ring has not left the blocking voltage: exactly the hard edge
    start = theta <= 0.0
    v = np.where(ok, np.where(start, v_block, x * v_block), np.nan)
    e = np.where(ok, np.where(start, 0.0, w) * a_tot * np.where(ok, v_block, np.nan) ** 1.5,
                 np.nan)
    return v.reshape(shape), e.reshape(shape)
