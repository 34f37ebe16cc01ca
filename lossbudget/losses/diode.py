"""Loss models of a power diode: forward conduction, leakage, temperature laws.

Pure functions of the ``losses/`` layer: arrays in, arrays out, no design objects and no I/O.
They cover the forward loss Vf0·I_avg + Rd·I_rms², the reverse leakage over the blocking
intervals and the linear temperature law of Vf0, Rd and a body diode's vsd (SPEC §2.2, §2.6;
REFERENCES §6). The diode's junction charge follows the same C ∝ v^−½ node law as a MOSFET's
output charge and is computed by :mod:`lossbudget.losses.mosfet`; its reverse-recovery share is
there too. Every function broadcasts with numpy's rules; temperatures are absolute, in degC.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "forward_loss",
    "leakage_current",
    "leakage_loss",
    "linear_in_temperature",
]


def _line_through_points(x, *, xp, fp, slope_single):
    """Piecewise-linear curve through (xp, fp), its end segments extended.

    Shared by :func:`linear_in_temperature` and ``mosfet.rds_on_at`` (which applies it in
    log-log coordinates). One point gives the line of slope ``slope_single`` through it. The
    points are design data, validated here once; ``x`` broadcasts. The points lie along the
    last axis; a leading axis of ``xp`` or ``fp`` (one table per operating point, for points
    of different design variants) broadcasts with ``x``.
    """
    xp = np.asarray(xp, dtype=float)
    fp = np.asarray(fp, dtype=float)
    if (
        xp.ndim not in (1, 2)
        or fp.ndim not in (1, 2)
        or xp.shape[-1] == 0
        or fp.shape[-1] != xp.shape[-1]
    ):
        raise ValueError(
            f"expected two 1-D sequences of equal, non-zero length, got shapes "
            f"{xp.shape} and {fp.shape}"
        )
    if not (np.all(np.isfinite(xp)) and np.all(np.isfinite(fp))):
        raise ValueError("the points must be finite")
    if np.any(np.diff(xp, axis=-1) <= 0.0):
        raise ValueError(f"the points must be strictly increasing, got {xp.tolist()}")
    x = np.asarray(x, dtype=float)
    if xp.shape[-1] == 1:
        return fp[..., 0] + slope_single * (x - xp[..., 0])
    slopes = np.diff(fp, axis=-1) / np.diff(xp, axis=-1)
    if xp.ndim == 1 and fp.ndim == 1:
        k = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, xp.size - 2)
        return fp[k] + slopes[k] * (x - xp[k])
    # one table per point: the same segment rule, the index counted along the points axis
    k = np.clip(np.sum(x[..., np.newaxis] >= xp, axis=-1) - 1, 0, xp.shape[-1] - 2)
    k = k[..., np.newaxis]

    def at(table):
        return np.take_along_axis(np.broadcast_to(table, (*k.shape[:-1], table.shape[-1])), k,
                                  axis=-1)[..., 0]

    return at(fp) + at(slopes) * (x - at(xp))


def linear_in_temperature(
    t: ArrayLike, *, t_points: ArrayLike, values: ArrayLike, floor: float = 0.0
) -> np.ndarray:
    """Parameter linear in temperature through its datasheet points.

    Parameters
    ----------
    t : array_like
        Junction temperature at which the parameter is wanted. [degC]
    t_points : sequence of float
        Temperatures of the datasheet points, strictly increasing (1-D). [degC]
    values : sequence of float
        The parameter at ``t_points`` (same length), in its own unit: volts for Vf0 and vsd,
        ohms for Rd. [V or ohm]
    floor : float, optional
        Lowest value returned; the linear law is clipped there. Zero by default (a threshold
        voltage or a slope resistance never turns negative); ``-numpy.inf`` disables the
        clip. [V or ohm]

    Returns
    -------
    ndarray
        The parameter at ``t``, in the unit of ``values``, shape of ``t``. [V or ohm]

    Raises
    ------
    ValueError
        Where the points are empty, of unequal length, not finite or not strictly increasing.

    Notes
    -----
    Between two adjacent points p(T) = p_k + (p_{k+1} − p_k)·(T − T_k)/(T_{k+1} − T_k);
    below the first point and above the last the first and last segments are extended
    linearly; the result is max(p(T), floor). A single point is constant at every
    temperature. Linear extrapolation far beyond the points is a guess: the solver flags
    it for Rds(on); Vf0's slope turns from negative to positive at high current in many
    parts, so give points at the working current where it matters (REFERENCES §6).

    References
    ----------
    .. [1] Common practice: a linear temperature coefficient of the diode's forward voltage
       (about −2 mV/K at low current), REFERENCES.md §6; physical basis in S. M. Sze,
       K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007 ([SZE]),
       temperature dependence of the diode law. The clip at zero and the piecewise form
       through several points follow SPEC §2.6.
    """
    value = _line_through_points(t, xp=t_points, fp=values, slope_single=0.0)
    return np.maximum(value, floor)


def forward_loss(
    vf0: ArrayLike, rd: ArrayLike, *, i_avg: ArrayLike, i_rms: ArrayLike
) -> np.ndarray:
    """Forward conduction loss of a diode, threshold plus slope model.

    Parameters
    ----------
    vf0 : array_like
        Threshold voltage of the piecewise-linear forward characteristic at the junction
        temperature. [V]
    rd : array_like
        Slope (differential) resistance at the junction temperature. [ohm]
    i_avg : array_like
        Average forward current over the switching period. [A]
    i_rms : array_like
        RMS forward current over the switching period. [A]

    Returns
    -------
    ndarray
        Average forward loss. [W]

    Notes
    -----
    P_F = Vf0·I_avg + Rd·I_rms², exact for the characteristic v_F = Vf0 + Rd·i_F while the
    diode conducts (i_F ≥ 0); the averages are over the whole period, so the blocking
    intervals contribute nothing. Valid where the linear fit of the forward curve holds over
    the current range of the waveform.

    References
    ----------
    .. [1] REFERENCES.md §6, forward loss: common practice; the threshold-voltage and
       slope-resistance pair is standardised for rectifier diodes (IEC 60747-2, from
       memory — verify).
    """
    vf0 = np.asarray(vf0, dtype=float)
    rd = np.asarray(rd, dtype=float)
    i_rms = np.asarray(i_rms, dtype=float)
    return vf0 * np.asarray(i_avg, dtype=float) + rd * i_rms * i_rms


def leakage_current(
    t_j: ArrayLike,
    v: ArrayLike,
    *,
    i_ref: ArrayLike,
    t_ref: ArrayLike,
    v_ref: ArrayLike,
    doubling: ArrayLike,
) -> np.ndarray:
    """Reverse leakage current, doubling every ``doubling`` kelvin.

    Parameters
    ----------
    t_j : array_like
        Junction temperature. [degC]
    v : array_like
        Reverse (blocking) voltage; a negative value is taken as zero. [V]
    i_ref : array_like
        Leakage current given at ``t_ref`` and ``v_ref``. [A]
    t_ref : array_like
        Temperature at which ``i_ref`` is given. [degC]
    v_ref : array_like
        Reverse voltage at which ``i_ref`` is given; positive. [V]
    doubling : array_like
        Temperature rise over which the leakage doubles; positive. [K]

    Returns
    -------
    ndarray
        Leakage current at ``t_j`` and ``v``. [A]

    Notes
    -----
    I_R(T, V) = I_ref·2^((T − T_ref)/doubling)·(V/V_ref). The exponential temperature law is
    a fit of a Schottky barrier's thermionic leakage over a limited range; the linear voltage
    law ignores the barrier lowering that makes Schottky leakage rise faster than linearly
    near the rating. Good to a factor of about two within the datasheet's range.

    References
    ----------
    .. [1] REFERENCES.md §6, Schottky leakage: I_R roughly doubles every ~10 K (common
       practice); SPEC §2.6. The linear voltage scaling is common practice (no single
       published source).
    """
    t_j = np.asarray(t_j, dtype=float)
    v = np.maximum(np.asarray(v, dtype=float), 0.0)
    i_ref = np.asarray(i_ref, dtype=float)
    return i_ref * np.exp2((t_j - t_ref) / np.asarray(doubling, dtype=float)) * (v / v_ref)


def leakage_loss(
    t_j: ArrayLike,
    *,
    v_blocking: ArrayLike,
    fractions: ArrayLike,
    i_ref: ArrayLike,
    t_ref: ArrayLike,
    v_ref: ArrayLike,
    doubling: ArrayLike,
) -> np.ndarray:
    """Average leakage loss over the intervals in which the diode blocks.

    Parameters
    ----------
    t_j : array_like
        Junction temperature; broadcasts against ``v_blocking[..., 0]``. [degC]
    v_blocking : array_like
        Reverse voltage of each blocking interval along the LAST axis: ``v_blocking[..., k]``
        is held for ``fractions[..., k]`` of the period (in DCM the idle interval blocks a
        different voltage from the switch's on-interval). [V]
    fractions : array_like
        Fraction of the switching period spent in each blocking interval, same last axis as
        ``v_blocking`` (broadcasts against it). [-]
    i_ref : array_like
        Leakage current given at ``t_ref`` and ``v_ref``; broadcasts like ``t_j``. [A]
    t_ref : array_like
        Temperature at which ``i_ref`` is given; broadcasts like ``t_j``. [degC]
    v_ref : array_like
        Reverse voltage at which ``i_ref`` is given; broadcasts like ``t_j``. [V]
    doubling : array_like
        Temperature rise over which the leakage doubles; broadcasts like ``t_j``. [K]

    Returns
    -------
    ndarray
        Average leakage loss, shape of the broadcast operating points (the interval axis
        summed away). [W]

    Notes
    -----
    P_R = Σ_k I_R(T_j, V_k)·V_k·d_k with I_R from :func:`leakage_current`. The junction
    temperature is taken constant over the period (the thermal time constant is far longer
    than the period). Leakage rises with temperature and loss heats the junction: the
    coupled solve must watch for thermal runaway (REFERENCES §9.6).

    References
    ----------
    .. [1] REFERENCES.md §6, Schottky leakage: P_R = V_R·I_R(T_j)·(1 − D_F), common
       practice; here generalised to several blocking intervals at different voltages
       (SPEC §2.6).
    """

    def per_point(a):
        return np.asarray(a, dtype=float)[..., np.newaxis]

    v_blocking = np.asarray(v_blocking, dtype=float)
    i_r = leakage_current(
        per_point(t_j),
        v_blocking,
        i_ref=per_point(i_ref),
        t_ref=per_point(t_ref),
        v_ref=per_point(v_ref),
        doubling=per_point(doubling),
    )
    return np.sum(i_r * np.maximum(v_blocking, 0.0) * np.asarray(fractions, dtype=float), axis=-1)
