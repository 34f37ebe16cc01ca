"""Loss models of inductors: winding copper (DC, skin, proximity) and core (Steinmetz, iGSE).

Pure functions on numpy arrays: every argument broadcasts with numpy's rules and no design
object enters. The solver passes the design's winding and core fields in and receives the loss
densities and factors back. SI inside: ohm, m, Hz, T, W/m3; absolute temperatures in degC; flux
swing ``delta_b`` is peak-to-peak and ``b_pk`` is the peak. Where a model is undefined the result
is NaN, which the solver turns into a flagged operating point.

scipy is imported only inside the functions that need it, so importing this module stays fast.
"""

from __future__ import annotations

from math import factorial

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "ac_resistance_factor_dowell",
    "ac_resistance_factor_isolated_wire",
    "copper_ac_loss_dowell",
    "copper_resistance_at",
    "copper_resistivity_at",
    "core_loss_density_igse",
    "core_loss_density_igse_ccm",
    "core_loss_density_igse_dcm",
    "core_loss_density_steinmetz",
    "core_loss_temperature_factor",
    "dowell_delta_from_factor",
    "flux_density_swing",
    "foil_equivalent_delta",
    "igse_coefficient",
    "peak_flux_density",
    "skin_depth",
    "steinmetz_k_from_mw_cm3",
]

MU_0 = 4.0e-7 * np.pi
"""Magnetic constant, 4 pi 1e-7. [H/m]"""

COPPER_RESISTIVITY_20 = 1.0 / 58.0e6
"""Resistivity of annealed copper at 20 degC, 100 % IACS (IEC 60028). [ohm m]"""

COPPER_ALPHA_20 = 0.00393
"""Temperature coefficient of copper resistance referred to 20 degC (IEC 60028). [1/K]"""

_COPPER_T_ZERO = 234.45
"""Inferred zero-resistance temperature of the IEC 60028 law, 1/alpha20 - 20 (magnitude). [K]"""

# Dowell's factor: the series branch below is used for delta < 1, the exponential branch above.
# Both are exact rearrangements; the series is a ratio of two power series with positive terms
# (no cancellation), truncated where the next term is below 1e-30 at delta = 1.
_DOWELL_SPLIT = 1.0
_SERIES_TERMS = 9
# delta*M(delta) - 1 = sum_{k>=1} 4k y^k/(4k+2)! / sum_{k>=0} 2 y^k/(4k+2)!, y = 16 delta^4
# delta*D(delta) = 2 delta^4 sum_k z^k/(4k+3)! / sum_k z^k/(4k)!, z = delta^4
# The four series as rows of one matrix of coefficients of z^0 .. z^_SERIES_TERMS (16^k is a
# power of two, so y^k = 16^k z^k is exact), summed for all points by one matrix product.
_DOWELL_POLY = np.zeros((4, _SERIES_TERMS + 1))
for _k in range(_SERIES_TERMS):
    _DOWELL_POLY[0, _k] = 4.0 * _k / factorial(4 * _k + 2) * 16.0**_k
    _DOWELL_POLY[1, _k] = 2.0 / factorial(4 * _k + 2) * 16.0**_k
    _DOWELL_POLY[2, _k + 1] = 2.0 / factorial(4 * _k + 3)
    _DOWELL_POLY[3, _k] = 1.0 / factorial(4 * _k)
_DOWELL_POLY.setflags(write=False)
del _k

# Isolated wire: Kelvin functions overflow a double near q = 1000; above _KELVIN_LIMIT the
# Hankel asymptotic series (truncation error below 1e-12 relative there) takes over.
_KELVIN_LIMIT = 900.0
_KELVIN_SMALL = 1.0e-4

# Bisection on log(delta) in dowell_delta_from_factor.
_BISECTION_STEPS = 80
_DELTA_FLOOR = 1.0e-6


def copper_resistance_at(r_ref: ArrayLike, t: ArrayLike, *, t_ref: ArrayLike = 25.0) -> np.ndarray:
    """Resistance of a copper winding at a temperature (IEC 60028).

    Parameters
    ----------
    r_ref : array_like
        Resistance measured at the reference temperature. [ohm]
    t : array_like
        Winding temperature. [degC]
    t_ref : array_like, optional
        Temperature at which ``r_ref`` was measured, 25 degC by default. [degC]

    Returns
    -------
    ndarray
        Resistance at ``t``; NaN at or below -234.45 degC. [ohm]

    Notes
    -----
    R(T) = R_ref (234.45 + T) / (234.45 + T_ref). This is the IEC 60028 linear law
    R(T) = R20 [1 + alpha20 (T - 20)] with alpha20 = 0.00393 /K written from any reference
    temperature (1/alpha20 - 20 = 234.45); applying alpha20 unchanged to a value measured at
    25 degC would be 0.44 % off at 100 degC. Valid for annealed copper windings between about
    -50 and 250 degC; not for ESR, diode or sense resistances.

    References
    ----------
    .. [1] IEC 60028:1925, "International standard of resistance for copper" (the linear law
       with alpha20 = 0.00393 /K referred to 20 degC).
    """
    r_ref = np.asarray(r_ref, dtype=float)
    t = np.asarray(t, dtype=float)
    t_ref = np.asarray(t_ref, dtype=float)
    ok = (t > -_COPPER_T_ZERO) & (t_ref > -_COPPER_T_ZERO)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = r_ref * (_COPPER_T_ZERO + t) / (_COPPER_T_ZERO + t_ref)
    return np.where(ok, r, np.nan)


def copper_resistivity_at(t: ArrayLike, *, conductivity: ArrayLike = 1.0) -> np.ndarray:
    """Resistivity of copper at a temperature (IEC 60028).

    Parameters
    ----------
    t : array_like
        Conductor temperature. [degC]
    conductivity : array_like, optional
        Conductivity as a fraction of the International Annealed Copper Standard, 1.0 by
        default; commercial magnet wire is typically 0.98 to 1.01. [-]

    Returns
    -------
    ndarray
        Resistivity at ``t``; NaN where ``conductivity`` is not positive. [ohm m]

    Notes
    -----
    rho(T) = rho20 / conductivity * [1 + alpha20 (T - 20)], rho20 = 1/58 ohm mm2/m
    = 1.7241e-8 ohm m, alpha20 = 0.00393 /K. Linear law, valid for annealed copper between
    about -50 and 250 degC.

    References
    ----------
    .. [1] IEC 60028:1925, "International standard of resistance for copper" (rho20 = 1/58
       ohm mm2/m at 100 % IACS, alpha20 = 0.00393 /K).
    """
    t = np.asarray(t, dtype=float)
    conductivity = np.asarray(conductivity, dtype=float)
    ok = conductivity > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = COPPER_RESISTIVITY_20 / conductivity * (1.0 + COPPER_ALPHA_20 * (t - 20.0))
    return np.where(ok, rho, np.nan)


def skin_depth(f: ArrayLike, *, resistivity: ArrayLike, mu_r: ArrayLike = 1.0) -> np.ndarray:
    """Electromagnetic skin depth of a conductor.

    Parameters
    ----------
    f : array_like
        Frequency. [Hz]
    resistivity : array_like
        Conductor resistivity at its temperature. [ohm m]
    mu_r : array_like, optional
        Relative permeability of the conductor, 1 for copper. [-]

    Returns
    -------
    ndarray
        Skin depth; infinite at f = 0, NaN for a negative input. [m]

    Notes
    -----
    delta = sqrt(rho / (pi f mu0 mu_r)), mu0 = 4 pi 1e-7 H/m. Valid for a good conductor
    (conduction current >> displacement current, sigma >> omega epsilon), which holds for
    copper far beyond any switching frequency.

    References
    ----------
    .. [1] S. Ramo, J. R. Whinnery, T. Van Duzer, "Fields and Waves in Communication
       Electronics", 3rd ed., Wiley, 1994 (skin effect in a plane conductor; the classical
       depth of penetration).
    """
    f = np.asarray(f, dtype=float)
    resistivity = np.asarray(resistivity, dtype=float)
    mu_r = np.asarray(mu_r, dtype=float)
    ok = (f >= 0) & (resistivity >= 0) & (mu_r > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.sqrt(resistivity / (np.pi * f * MU_0 * mu_r))
    return np.where(ok, d, np.nan)


def _dowell_small(ds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Delta*M - 1 and Delta*D for 0 <= Delta < 1 (1-D array), from the power series."""
    z = ds * ds
    z *= z
    powers = np.empty((_SERIES_TERMS + 1, z.size))
    powers[0] = 1.0
    powers[1] = z
    for k in range(2, _SERIES_TERMS + 1):
        np.multiply(powers[k - 1], z, out=powers[k])
    num_m, den_m, num_d, den_d = _DOWELL_POLY @ powers
    return num_m / den_m, num_d / den_d


def _dowell_large(de: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Delta*M - 1 and Delta*D for finite Delta >= 1, divided through by exp.

    With e = exp(-Delta), T = tan(Delta) and U = tan(Delta/2), the half-angle identities
    (sin 2x = 2T/(1 + T^2), cos 2x = (1 - T^2)/(1 + T^2)) turn the printed ratios into
    M·Delta = Delta [(1 - e^4)(1 + T^2) + 4 e^2 T] / [(1 - e^2)^2 + T^2 (1 + e^2)^2] and
    D·Delta = 2 Delta [(1 - e^2)(1 + U^2) - 4 e U] / [(1 + e)^2 + U^2 (1 - e)^2]: no term
    overflows, the denominators are sums of squares, and the numerators cancel no more than
    the printed form.
    """
    with np.errstate(under="ignore"):  # exp(-delta) -> 0 is the intended limit
        e1 = np.exp(-de)
        e2 = e1 * e1
    one_m = 1.0 - e2
    one_p = 1.0 + e2
    t = np.tan(de)
    t2 = t * t
    m_ratio = (one_m * one_p) * (1.0 + t2) + 4.0 * (e2 * t)
    m_ratio /= one_m * one_m + t2 * (one_p * one_p)
    m_ratio *= de
    m_ratio -= 1.0
    u = np.tan(0.5 * de)
    u2 = u * u
    d_ratio = one_m * (1.0 + u2) - 4.0 * (e1 * u)
    a = 1.0 + e1
    b = 1.0 - e1
    d_ratio /= a * a + u2 * (b * b)
    d_ratio *= 2.0 * de
    return m_ratio, d_ratio


def _dowell_excess(delta: np.ndarray, layers: np.ndarray) -> np.ndarray:
    """Fr - 1 of Dowell's layer formula, free of cancellation and overflow.

    NaN where delta < 0 or layers < 1; infinite at delta = inf. Each branch is evaluated on
    its own points only.
    """
    delta = np.asarray(delta, dtype=float)
    layers = np.asarray(layers, dtype=float)
    shape = np.broadcast_shapes(delta.shape, layers.shape)
    layers_ok = (layers >= 1) & np.isfinite(layers)
    p = (layers * layers - 1.0) / 3.0
    branches = (
        (_dowell_small, (delta >= 0) & (delta < _DOWELL_SPLIT)),
        (_dowell_large, (delta >= _DOWELL_SPLIT) & (delta < np.inf)),
    )
    for branch, where in branches:
        if where.all():  # the usual case: every point in one branch
            m_part, d_part = branch(np.broadcast_to(delta, shape).ravel())
            with np.errstate(over="ignore"):
                excess = m_part.reshape(shape) + p * d_part.reshape(shape)
            return excess if layers_ok.all() else np.where(layers_ok, excess, np.nan)
    delta, layers_ok, p = (np.broadcast_to(x, shape) for x in (delta, layers_ok, p))
    excess = np.full(shape, np.nan)
    excess[np.isposinf(delta)] = np.inf
    for branch, where in branches:
        where = np.broadcast_to(where, shape)
        if where.any():
            m_part, d_part = branch(delta[where])
            with np.errstate(over="ignore"):
                excess[where] = m_part + p[where] * d_part
    return np.where(layers_ok, excess, np.nan)


def ac_resistance_factor_dowell(delta: ArrayLike, *, layers: ArrayLike) -> np.ndarray:
    """AC-to-DC resistance ratio of a layered winding (Dowell).

    Parameters
    ----------
    delta : array_like
        Layer thickness over the skin depth, h/delta, of the (equivalent) foil layer at the
        frequency considered; see :func:`foil_equivalent_delta` for round wire. [-]
    layers : array_like
        Number of layers m in one winding portion (from a zero of the magnetomotive force to
        its peak): all layers of a plain inductor; real numbers >= 1 are accepted. [-]

    Returns
    -------
    ndarray
        Fr = Rac/Rdc >= 1; NaN where ``delta`` < 0 or ``layers`` < 1. [-]

    Notes
    -----
    Fr = Delta [M(Delta) + (m^2 - 1)/3 D(Delta)] with
    M = (sinh 2Delta + sin 2Delta)/(cosh 2Delta - cos 2Delta) (skin effect of the layer) and
    D = 2 (sinh Delta - sin Delta)/(cosh Delta + cos Delta) (proximity effect of the others).
    Low frequency: Fr = 1 + (5 m^2 - 1) Delta^4/45 + O(Delta^8); high frequency:
    Fr -> Delta [1 + 2 (m^2 - 1)/3]. Evaluated without cancellation below Delta = 1 (exact
    ratio of power series with positive terms) and without overflow above (hyperbolic
    functions divided by exp(Delta)); accurate to rounding over 1e-4 <= Delta <= 1e3 and beyond.

    Assumptions of the one-dimensional model: the field is parallel to the layers and uniform
    along them, each layer spans the full breadth of the window (a round-wire layer is replaced
    by an equivalent foil), no fringing field from an air gap, sinusoidal current, and Rdc and
    the skin depth taken at the same temperature. It is poor near an air gap (the fringing field
    is two-dimensional and crosses the layers) and for single-layer toroid or drum-core windings,
    whose field is not that of a layer spanning a window; treat results there as indicative only.

    References
    ----------
    .. [1] P. L. Dowell, "Effects of eddy currents in transformer windings", Proc. IEE,
       vol. 113, no. 8, pp. 1387-1394, Aug. 1966 (the layer formula; written here in the
       usual rearrangement that folds the factor 2/3 into D).
    """
    return 1.0 + _dowell_excess(np.asarray(delta, dtype=float), np.asarray(layers, dtype=float))


def foil_equivalent_delta(
    wire_diameter: ArrayLike, *, skin_depth: ArrayLike, porosity: ArrayLike
) -> np.ndarray:
    """Dowell's Delta of a round-wire layer via the equivalent foil.

    Parameters
    ----------
    wire_diameter : array_like
        Bare copper diameter of the wire. [m]
    skin_depth : array_like
        Skin depth of the conductor at the frequency considered (:func:`skin_depth`). [m]
    porosity : array_like
        Layer porosity eta = N_l d / b, turns per layer times bare diameter over the layer
        breadth (d / pitch for evenly spaced turns), in (0, 1]. [-]

    Returns
    -------
    ndarray
        Delta = h/delta of the equivalent foil; NaN where ``porosity`` is outside (0, 1] or an
        input is negative. [-]

    Notes
    -----
    Delta = (pi/4)^(3/4) (d/delta) sqrt(eta), (pi/4)^(3/4) = 0.8342907. The round wire is
    replaced by a square conductor of equal area (side (sqrt(pi)/2) d), and the layer of squares
    by a foil of the same copper area and a conductivity reduced by the porosity. eta here is
    defined with the bare diameter d; authors who define it with the square's side use
    eta' = (pi/4)^(1/2) eta and the prefactor (pi/4)^(1/2), which gives the same Delta. Valid
    for layers of many turns filling the breadth; the 1-D assumptions of Dowell's formula apply.

    References
    ----------
    .. [1] P. L. Dowell, "Effects of eddy currents in transformer windings", Proc. IEE,
       vol. 113, no. 8, pp. 1387-1394, 1966 (square-conductor equivalence of round wire).
    .. [2] R. W. Erickson, D. Maksimovic, "Fundamentals of Power Electronics", 3rd ed.,
       Springer, 2020, magnetics chapter, section on eddy currents in winding conductors (this
       compact form; section number from memory — verify).
    """
    d = np.asarray(wire_diameter, dtype=float)
    sd = np.asarray(skin_depth, dtype=float)
    eta = np.asarray(porosity, dtype=float)
    ok = (d >= 0) & (sd > 0) & (eta > 0) & (eta <= 1)
    with np.errstate(divide="ignore", invalid="ignore"):
        delta = (np.pi / 4.0) ** 0.75 * (d / sd) * np.sqrt(eta)
    return np.where(ok, delta, np.nan)


def dowell_delta_from_factor(fr: ArrayLike, *, layers: ArrayLike) -> np.ndarray:
    """Back-solve Dowell's Delta from a known Rac/Rdc ratio.

    Parameters
    ----------
    fr : array_like
        Ratio Rac/Rdc at one frequency, for instance measured at the switching frequency. [-]
    layers : array_like
        Number of layers m in one winding portion, >= 1. [-]

    Returns
    -------
    ndarray
        Delta with Fr(Delta, m) = fr; 0 where fr = 1, infinite where fr is infinite, NaN where
        fr < 1 or layers < 1. [-]

    Notes
    -----
    Solves Delta [M(Delta) + (m^2 - 1)/3 D(Delta)] = fr (see
    :func:`ac_resistance_factor_dowell`) by bisection on log Delta over
    [1e-6, fr + 10], 80 halvings, which resolves Delta to a few units of the last place. Fr is
    strictly increasing in Delta for every m >= 1 (checked numerically in the tests), so the
    root is unique. The comparison uses Fr - 1 computed without cancellation, so Delta stays
    accurate as fr approaches 1; there a relative error e in fr - 1 gives e/4 in Delta.
    The harmonic method then takes Delta_n = Delta sqrt(n).

    References
    ----------
    .. [1] P. L. Dowell, "Effects of eddy currents in transformer windings", Proc. IEE,
       vol. 113, no. 8, pp. 1387-1394, 1966 (the layer formula that is inverted).
    """
    fr = np.asarray(fr, dtype=float)
    layers = np.asarray(layers, dtype=float)
    fr, layers = np.broadcast_arrays(fr, layers)
    valid = (fr >= 1.0) & (layers >= 1.0)
    finite = valid & np.isfinite(fr)
    target = np.where(finite, fr - 1.0, 1.0)
    m = np.where(finite, layers, 1.0)
    lo = np.full(fr.shape, np.log(_DELTA_FLOOR))
    hi = np.log(np.where(finite, fr, 1.0) + 10.0)
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        above = _dowell_excess(np.exp(mid), m) > target
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    delta = np.exp(0.5 * (lo + hi))
    delta = np.where(target == 0.0, 0.0, delta)
    delta = np.where(np.isposinf(fr), np.inf, delta)
    return np.where(valid, delta, np.nan)


def copper_ac_loss_dowell(
    rdc: ArrayLike, harmonic_rms: ArrayLike, *, delta1: ArrayLike, layers: ArrayLike
) -> np.ndarray:
    """Eddy-current winding loss of a ripple current, harmonic by harmonic.

    Parameters
    ----------
    rdc : array_like
        DC resistance of the winding at its temperature; broadcasts against the leading axes
        of ``harmonic_rms``. [ohm]
    harmonic_rms : array_like
        RMS current of harmonics n = 1..N of the winding current along the last axis, shape
        (..., N); the DC component is not part of it. [A]
    delta1 : array_like
        Dowell's Delta at the fundamental (switching) frequency; broadcasts against the
        leading axes of ``harmonic_rms``. [-]
    layers : array_like
        Number of layers m in one winding portion, >= 1; broadcasts like ``delta1``. [-]

    Returns
    -------
    ndarray
        Eddy part of the winding loss, shape of the leading axes broadcast together. [W]

    Notes
    -----
    P_ac = Rdc sum_n I_n^2 [Fr(Delta1 sqrt(n), m) - 1], the skin depth at harmonic n being
    delta1/sqrt(n). Only the excess over Rdc is counted: the DC resistance times the whole RMS
    current (DC and ripple) is the separate ``copper_dc`` loss, so the two never count the same
    loss; DC current causes no eddy loss in the 1-D model. Fr - 1 is evaluated without
    cancellation, so the result stays accurate when the eddy part is tiny. The assumptions and
    limits of Dowell's model apply (:func:`ac_resistance_factor_dowell`).

    References
    ----------
    .. [1] P. L. Dowell, "Effects of eddy currents in transformer windings", Proc. IEE,
       vol. 113, no. 8, pp. 1387-1394, 1966 (the layer formula, applied per harmonic).
    .. [2] W. G. Hurley, E. Gath, J. G. Breslin, "Optimizing the AC resistance of multilayer
       transformer windings with arbitrary current waveforms", IEEE Trans. Power Electron.,
       vol. 15, no. 2, pp. 369-376, 2000 (harmonic superposition for non-sinusoidal current).
    .. [3] M. E. Dale, C. R. Sullivan, "Comparison of single-layer and multi-layer windings
       with physical constraints or strong harmonics", IEEE ISIE 2006, pp. 1467-1473.
    """
    i_n = np.asarray(harmonic_rms, dtype=float)
    if i_n.ndim == 0:
        i_n = i_n[np.newaxis]
    delta1 = np.asarray(delta1, dtype=float)
    m = np.asarray(layers, dtype=float)
    total = np.zeros(np.broadcast_shapes(i_n.shape[:-1], delta1.shape, m.shape))
    # Harmonic by harmonic, so that each pass works on arrays the size of the leading axes.
    for n, i_h in enumerate(np.moveaxis(i_n, -1, 0).copy(), start=1):
        excess = _dowell_excess(delta1 * np.sqrt(float(n)), m)
        # A harmonic of zero amplitude adds nothing, whatever its factor (even an infinite one).
        with np.errstate(invalid="ignore"):
            total += np.where(i_h == 0.0, 0.0, i_h * i_h * excess)
    return np.asarray(rdc, dtype=float) * total


def ac_resistance_factor_isolated_wire(
    wire_diameter: ArrayLike, *, skin_depth: ArrayLike
) -> np.ndarray:
    """Skin-effect Rac/Rdc of one isolated straight round wire (Kelvin).

    Parameters
    ----------
    wire_diameter : array_like
        Bare diameter of the wire. [m]
    skin_depth : array_like
        Skin depth of the conductor at the frequency considered (:func:`skin_depth`). [m]

    Returns
    -------
    ndarray
        Rac/Rdc of the lone wire; 1 at zero diameter or infinite skin depth, NaN for a
        negative input. [-]

    Notes
    -----
    With q = d/(sqrt(2) delta) = sqrt(2) a/delta:
    Rac/Rdc = (q/2) [ber(q) bei'(q) - bei(q) ber'(q)] / [ber'(q)^2 + bei'(q)^2],
    the exact solution of the diffusion equation in a cylinder with return current at
    infinity. Limits: 1 + (a/delta)^4/48 at low frequency, a/(2 delta) + 1/4 at high frequency.
    The Kelvin functions are normalised by hypot(ber', bei') to avoid overflow; above q = 900,
    where they overflow a double, the Hankel asymptotic series
    a/(2 delta) + 1/4 + 3 delta/(32 a) is used (derived; the next term, -0.0615 (delta/a)^3,
    is below 1e-12 relative there). Accuracy 1e-12 relative except for 10 <= q <= 11.4, where
    scipy's Kelvin functions switch to their asymptotic expansion and the result is good to
    about 1.3e-9 (scipy/xsf issue #232). This is the skin effect of one wire alone; inside a
    winding the proximity effect dominates and Dowell's model applies instead
    (:func:`ac_resistance_factor_dowell`). The two geometries are not comparable beyond
    Fr -> 1.

    References
    ----------
    .. [1] S. Ramo, J. R. Whinnery, T. Van Duzer, "Fields and Waves in Communication
       Electronics", 3rd ed., Wiley, 1994, internal impedance of round wires (Bessel and
       Kelvin-function solution; section number not re-checked — verify).
    """
    from scipy.special import bei, beip, ber, berp

    d = np.asarray(wire_diameter, dtype=float)
    sd = np.asarray(skin_depth, dtype=float)
    ok = (d >= 0) & (sd > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.where(ok, d / (np.sqrt(2.0) * sd), 0.0)
    q = np.where(np.isnan(q), 0.0, q)

    qk = np.clip(q, _KELVIN_SMALL, _KELVIN_LIMIT)
    b_r, b_i, bp_r, bp_i = ber(qk), bei(qk), berp(qk), beip(qk)
    scale = np.hypot(bp_r, bp_i)
    b_r, b_i, bp_r, bp_i = b_r / scale, b_i / scale, bp_r / scale, bp_i / scale
    kelvin = 0.5 * qk * (b_r * bp_i - b_i * bp_r) / (bp_r * bp_r + bp_i * bp_i)

    x = np.maximum(q, _KELVIN_LIMIT) / np.sqrt(2.0)  # a/delta
    asymptotic = 0.5 * x + 0.25 + 3.0 / (32.0 * x)

    fr = np.where(q > _KELVIN_LIMIT, asymptotic, kelvin)
    fr = np.where(q < _KELVIN_SMALL, 1.0, fr)  # (a/delta)^4/48 < 1e-17 there
    return np.where(ok, fr, np.nan)


def igse_coefficient(k: ArrayLike, *, alpha: ArrayLike, beta: ArrayLike) -> np.ndarray:
    """Coefficient k_i of the improved generalised Steinmetz equation.

    Parameters
    ----------
    k : array_like
        Steinmetz coefficient of P_v = k f^alpha B^beta (sinusoid, peak B), in the SI units of
        this module: W/m3 with f in Hz and B in T. [W/m3]
    alpha : array_like
        Steinmetz frequency exponent, > 0. [-]
    beta : array_like
        Steinmetz flux-density exponent, > 0. [-]

    Returns
    -------
    ndarray
        k_i in the same units as ``k``; NaN where alpha or beta is not positive. [W/m3]

    Notes
    -----
    k_i = k / [(2 pi)^(alpha - 1) I(alpha) 2^(beta - alpha)], with
    I(alpha) = int_0^{2 pi} |cos theta|^alpha d theta = 2 sqrt(pi) Gamma((alpha + 1)/2) /
    Gamma(alpha/2 + 1) in closed form (a Beta-function integral, derived; 4 at alpha = 1, pi at
    alpha = 2). With this k_i the iGSE of a sinusoid equals the Steinmetz equation exactly.
    Valid wherever k, alpha, beta were fitted (frequency and flux range of the fit).

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction of
       ferrite core loss with nonsinusoidal waveforms using only Steinmetz parameters",
       IEEE Workshop on Computers in Power Electronics (COMPEL), 2002, pp. 36-41 (definition
       of k_i; pages from memory — verify).
    """
    from scipy.special import gammaln

    k = np.asarray(k, dtype=float)
    alpha = np.asarray(alpha, dtype=float)
    beta = np.asarray(beta, dtype=float)
    ok = (alpha > 0) & (beta > 0)
    a = np.where(ok, alpha, 1.0)
    b = np.where(ok, beta, 1.0)
    cos_integral = 2.0 * np.sqrt(np.pi) * np.exp(gammaln(0.5 * (a + 1.0)) - gammaln(0.5 * a + 1.0))
    k_i = k / ((2.0 * np.pi) ** (a - 1.0) * cos_integral * 2.0 ** (b - a))
    return np.where(ok, k_i, np.nan)


def core_loss_density_steinmetz(
    f: ArrayLike, b_pk: ArrayLike, *, k: ArrayLike, alpha: ArrayLike, beta: ArrayLike
) -> np.ndarray:
    """Core loss density under sinusoidal flux (Steinmetz equation).

    Parameters
    ----------
    f : array_like
        Frequency of the sinusoidal flux. [Hz]
    b_pk : array_like
        Peak flux density (half the peak-to-peak swing). [T]
    k : array_like
        Steinmetz coefficient for f in Hz, B in T and P_v in W/m3 (convert others with
        :func:`steinmetz_k_from_mw_cm3`). [W/m3]
    alpha : array_like
        Steinmetz frequency exponent. [-]
    beta : array_like
        Steinmetz flux-density exponent. [-]

    Returns
    -------
    ndarray
        Loss per unit core volume; NaN for a negative frequency or flux density. [W/m3]

    Notes
    -----
    P_v = k f^alpha B_pk^beta. Valid for sinusoidal flux without DC bias, inside the frequency
    and flux range over which k, alpha, beta were fitted.

    References
    ----------
    .. [1] J. Li, T. Abdallah, C. R. Sullivan, "Improved calculation of core loss with
       nonsinusoidal waveforms", IEEE IAS Annual Meeting, 2001, pp. 2203-2210, eq. (1)
       (the power-law form with frequency).
    .. [2] C. P. Steinmetz, "On the law of hysteresis", Trans. AIEE, vol. IX, pp. 1-64, 1892
       (the flux-density power law).
    """
    f = np.asarray(f, dtype=float)
    b_pk = np.asarray(b_pk, dtype=float)
    alpha = np.asarray(alpha, dtype=float)
    beta = np.asarray(beta, dtype=float)
    ok = (f >= 0) & (b_pk >= 0)
    fs = np.where(ok, f, 0.0)
    bs = np.where(ok, b_pk, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.asarray(k, dtype=float) * fs**alpha * bs**beta
    return np.where(ok, p, np.nan)


def core_loss_density_igse(
    delta_b_segments: ArrayLike,
    duration_segments: ArrayLike,
    *,
    fsw: ArrayLike,
    k: ArrayLike,
    alpha: ArrayLike,
    beta: ArrayLike,
) -> np.ndarray:
    """Core loss density of a piecewise-linear flux waveform (iGSE).

    Parameters
    ----------
    delta_b_segments : array_like
        Flux-density change of each straight segment of one period, segments along the last
        axis, signed or as magnitudes; a flat segment has zero change. [T]
    duration_segments : array_like
        Duration of each segment as a fraction of the period, along the last axis; the
        fractions sum to 1 at most (the rest of the period is flat). [-]
    fsw : array_like
        Repetition frequency of the waveform; broadcasts against the leading axes. [Hz]
    k : array_like
        Steinmetz coefficient for f in Hz, B in T and P_v in W/m3. [W/m3]
    alpha : array_like
        Steinmetz frequency exponent, > 0. [-]
    beta : array_like
        Steinmetz flux-density exponent, > 0. [-]

    Returns
    -------
    ndarray
        Loss per unit core volume, shape of the leading axes broadcast with the coefficients;
        NaN where a duration is negative, the durations sum to more than 1, a segment of zero
        duration carries a flux change (a step, which needs infinite voltage), or alpha or
        beta is not positive. [W/m3]

    Notes
    -----
    P_v = (1/T) int_0^T k_i |dB/dt|^alpha (Delta B)^(beta - alpha) dt, which for straight
    segments is P_v = k_i Delta B^(beta - alpha) f^alpha sum_j d_j^(1 - alpha) |Delta B_j|^alpha,
    with k_i from :func:`igse_coefficient` and Delta B = (1/2) sum_j |Delta B_j| the
    peak-to-peak swing of the major loop. That Delta B is right for a waveform that rises once
    and falls once per period (segments of one sign, then of the other, flat ones anywhere);
    a waveform with minor loops must be split into its loops first, which this function does
    not do. Segments of zero change (flat, or of zero duration) contribute nothing. Valid inside
    the frequency and flux range of the Steinmetz fit and without DC-bias correction; after a
    flat segment the iGSE is known to under-estimate the loss (relaxation; see
    :func:`core_loss_density_igse_dcm`).

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction of
       ferrite core loss with nonsinusoidal waveforms using only Steinmetz parameters",
       IEEE Workshop on Computers in Power Electronics (COMPEL), 2002, pp. 36-41 (the iGSE
       integral and its piecewise-linear form; pages from memory — verify).
    """
    db = np.abs(np.asarray(delta_b_segments, dtype=float))
    dur = np.asarray(duration_segments, dtype=float)
    db, dur = np.broadcast_arrays(db, dur)
    alpha = np.asarray(alpha, dtype=float)
    beta = np.asarray(beta, dtype=float)
    a = alpha[..., np.newaxis]

    step = (dur == 0) & (db > 0)
    bad = np.any((dur < 0) | step, axis=-1) | (np.sum(dur, axis=-1) > 1.0 + 1e-9)
    bad = bad | ~((alpha > 0) & (beta > 0))

    moving = (db > 0) & (dur > 0)
    d_safe = np.where(moving, dur, 1.0)
    db_safe = np.where(moving, db, 1.0)
    a_safe = np.where(a > 0, a, 1.0)
    rate_sum = np.sum(np.where(moving, d_safe ** (1.0 - a_safe) * db_safe**a_safe, 0.0), axis=-1)

    swing = 0.5 * np.sum(db, axis=-1)
    swing_safe = np.where(swing > 0, swing, 1.0)
    k_i = igse_coefficient(k, alpha=alpha, beta=beta)
    alpha_safe = np.where(alpha > 0, alpha, 1.0)
    beta_safe = np.where(beta > 0, beta, 1.0)
    fs = np.asarray(fsw, dtype=float)
    fs_safe = np.where(fs >= 0, fs, 0.0)
    p = k_i * swing_safe ** (beta_safe - alpha_safe) * fs_safe**alpha_safe * rate_sum
    p = np.where(swing > 0, p, 0.0)
    return np.where(bad | ~(fs >= 0), np.nan, p)


def core_loss_density_igse_ccm(
    delta_b: ArrayLike,
    *,
    duty: ArrayLike,
    fsw: ArrayLike,
    k: ArrayLike,
    alpha: ArrayLike,
    beta: ArrayLike,
) -> np.ndarray:
    """Core loss density of a triangular flux in CCM (iGSE).

    Parameters
    ----------
    delta_b : array_like
        Peak-to-peak flux-density swing, L delta_i/(N Ae) (:func:`flux_density_swing`). [T]
    duty : array_like
        Fraction of the period during which the flux rises, in (0, 1). [-]
    fsw : array_like
        Switching frequency. [Hz]
    k : array_like
        Steinmetz coefficient for f in Hz, B in T and P_v in W/m3. [W/m3]
    alpha : array_like
        Steinmetz frequency exponent, > 0. [-]
    beta : array_like
        Steinmetz flux-density exponent, > 0. [-]

    Returns
    -------
    ndarray
        Loss per unit core volume; NaN where duty is outside (0, 1) with a nonzero swing. [W/m3]

    Notes
    -----
    Flux rises by Delta B over D T and falls by Delta B over (1 - D) T:
    P_v = k_i Delta B^beta f^alpha [D^(1 - alpha) + (1 - D)^(1 - alpha)] (derived from the
    iGSE integral, REFERENCES 4.2), evaluated through :func:`core_loss_density_igse`. At
    D = 0.5 and equal peak flux the ratio to the sinusoidal Steinmetz loss is 1 for alpha = 1
    and 8/pi^2 for alpha = 2. The DC bias of the inductor is not accounted for.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction of
       ferrite core loss with nonsinusoidal waveforms using only Steinmetz parameters",
       IEEE COMPEL 2002, pp. 36-41 (iGSE; pages from memory — verify).
    """
    db, d = np.broadcast_arrays(np.asarray(delta_b, dtype=float), np.asarray(duty, dtype=float))
    segments = np.stack([db, -db], axis=-1)
    durations = np.stack([d, 1.0 - d], axis=-1)
    return core_loss_density_igse(segments, durations, fsw=fsw, k=k, alpha=alpha, beta=beta)


def core_loss_density_igse_dcm(
    delta_b: ArrayLike,
    *,
    duty: ArrayLike,
    d2: ArrayLike,
    fsw: ArrayLike,
    k: ArrayLike,
    alpha: ArrayLike,
    beta: ArrayLike,
) -> np.ndarray:
    """Core loss density of a three-segment flux in DCM (iGSE).

    Parameters
    ----------
    delta_b : array_like
        Peak-to-peak flux-density swing, L i_pk/(N Ae) in DCM. [T]
    duty : array_like
        Fraction of the period during which the flux rises (switch on), > 0. [-]
    d2 : array_like
        Fraction of the period during which the flux falls back to its start, > 0, with
        duty + d2 <= 1; the rest of the period is flat. [-]
    fsw : array_like
        Switching frequency. [Hz]
    k : array_like
        Steinmetz coefficient for f in Hz, B in T and P_v in W/m3. [W/m3]
    alpha : array_like
        Steinmetz frequency exponent, > 0. [-]
    beta : array_like
        Steinmetz flux-density exponent, > 0. [-]

    Returns
    -------
    ndarray
        Loss per unit core volume; NaN where duty + d2 > 1 or a rising or falling interval of
        zero length carries the swing. [W/m3]

    Notes
    -----
    Rise over D T, fall over D2 T, flat for (1 - D - D2) T:
    P_v = k_i Delta B^beta f^alpha [D^(1 - alpha) + D2^(1 - alpha)] (derived from the iGSE
    integral), evaluated through :func:`core_loss_density_igse`; the flat segment adds nothing.
    At D + D2 = 1 it equals the CCM triangle. The iGSE is known to under-estimate the loss of a
    waveform with a flat segment: the core relaxes while the flux stands still and dissipates
    energy the iGSE does not count. Treat the result as a lower estimate in DCM.

    References
    ----------
    .. [1] K. Venkatachalam, C. R. Sullivan, T. Abdallah, H. Tacca, "Accurate prediction of
       ferrite core loss with nonsinusoidal waveforms using only Steinmetz parameters",
       IEEE COMPEL 2002, pp. 36-41 (iGSE; pages from memory — verify).
    .. [2] J. Muhlethaler, J. Biela, J. W. Kolar, A. Ecklebe, "Improved core-loss calculation
       for magnetic components employed in power electronic systems", IEEE Trans. Power
       Electron., vol. 27, no. 2, 2012 (relaxation after flat segments, i2GSE; from memory —
       verify).
    """
    db, d, d_2 = np.broadcast_arrays(
        np.asarray(delta_b, dtype=float),
        np.asarray(duty, dtype=float),
        np.asarray(d2, dtype=float),
    )
    segments = np.stack([db, -db, np.zeros_like(db)], axis=-1)
    # Rounding can make the flat fraction a hair negative at D + D2 = 1; a real excess of
    # D + D2 over 1 is caught by the sum rule of core_loss_density_igse.
    durations = np.stack([d, d_2, np.maximum(1.0 - d - d_2, 0.0)], axis=-1)
    return core_loss_density_igse(segments, durations, fsw=fsw, k=k, alpha=alpha, beta=beta)


def core_loss_temperature_factor(
    t: ArrayLike, *, ct0: ArrayLike, ct1: ArrayLike, ct2: ArrayLike
) -> np.ndarray:
    """Temperature factor of ferrite core loss (parabolic fit).

    Parameters
    ----------
    t : array_like
        Core temperature. [degC]
    ct0 : array_like
        Constant coefficient of the fit. [-]
    ct1 : array_like
        Linear coefficient of the fit (entered with a minus sign). [1/K]
    ct2 : array_like
        Quadratic coefficient of the fit. [1/K2]

    Returns
    -------
    ndarray
        Factor multiplying the loss density at the Steinmetz fit's reference conditions. [-]

    Notes
    -----
    C_T(T) = ct0 - ct1 T + ct2 T^2, T in degC; for ferrite the curve has its minimum at
    T = ct1/(2 ct2), typically 70 to 100 degC (common practice). Valid only over the temperature
    range of the fit; the coefficients are usually normalised so that C_T = 1 at the
    temperature at which k was fitted.

    References
    ----------
    .. [1] Common practice for ferrite core-loss fits (parabolic temperature factor); no single
       published source.
    """
    t = np.asarray(t, dtype=float)
    ct0 = np.asarray(ct0, dtype=float)
    ct1 = np.asarray(ct1, dtype=float)
    ct2 = np.asarray(ct2, dtype=float)
    return ct0 - ct1 * t + ct2 * t * t


def steinmetz_k_from_mw_cm3(k: ArrayLike, *, alpha: ArrayLike, beta: ArrayLike) -> np.ndarray:
    """Convert a Steinmetz k fitted in mW/cm3, kHz, mT to W/m3, Hz, T.

    Parameters
    ----------
    k : array_like
        Coefficient of P[mW/cm3] = k f[kHz]^alpha B[mT]^beta. [mW/cm3]
    alpha : array_like
        Steinmetz frequency exponent (unchanged by the conversion). [-]
    beta : array_like
        Steinmetz flux-density exponent (unchanged by the conversion). [-]

    Returns
    -------
    ndarray
        Coefficient of P[W/m3] = k_SI f[Hz]^alpha B[T]^beta. [W/m3]

    Notes
    -----
    1 mW/cm3 = 1e-3 W / 1e-6 m3 = 1e3 W/m3; f[kHz] = 1e-3 f[Hz]; B[mT] = 1e3 B[T]. So
    P[W/m3] = 1e3 k (1e-3 f[Hz])^alpha (1e3 B[T])^beta
    = k 10^(3 - 3 alpha + 3 beta) f[Hz]^alpha B[T]^beta, that is
    k_SI = k 10^(3 (1 - alpha + beta)). Exact unit algebra; valid for any exponents.

    References
    ----------
    .. [1] J. Li, T. Abdallah, C. R. Sullivan, "Improved calculation of core loss with
       nonsinusoidal waveforms", IEEE IAS Annual Meeting, 2001, eq. (1) (the equation whose
       coefficient is converted; the conversion itself is unit algebra).
    """
    k = np.asarray(k, dtype=float)
    alpha = np.asarray(alpha, dtype=float)
    beta = np.asarray(beta, dtype=float)
    return k * 10.0 ** (3.0 * (1.0 - alpha + beta))


def flux_density_swing(
    l: ArrayLike, delta_i: ArrayLike, *, turns: ArrayLike, ae: ArrayLike
) -> np.ndarray:
    """Peak-to-peak flux-density swing of an inductor core (Faraday).

    Parameters
    ----------
    l : array_like
        Inductance. [H]
    delta_i : array_like
        Peak-to-peak ripple of the inductor current. [A]
    turns : array_like
        Number of turns N of the winding. [-]
    ae : array_like
        Effective cross-section of the core. [m2]

    Returns
    -------
    ndarray
        Delta B, peak-to-peak; NaN where turns or ae is not positive. [T]

    Notes
    -----
    Delta B = V t_on/(N Ae) = L Delta i/(N Ae) (Faraday's law with v = L di/dt). Valid while
    the inductance is constant over the swing (no saturation, no strong DC-bias roll-off);
    uniform flux over Ae.

    References
    ----------
    .. [1] Faraday's law of induction, v = N Ae dB/dt (elementary).
    .. [2] R. W. Erickson, D. Maksimovic, "Fundamentals of Power Electronics", 3rd ed.,
       Springer, 2020, inductor-design chapter (B = L i/(n A_c); chapter number from
       memory — verify).
    """
    return _flux_density(l, delta_i, turns, ae)


def peak_flux_density(
    l: ArrayLike, i_pk: ArrayLike, *, turns: ArrayLike, ae: ArrayLike
) -> np.ndarray:
    """Peak flux density of an inductor core at its peak current.

    Parameters
    ----------
    l : array_like
        Inductance at the peak current. [H]
    i_pk : array_like
        Peak inductor current. [A]
    turns : array_like
        Number of turns N of the winding. [-]
    ae : array_like
        Effective cross-section of the core. [m2]

    Returns
    -------
    ndarray
        Peak flux density B_pk; NaN where turns or ae is not positive. [T]

    Notes
    -----
    B_pk = L I_pk/(N Ae) (flux linkage N Ae B = L i). Valid for a constant inductance up to
    I_pk; compare with the saturation flux density at the core temperature, with margin.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimovic, "Fundamentals of Power Electronics", 3rd ed.,
       Springer, 2020, inductor-design chapter (B_max = L I_max/(n A_c); chapter number from
       memory — verify).
    """
    return _flux_density(l, i_pk, turns, ae)


def _flux_density(l: ArrayLike, i: ArrayLike, turns: ArrayLike, ae: ArrayLike) -> np.ndarray:
    """L i/(N Ae), NaN where N or Ae is not positive."""
    turns = np.asarray(turns, dtype=float)
    ae = np.asarray(ae, dtype=float)
    ok = (turns > 0) & (ae > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        b = np.asarray(l, dtype=float) * np.asarray(i, dtype=float) / (turns * ae)
    return np.where(ok, b, np.nan)


def copper_ac_tail_dowell(rdc: ArrayLike, n2_tail: ArrayLike, *, delta_last: ArrayLike,
                          layers: ArrayLike, n_last: int) -> np.ndarray:
    """Eddy loss of the harmonics above the last one summed (Dowell).

    Parameters
    ----------
    rdc : array_like
        DC resistance of the winding at its temperature. [ohm]
    n2_tail : array_like
        Σ_{n > n_last} n²·I_n², the harmonic tail weighted by n² (from the RMS of the
        current's derivative less the harmonics summed). [A2]
    delta_last : array_like
        Dowell's Δ at the last harmonic summed, Δ1·√n_last. [-]
    layers : array_like
        Layers in the winding portion. [-]
    n_last : int
        The last harmonic summed. [-]

    Returns
    -------
    ndarray
        Eddy loss of the harmonics above n_last. [W]

    Notes
    -----
    At low Δ, Fr − 1 ≈ (5m² − 1)·Δ⁴/45 grows as n², so the tail is
    Rdc·(Fr(Δ_N) − 1)·Σ_{n>N} n²·I_n²/N², exact in that limit; at high Δ, where Fr − 1 grows
    only as √n, the same expression over-estimates the (then small) tail.

    References
    ----------
    .. [1] P. L. Dowell, "Effects of eddy currents in transformer windings", Proc. IEE,
       vol. 113, no. 8, pp. 1387–1394, 1966 (low-frequency form of the layer factor).
    .. [2] W. G. Hurley, E. Gath, J. G. Breslin, IEEE Trans. Power Electron., vol. 15, no. 2,
       2000 (the RMS of the derivative carries the harmonic sum weighted by n²).
    """
    excess = _dowell_excess(np.asarray(delta_last, dtype=float), np.asarray(layers, dtype=float))
    return np.asarray(rdc) * np.maximum(np.asarray(n2_tail), 0.0) * excess / (n_last * n_last)
