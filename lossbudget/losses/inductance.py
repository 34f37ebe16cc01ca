"""Inductance that falls with current: a swinging or powder-core choke.

Pure functions over operating points. The design gives the inductance as points over the
current (``l = [{ l = "22 uH", at_i = "0 A" }, { l = "15 uH", at_i = "14 A" }]``), read as the
incremental inductance dλ/di at a DC bias, as an LCR meter with a bias supply measures it.
The stage takes the inductance at its mean current (the bias the ripple rides on), so the
ripple obeys Faraday's law with it; the peak flux integrates the curve up to the peak current.
"""

from __future__ import annotations

import numpy as np


def inductance_at_current(i, *, points_i, points_l):
    """Incremental inductance at a bias current, through the datasheet points.

    Parameters
    ----------
    i : array_like
        Bias current per part (its magnitude is used). [A]
    points_i : sequence of float
        Currents of the points, ascending. [A]
    points_l : sequence of float
        Inductance at those currents. [H]

    Returns
    -------
    ndarray
        Inductance, linear between the points and held at the end values outside them. [H]

    Notes
    -----
    L(I) = dλ/di at the bias I. Holding the last value beyond the highest point claims no
    further fall: the saturation check against ``i_sat`` is where the part is judged there.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 13 (basic magnetics: inductance from the flux linkage, the B-H loop and
       saturation); the interpolation is common practice.
    """
    return np.interp(np.abs(np.asarray(i, dtype=float)), points_i, points_l)


def flux_linkage_at_current(i, *, points_i, points_l):
    """Flux linkage λ(i) = ∫₀^i L(i′) di′ of a current-dependent inductance.

    Parameters
    ----------
    i : array_like
        Current per part (odd symmetry for a negative current). [A]
    points_i : sequence of float
        Currents of the points, ascending. [A]
    points_l : sequence of float
        Incremental inductance at those currents. [H]

    Returns
    -------
    ndarray
        Flux linkage N·Φ. [Wb]

    Notes
    -----
    L(i) as :func:`inductance_at_current` (linear between the points, constant outside), so
    λ is piecewise quadratic: the trapezoid sums over the whole segments below |i| plus the
    part segment. B_pk = λ(i_pk)/(N·A_e). A constant L gives λ = L·i.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 13 (flux linkage λ = nΦ and Faraday's law v = dλ/dt).
    """
    i = np.asarray(i, dtype=float)
    x = np.abs(i)
    pi = np.asarray(points_i, dtype=float)
    pl = np.asarray(points_l, dtype=float)
    # below the first point the inductance is held at its first value
    lam = pl[0] * np.minimum(x, pi[0])
    for k in range(pi.size - 1):
        lo, hi = pi[k], pi[k + 1]
        top = np.clip(x, lo, hi)
        l_top = pl[k] + (pl[k + 1] - pl[k]) * (top - lo) / (hi - lo)
        lam = lam + 0.5 * (pl[k] + l_top) * (top - lo)
    lam = lam + pl[-1] * np.maximum(x - pi[-1], 0.0)
    return np.sign(i) * lam
