"""Who dissipates what at a switching edge: the main switch's turn-on after a DCM idle ring.

Pure functions (arrays in, arrays out, no design objects), called by the solver with the
parts' node-charge coefficients and the stage's waveform values. In discontinuous conduction
the switch node rings about its settled value through the idle interval
(:mod:`lossbudget.losses.ring_trajectory`); at the next turn-on the switch takes the node's
remaining charge (``coss``, a partial swing from the ring's voltage) and the ring's decay is
charged to the inductor (``ring``). Continuous-conduction points turn on hard from the full
edge voltage, which is the ring's value at zero idle time, so the two agree at the boundary.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from lossbudget.losses import mosfet as mos
from lossbudget.losses import ring as rng
from lossbudget.losses import ring_trajectory as rtr

AVERAGED_SAMPLES = 16  # phase samples over one ring period (dcm_turn_on = "averaged")


def dcm_turn_on_energies(
    v: ArrayLike,
    *,
    fsw: ArrayLike,
    dcm: ArrayLike,
    v_block: ArrayLike,
    v_set: ArrayLike,
    duty: ArrayLike,
    d2: ArrayLike,
    q: ArrayLike,
    l: ArrayLike,
    a_self: ArrayLike,
    a_opp: ArrayLike,
    ae_self: ArrayLike | None = None,
    ae_opp: ArrayLike | None = None,
    mode: str = "ring",
) -> dict[str, np.ndarray]:
    """Switch's node-charge energy at turn-on and the idle ring's decay.

    Parameters
    ----------
    v : array_like
        Edge voltage, the ideal blocking voltage at the switch's turn-on. [V]
    fsw : array_like
        Switching frequency. [Hz]
    dcm : array_like of bool
        Points in discontinuous conduction (an idle interval ends the period). [-]
    v_block : array_like
        Switch voltage at the start of the idle interval (the blocking voltage). [V]
    v_set : array_like
        Settled value the node rings about (Vin boost and buck-boost, Vin − Vout buck). [V]
    duty : array_like
        Main switch's on-time fraction. [-]
    d2 : array_like
        Rectifier's conduction fraction in DCM. [-]
    q : array_like
        Quality factor of the ring at its small-signal frequency at ``v_set``. [-]
    l : array_like
        Stage inductance (per bank). [H]
    a_self, a_opp : array_like
        Charge coefficients of the switch and of the opposite device on the C ∝ v^-1/2 law,
        Q = a·√V; one per point where design variants differ. [C/V^0.5]
    ae_self, ae_opp : array_like, optional
        Energy-equivalent coefficients where an ``eoss`` figure is given. [C/V^0.5]
    mode : {"ring", "valley", "averaged"}
        Turn-on at the ring's voltage at the end of the idle interval, at the last valley
        reached within it, or the mean over the last small-signal ring period. [-]

    Returns
    -------
    dict
        ``e_coss`` (the switch's node-charge energy at turn-on) and ``e_decay`` (the energy
        dissipated by the ring over the idle interval), each per cycle. [J]

    Notes
    -----
    t_idle = (1 − D − D2)/fsw and v_on = v_sw(t_idle) from the ring's table; the switch's
    coss is the partial-swing charge balance from v_on (SPEC §2.3), so at t_idle → 0 it is
    the hard turn-on value. One ring table serves each charge split ρ = a_self/(a_self +
    a_opp); where design variants bring several pairs of charges, each pair's points are
    evaluated together (a loop over the few distinct pairs, never over points).

    References
    ----------
    .. [1] L. Huber, B. T. Irving, M. M. Jovanović, "Effect of valley switching and
       switching-frequency limitation on line-current distortions of DCM/CCM boundary boost
       PFC converters", IEEE Trans. Power Electron. 24(2), 2009 (the DCM node ring and its
       valleys); any circuit-theory text for the series RLC ring (REFERENCES.md §13.1).
    """
    v = np.asarray(v, dtype=float)
    dcm = np.broadcast_to(dcm, np.shape(v))
    # CCM points turn on hard from the full edge voltage: the ring's value at zero idle time
    e_coss = mos.hard_turn_on_coss_energy(v, a_self=a_self, a_opp=a_opp, ae_self=ae_self,
                                          ae_opp=ae_opp)
    e_decay = np.zeros(np.shape(v))
    sel = np.flatnonzero(dcm.ravel())
    if sel.size == 0:
        return {"e_coss": e_coss, "e_decay": e_decay}

    def at(x):
        return np.broadcast_to(x, np.shape(v)).ravel()[sel]

    v_b, v_s, q_s, v_e = at(v_block), at(v_set), at(q), at(v)
    t_idle = np.maximum(1.0 - at(duty) - at(d2), 0.0) / at(fsw)
    a_s, a_o, l_s, ae_s, ae_o = a_self, a_opp, l, ae_self, ae_opp
    if any(np.ndim(x) for x in (a_s, a_o, l_s, ae_s, ae_o) if x is not None):
        # design variants: each point's own charges and inductance
        a_s, a_o, l_s = at(a_s), at(a_o), at(l_s)
        ae_s = None if ae_s is None else at(ae_s)
        ae_o = None if ae_o is None else at(ae_o)
    share = a_s / (a_s + a_o)
    if mode == "averaged":
        # the mean over the last small-signal ring period of the idle interval
        with np.errstate(invalid="ignore", divide="ignore"):
            w0 = rng.ring_frequency_small_signal(v_set=v_s, v_block=v_b, l=l_s, a_self=a_s,
                                                 a_opp=a_o)
        lo = np.maximum(t_idle - 2.0 * np.pi / w0, 0.0)
        frac = (np.arange(AVERAGED_SAMPLES) + 0.5) / AVERAGED_SAMPLES
        t = lo[:, None] + (t_idle - lo)[:, None] * frac

        def col(x):
            return x[:, None] if np.ndim(x) else x

        v_s, v_b, q_s, v_e = (x[:, None] for x in (v_s, v_b, q_s, v_e))
        a_s, a_o, l_s, share = col(a_s), col(a_o), col(l_s), col(share)
        ae_s = None if ae_s is None else col(ae_s)
        ae_o = None if ae_o is None else col(ae_o)
    else:
        t = t_idle
    if np.ndim(share) == 0:
        v_on, dec = rtr.ring_state(
            t, v_set=v_s, v_block=v_b, l=l_s, a_self=a_s, a_opp=a_o, q=q_s,
            valley=mode == "valley", table=rtr.ring_table(share),
        )
    else:
        # one table per charge split, one call per pair of node charges: a loop over the few
        # distinct switch and rectifier pairs of the variants, each on its points at once
        v_on = np.empty(np.shape(t))
        dec = np.empty(np.shape(t))
        pair = np.stack([np.broadcast_to(a_s, np.shape(t)).ravel(),
                         np.broadcast_to(a_o, np.shape(t)).ravel()], axis=1)
        pairs, which = np.unique(pair, axis=0, return_inverse=True)
        which = np.asarray(which).reshape(np.shape(t))
        full = {k: np.broadcast_to(x, np.shape(t)) for k, x in
                (("v_set", v_s), ("v_block", v_b), ("l", l_s), ("q", q_s))}
        for j, (p_self, p_opp) in enumerate(pairs):
            k = which == j
            v_on[k], dec[k] = rtr.ring_state(
                t[k], **{name: x[k] for name, x in full.items()}, a_self=float(p_self),
                a_opp=float(p_opp), valley=mode == "valley",
                table=rtr.ring_table(float(p_self / (p_self + p_opp))),
            )
    on = mos.partial_swing_coss_energy(
        v_e, v_residual=v_on, a_self=a_s, a_opp=a_o, ae_self=ae_s, ae_opp=ae_o
    )
    if mode == "averaged":
        on, dec = on.mean(axis=-1), dec.mean(axis=-1)
    e_coss = np.array(e_coss, dtype=float).reshape(-1)
    e_coss[sel] = on
    e_decay = e_decay.reshape(-1)
    e_decay[sel] = dec
    return {"e_coss": e_coss.reshape(np.shape(v)), "e_decay": e_decay.reshape(np.shape(v))}
