"""Tests of lossbudget.losses.magnetics against published formulas and independent solutions.

Every check value comes from outside the module: a published formula written out here, a
hand calculation, or a second method (scipy quadrature, scipy complex Bessel functions, a
finite-difference field solution). Sources are those of REFERENCES.md (its section numbers
are quoted as "REFERENCES 3.1"). Inputs are round numbers chosen for hand arithmetic; the check
values are the formulas or second methods evaluated beside each check.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from lossbudget.losses import magnetics as mg

RHO20 = 1.0 / 58.0e6  # Source: IEC 60028:1925, 1/58 ohm mm2/m = 1.7241e-8 ohm m
ALPHA20 = 0.00393  # Source: IEC 60028:1925, temperature coefficient referred to 20 degC


def dowell_direct(delta, m):
    """Dowell's layer formula written out as printed (REFERENCES 3.1), for moderate delta."""
    delta = np.asarray(delta, dtype=float)
    big_m = (np.sinh(2 * delta) + np.sin(2 * delta)) / (np.cosh(2 * delta) - np.cos(2 * delta))
    big_d = 2 * (np.sinh(delta) - np.sin(delta)) / (np.cosh(delta) + np.cos(delta))
    return delta * (big_m + (m * m - 1) / 3 * big_d)


def bessel_wire_factor(q):
    """Re[(k a/2) J0(k a)/J1(k a)], k = (1 - j)/delta, a = q delta/sqrt(2) (REFERENCES 2.1).

    scipy's exponentially scaled jve keeps the ratio finite for large arguments (the scale
    factors cancel).
    """
    from scipy.special import jve

    z = (1.0 - 1.0j) * np.asarray(q, dtype=float) / np.sqrt(2.0)
    return np.real(0.5 * z * jve(0, z) / jve(1, z))


# ---------------------------------------------------------------------------------------------
# Copper


def test_resistivity_at_20_degc_is_iec60028_value():
    # Source: IEC 60028:1925, rho20 = 1/58 ohm mm2/m = 0.017241 ohm mm2/m (100 % IACS).
    rho = mg.copper_resistivity_at(20.0)
    assert_allclose(rho, 1.0 / 58.0 * 1e-6, rtol=1e-15)
    assert_allclose(rho * 1e6, 0.017241, rtol=3e-5)  # the printed value has five digits


def test_resistivity_follows_alpha20_and_conductivity():
    # Source: IEC 60028:1925, rho(T) = rho20 [1 + 0.00393 (T - 20)]. Hand calculation at
    # 75 degC: 1 + 0.00393 * 55 = 1.21615; at 98 % IACS the resistivity is 1/0.98 higher.
    assert_allclose(mg.copper_resistivity_at(75.0), RHO20 * 1.21615, rtol=1e-14)
    assert_allclose(
        mg.copper_resistivity_at(75.0, conductivity=0.98), RHO20 * 1.21615 / 0.98, rtol=1e-14
    )
    assert np.isnan(mg.copper_resistivity_at(75.0, conductivity=0.0))


def test_resistance_law_234_45_equals_alpha20_form_referred_to_20_degc():
    # Source: IEC 60028:1925 (R = R20 [1 + 0.00393 (T - 20)]); REFERENCES 1.1 derives the
    # 234.45 form from it. 1/254.45 = 0.0039300452 against 0.00393: the two coefficients differ
    # by 4.52e-8 /K, so over -40..200 degC the resistances agree to within
    # 4.52e-8 * 180 / 1.7 = 4.8e-6 relative; rtol 5e-6.
    t = np.linspace(-40.0, 200.0, 49)
    r20 = 0.0123
    assert_allclose(
        mg.copper_resistance_at(r20, t, t_ref=20.0), r20 * (1 + ALPHA20 * (t - 20)), rtol=5e-6
    )


def test_resistance_from_25_degc_reference():
    # Source: REFERENCES 1.1 (derived from IEC 60028): applying alpha20 unchanged to a 25 degC
    # value is 0.44 % off at 100 degC. Hand calculation: (234.45 + 100)/(234.45 + 25)
    # = 334.45/259.45 = 1.2890730; 1 + 0.00393 * 75 = 1.29475; 1.29475/1.2890730 - 1 = 0.440 %.
    ratio = mg.copper_resistance_at(1.0, 100.0)  # t_ref defaults to 25 degC
    assert_allclose(ratio, 334.45 / 259.45, rtol=1e-15)
    assert_allclose((1 + ALPHA20 * 75) / ratio - 1, 0.0044, atol=5e-5)
    assert_allclose(mg.copper_resistance_at(0.5, 61.0, t_ref=61.0), 0.5, rtol=1e-15)
    assert np.isnan(mg.copper_resistance_at(1.0, -300.0))


def test_skin_depth_of_copper_at_100_khz_by_hand():
    # Source: Ramo, Whinnery, Van Duzer, Fields and Waves, 1994: delta = sqrt(rho/(pi f mu0)).
    # Hand calculation, copper at 20 degC, f = 100 kHz:
    #   mu0 = 4 pi 1e-7 = 1.256637e-6 H/m
    #   pi f mu0 = 3.141593 * 1e5 * 1.256637e-6 = 0.3947842 ohm/m... (1/s * H/m)
    #   rho / (pi f mu0) = 1.724138e-8 / 0.3947842 = 4.367292e-8 m2
    #   delta = sqrt(4.367292e-8) = 2.089807e-4 m = 0.2090 mm
    # Seven digits carried, so rtol 1e-6.
    assert_allclose(mg.skin_depth(100e3, resistivity=RHO20), 2.089807e-4, rtol=1e-6)
    # delta scales as 1/sqrt(f mu_r): four times the frequency or mu_r halves it.
    assert_allclose(mg.skin_depth(400e3, resistivity=RHO20), 2.089807e-4 / 2, rtol=1e-6)
    assert_allclose(mg.skin_depth(100e3, resistivity=RHO20, mu_r=4.0), 2.089807e-4 / 2, rtol=1e-6)
    assert np.isposinf(mg.skin_depth(0.0, resistivity=RHO20))
    assert np.isnan(mg.skin_depth(-1.0, resistivity=RHO20))


# ---------------------------------------------------------------------------------------------
# Isolated round wire


def test_isolated_wire_kelvin_equals_complex_bessel_form():
    # Source: REFERENCES 2.1 (Ramo, Whinnery, Van Duzer 1994, internal impedance of round
    # wires): the Kelvin-function and the complex-Bessel forms agree to 1e-9. Grid of q over
    # the Kelvin range and the asymptotic range above q = 900.
    q = np.concatenate([np.geomspace(1e-3, 9.99, 400), np.geomspace(11.4, 5e3, 600)])
    sd = 2.0e-4
    got = mg.ac_resistance_factor_isolated_wire(q * np.sqrt(2.0) * sd, skin_depth=sd)
    assert_allclose(got, bessel_wire_factor(q), rtol=1e-9)


def test_isolated_wire_near_scipy_kelvin_branch_point():
    # scipy's ber/bei/berp/beip switch from their series to an asymptotic expansion at x = 10
    # and are accurate only to ~1e-9 just above it (scipy/xsf issue #232, "the shared
    # |x| < 10 branch point costs ber/bei/berp/beip ~6 digits"). Measured here: 1.23e-9 at
    # q = 10.0005, below 2e-10 from q = 11 on; scipy's jve agrees with the power series of J0
    # and J1 to 1e-15 there. Tolerance 2e-9 over 10 <= q <= 11.4 for that reason.
    q = np.linspace(10.0, 11.4, 300)
    sd = 1.0e-4
    got = mg.ac_resistance_factor_isolated_wire(q * np.sqrt(2.0) * sd, skin_depth=sd)
    assert_allclose(got, bessel_wire_factor(q), rtol=2e-9)


def test_isolated_wire_low_and_high_frequency_limits():
    # Source: REFERENCES 2.1: Rac/Rdc -> 1 + (a/delta)^4/48 at low frequency and
    # a/(2 delta) + 1/4 at high frequency.
    sd = 1.0e-3
    x_low = np.array([0.01, 0.05])  # a/delta; the next term is -(a/delta)^8/2880 < 1.4e-14
    got = mg.ac_resistance_factor_isolated_wire(2 * x_low * sd, skin_depth=sd)
    assert_allclose(got, 1 + x_low**4 / 48, rtol=0, atol=2e-14)
    x_high = np.array([50.0, 200.0, 1e3, 1e4])
    got = mg.ac_resistance_factor_isolated_wire(2 * x_high * sd, skin_depth=sd)
    # The remainder is of order delta/a (it is 3 delta/(32 a), derived from Hankel's
    # expansion): it must vanish relative to the limit.
    excess = got - (x_high / 2 + 0.25)
    assert np.all(np.abs(excess) * x_high < 0.1)
    assert_allclose(mg.ac_resistance_factor_isolated_wire(0.0, skin_depth=sd), 1.0, rtol=0)
    assert_allclose(mg.ac_resistance_factor_isolated_wire(1e-3, skin_depth=np.inf), 1.0, rtol=0)
    assert np.isnan(mg.ac_resistance_factor_isolated_wire(-1e-3, skin_depth=sd))


# ---------------------------------------------------------------------------------------------
# Dowell


def test_dowell_equals_printed_formula_at_moderate_delta():
    # Source: Dowell, Proc. IEE 1966, in the rearrangement of REFERENCES 3.1, written out in
    # dowell_direct; for 0.3 <= delta <= 20 the printed form loses at most a few ulps.
    delta = np.geomspace(0.3, 20.0, 60)[:, np.newaxis]
    m = np.array([1, 2, 3, 5, 10, 25])
    assert_allclose(
        mg.ac_resistance_factor_dowell(delta, layers=m), dowell_direct(delta, m), rtol=2e-14
    )


@pytest.mark.parametrize("m", [1, 2, 3, 5, 10])
def test_dowell_low_frequency_expansion(m):
    # Source: REFERENCES 3.1 (derived from Dowell 1966): Fr = 1 + (5 m^2 - 1) Delta^4/45, to
    # 1e-8 relative at Delta = 0.05.
    delta = 0.05
    assert_allclose(
        mg.ac_resistance_factor_dowell(delta, layers=m),
        1 + (5 * m * m - 1) * delta**4 / 45,
        rtol=1e-8,
    )


@pytest.mark.parametrize("m", [1, 2, 4, 10])
def test_dowell_eddy_part_follows_two_term_series_at_small_delta(m):
    # Derived from the Taylor series of M and D (REFERENCES 3.1 gives the first term):
    # Fr - 1 = (5 m^2 - 1) Delta^4/45 - [16/4725 + 17 (m^2 - 1)/3780] Delta^8 + O(Delta^12).
    # The eddy part is seen through copper_ac_loss_dowell (Rdc = 1 ohm, I1 = 1 A), which
    # computes Fr - 1 without cancellation. At Delta <= 0.1 the O(Delta^12) remainder is below
    # 2e-11 relative; rtol 1e-10. Down to Delta = 1e-4 the eddy part stays relative-accurate.
    delta = np.array([1e-4, 1e-3, 1e-2, 0.05, 0.1])
    series = (5 * m * m - 1) * delta**4 / 45 - (16 / 4725 + 17 * (m * m - 1) / 3780) * delta**8
    got = mg.copper_ac_loss_dowell(1.0, np.ones((delta.size, 1)), delta1=delta, layers=m)
    assert_allclose(got, series, rtol=1e-10)


@pytest.mark.parametrize("m", [1, 2, 3, 8])
def test_dowell_high_frequency_asymptote(m):
    # Source: REFERENCES 3.1 / Dowell 1966: M -> 1 and D -> 2, so Fr -> Delta [1 + 2 (m^2 - 1)/3].
    # The relative corrections are bounded by 4 sqrt(2) exp(-Delta) (from the exponential form
    # of D): 2.4e-17 at Delta = 40, so rtol 1e-14 leaves only rounding.
    delta = np.array([40.0, 100.0, 1e3])
    assert_allclose(
        mg.ac_resistance_factor_dowell(delta, layers=m),
        delta * (1 + 2 * (m * m - 1) / 3),
        rtol=1e-14,
    )


def _foil_winding_fr(delta, m, n):
    """Rac/Rdc of m foil layers by finite differences of the 1-D diffusion equation.

    Lengths in skin depths, current 1 A per layer, breadth 1: inside layer p the field solves
    d2H/dx2 = j omega mu0 sigma H = 2j H, with H = p - 1 at its inner face and H = p at its
    outer face (Ampere's law, field zero inside the first layer, high-permeability core). The
    second-order central difference on n intervals is solved as a tridiagonal system;
    J = dH/dx at the interval midpoints and the loss integral of |J|^2 (sigma = 1) by the
    midpoint rule, both O(h^2). DC loss per layer: J = 1/Delta over thickness Delta, 1/Delta.
    """
    from scipy.linalg import solve_banded

    s = delta / n
    bands = np.zeros((3, n - 1), dtype=complex)
    bands[0, 1:] = 1.0
    bands[2, :-1] = 1.0
    bands[1, :] = -(2.0 + 2.0j * s * s)
    loss = 0.0
    for p in range(1, m + 1):
        h_in, h_out = p - 1.0, float(p)
        rhs = np.zeros(n - 1, dtype=complex)
        rhs[0] -= h_in
        rhs[-1] -= h_out
        h = np.concatenate([[h_in], solve_banded((1, 1), bands, rhs), [h_out]])
        loss += np.sum(np.abs(np.diff(h) / s) ** 2) * s
    return loss / (m / delta)


@pytest.mark.parametrize("m", [1, 2, 4, 8])
@pytest.mark.parametrize("delta", [0.3, 1.0, 2.0, 5.0, 10.0])
def test_dowell_against_finite_difference_field_solution(delta, m):
    # Independent check of Dowell, Proc. IEE 1966: the 1-D field problem of a layered foil
    # winding solved numerically (see _foil_winding_fr). The O(h^2) error of the fine grid is
    # estimated by Richardson as (F_2n - F_n)/3 (below 7e-6 of Fr at these points), and the
    # extrapolated value (4 F_2n - F_n)/3 is O(h^4): measured below 1e-10 of Fr. Tolerance
    # 1e-8, well above the O(h^4) remainder and far below the O(h^2) error it removes.
    n = 1000
    coarse = _foil_winding_fr(delta, m, n)
    fine = _foil_winding_fr(delta, m, 2 * n)
    dowell = mg.ac_resistance_factor_dowell(delta, layers=m)
    assert abs(fine - coarse) / 3 < 1e-5 * dowell  # the discretisation is converging
    assert_allclose((4 * fine - coarse) / 3, dowell, rtol=1e-8)


@settings(max_examples=300, deadline=None)
@given(
    a=st.floats(min_value=1e-4, max_value=1e3),
    b=st.floats(min_value=1e-4, max_value=1e3),
    m=st.integers(min_value=1, max_value=30),
)
def test_dowell_factor_is_monotone_in_delta(a, b, m):
    # Dowell's Fr grows with Delta (more eddy loss at higher frequency); the back-solve relies
    # on it. Property over the whole documented range.
    lo, hi = min(a, b), max(a, b)
    assert mg.ac_resistance_factor_dowell(lo, layers=m) <= mg.ac_resistance_factor_dowell(
        hi, layers=m
    )


@pytest.mark.parametrize("m", [1, 1.5, 2, 3, 10, 50])
def test_dowell_eddy_part_strictly_increasing_on_dense_grid(m):
    # The eddy part Fr - 1 (through copper_ac_loss_dowell) rises strictly over 1e-4..1e3,
    # including the region 1 < Delta < 3 where M(Delta) itself dips below 1.
    delta = np.geomspace(1e-4, 1e3, 40001)
    eddy = mg.copper_ac_loss_dowell(1.0, np.ones((delta.size, 1)), delta1=delta, layers=m)
    assert np.all(np.diff(eddy) > 0)
    assert eddy[0] > 0


def test_dowell_is_continuous_across_its_evaluation_branches():
    # Series below Delta = 1 and exponential form above are exact rearrangements of the same
    # function; adjacent doubles around the seam must give the same value to rounding.
    below = np.nextafter(1.0, 0.0)
    for m in (1, 2, 7):
        f_below = mg.ac_resistance_factor_dowell(below, layers=m)
        f_at = mg.ac_resistance_factor_dowell(1.0, layers=m)
        assert_allclose(f_below, f_at, rtol=1e-14)
        assert_allclose(f_at, dowell_direct(1.0, m), rtol=1e-14)


def test_dowell_edge_values():
    # DC gives Fr = 1; invalid geometry gives NaN; no RuntimeWarning anywhere (pytest turns
    # warnings into errors).
    got = mg.ac_resistance_factor_dowell([0.0, np.inf, -0.1, np.nan, 1e300], layers=3)
    assert got[0] == 1.0
    assert np.isposinf(got[1])
    assert np.isnan(got[2]) and np.isnan(got[3])
    assert np.isfinite(got[4])
    assert np.isnan(mg.ac_resistance_factor_dowell(1.0, layers=0.5))


def test_foil_equivalent_delta_by_hand():
    # Source: REFERENCES 3.2 (Dowell 1966; form of Erickson & Maksimovic, 3rd ed., 2020):
    # Delta = (pi/4)^(3/4) (d/delta) sqrt(eta), (pi/4)^(3/4) = 0.8342907.
    # Hand calculation, d = 1 mm, delta = 0.2 mm, eta = 0.64: 0.8342907 * 5 * 0.8 = 3.337163.
    got = mg.foil_equivalent_delta(1e-3, skin_depth=0.2e-3, porosity=0.64)
    assert_allclose(got, 3.337163, rtol=1e-6)
    # REFERENCES 3.2 pitfall: with eta' = (pi/4)^(1/2) eta, Delta = (pi/4)^(1/2) (d/delta)
    # sqrt(eta') is the same Delta.
    eta_prime = np.sqrt(np.pi / 4) * 0.64
    assert_allclose(got, np.sqrt(np.pi / 4) * 5 * np.sqrt(eta_prime), rtol=1e-15)
    assert np.all(np.isnan(mg.foil_equivalent_delta(1e-3, skin_depth=0.2e-3, porosity=[0.0, 1.1])))


@pytest.mark.parametrize("m", [1, 2, 3, 6])
def test_dowell_back_solve_round_trip(m):
    # Inverse of Dowell 1966's formula: Delta -> Fr -> Delta. At Delta >= 0.05 the inversion
    # is well conditioned (Fr - 1 > 1e-7, so rounding of Fr moves Delta by < 1e-9).
    delta = np.geomspace(0.05, 1e3, 200)
    fr = mg.ac_resistance_factor_dowell(delta, layers=m)
    assert_allclose(mg.dowell_delta_from_factor(fr, layers=m), delta, rtol=1e-9)
    # Fr -> Delta -> Fr is well conditioned everywhere.
    fr = np.concatenate([1 + np.geomspace(1e-14, 1e-2, 30), np.geomspace(1.02, 1e6, 60)])
    back = mg.ac_resistance_factor_dowell(mg.dowell_delta_from_factor(fr, layers=m), layers=m)
    assert_allclose(back, fr, rtol=1e-13)


def test_dowell_back_solve_edge_values():
    got = mg.dowell_delta_from_factor([1.0, 0.99, np.nan, np.inf], layers=2)
    assert got[0] == 0.0
    assert np.isnan(got[1]) and np.isnan(got[2])
    assert np.isposinf(got[3])
    assert np.isnan(mg.dowell_delta_from_factor(2.0, layers=0.0))


def test_copper_ac_loss_single_harmonic_equals_hand_formula():
    # Source: REFERENCES 3.4 (Dowell 1966; Hurley, Gath, Breslin 2000): eddy part of one
    # sinusoid P = Rdc I1^2 (Fr(Delta1) - 1), Fr written out in dowell_direct.
    rdc, i1, delta1, m = 0.012, 1.7, 1.3, 3
    got = mg.copper_ac_loss_dowell(rdc, [i1], delta1=delta1, layers=m)
    assert_allclose(got, rdc * i1**2 * (dowell_direct(delta1, m) - 1), rtol=1e-13)


def test_copper_ac_loss_triangle_harmonics():
    # Source: REFERENCES 3.4 (harmonic method, Dowell 1966 / Hurley, Gath, Breslin 2000): a
    # triangular ripple of peak-to-peak dI, rising over D, has I_n = dI |sin(n pi D)| /
    # (sqrt(2) pi^2 n^2 D (1 - D)) (derived there); the harmonic at n uses Delta1 sqrt(n).
    d_i, duty, rdc, delta1, m = 2.0, 0.4, 0.012, 0.9, 2
    n = np.arange(1, 41)
    i_n = (
        d_i * np.abs(np.sin(n * np.pi * duty)) / (np.sqrt(2) * np.pi**2 * n**2 * duty * (1 - duty))
    )
    expected = rdc * np.sum(i_n**2 * (dowell_direct(delta1 * np.sqrt(n), m) - 1))
    got = mg.copper_ac_loss_dowell(rdc, i_n, delta1=delta1, layers=m)
    # The harmonic n = 5 vanishes at D = 0.4 (REFERENCES 3.4) in floating point only to
    # 1e-16 A; the sum is dominated by n = 1, rtol 1e-12.
    assert_allclose(got, expected, rtol=1e-12)


def test_copper_ac_loss_zero_ripple_is_zero():
    # No ripple, no eddy loss (the DC current is counted in copper_dc).
    got = mg.copper_ac_loss_dowell(0.01, np.zeros((3, 25)), delta1=[0.5, 2.0, np.inf], layers=4)
    assert np.array_equal(got, np.zeros(3))


# ---------------------------------------------------------------------------------------------
# Core loss


@pytest.mark.parametrize("alpha", [0.5, 1.0, 1.3, 1.7, 2.0, 2.8])
def test_cos_power_integral_closed_form_against_quadrature(alpha):
    # Source: REFERENCES 4.1 (derived Beta-function integral; Venkatachalam, Sullivan,
    # Abdallah, Tacca, COMPEL 2002 for k_i): the integral inside k_i, recovered from
    # igse_coefficient, against scipy quad. quad's error estimate is below 1e-12 here.
    from scipy.integrate import quad

    beta = 2.4
    k = 1.0
    integral = k / (
        mg.igse_coefficient(k, alpha=alpha, beta=beta)
        * (2 * np.pi) ** (alpha - 1)
        * 2 ** (beta - alpha)
    )
    reference = 4 * quad(lambda th: np.cos(th) ** alpha, 0, np.pi / 2, epsabs=1e-14)[0]
    assert_allclose(integral, reference, rtol=1e-10)


def test_cos_power_integral_exact_values():
    # Source: REFERENCES 4.1: the integral is 4 at alpha = 1 and pi at alpha = 2.
    for alpha, value in ((1.0, 4.0), (2.0, np.pi)):
        k_i = mg.igse_coefficient(1.0, alpha=alpha, beta=2.0)
        assert_allclose(
            1.0 / (k_i * (2 * np.pi) ** (alpha - 1) * 2 ** (2.0 - alpha)), value, rtol=1e-14
        )


@pytest.mark.parametrize(("alpha", "beta"), [(1.0, 2.0), (1.3, 2.5), (1.45, 2.6), (2.0, 3.0)])
def test_igse_reduces_to_steinmetz_for_sinusoid(alpha, beta):
    # Source: Venkatachalam, Sullivan, Abdallah, Tacca, COMPEL 2002 (iGSE); REFERENCES 4.2.
    # (1/T) int_0^T k_i |dB/dt|^alpha (Delta B)^(beta - alpha) dt integrated numerically with
    # quad for B = B_pk sin(2 pi f t), against k f^alpha B_pk^beta.
    from scipy.integrate import quad

    k, f, b_pk = 3.7, 150e3, 0.08
    period = 1 / f
    k_i = mg.igse_coefficient(k, alpha=alpha, beta=beta)
    w = 2 * np.pi * f

    def integrand(t):
        return k_i * abs(w * b_pk * np.cos(w * t)) ** alpha * (2 * b_pk) ** (beta - alpha)

    pieces = [
        quad(integrand, q * period / 4, (q + 1) * period / 4, epsabs=0, epsrel=1e-13)[0]
        for q in range(4)
    ]  # split at the zeros of cos, where |cos|^alpha has a kink
    p_igse = sum(pieces) / period
    p_steinmetz = mg.core_loss_density_steinmetz(f, b_pk, k=k, alpha=alpha, beta=beta)
    assert_allclose(p_steinmetz, k * f**alpha * b_pk**beta, rtol=1e-15)
    assert_allclose(p_igse, p_steinmetz, rtol=1e-10)


def _igse_of_samples(t, b, k_i, alpha, beta):
    """(1/T) int k_i |dB/dt|^alpha (Delta B)^(beta - alpha) dt over one period of samples.

    Rates from the differences of consecutive samples: exact for a piecewise-linear waveform
    whose breakpoints fall on samples.
    """
    dt = np.diff(t)
    rate = np.abs(np.diff(b)) / dt
    swing = b.max() - b.min()
    return k_i * swing ** (beta - alpha) * np.sum(rate**alpha * dt) / (t[-1] - t[0])


@pytest.mark.parametrize(("alpha", "beta"), [(1.2, 2.3), (1.6, 2.8), (2.0, 2.5)])
@pytest.mark.parametrize("duty", [0.2, 0.5, 0.73])
def test_igse_ccm_triangle_against_sampled_waveform(duty, alpha, beta):
    # Source: REFERENCES 4.2 (derived from the iGSE of Venkatachalam et al. 2002):
    # P = k_i Delta B^beta f^alpha [D^(1 - alpha) + (1 - D)^(1 - alpha)], checked against the
    # iGSE integral over a sampled triangle (breakpoint on a sample: exact to rounding).
    k, f, delta_b = 2.1, 80e3, 0.12
    n = 10000
    t = np.linspace(0.0, 1.0 / f, n + 1)
    b = np.interp(t, [0.0, duty / f, 1.0 / f], [0.0, delta_b, 0.0])
    k_i = mg.igse_coefficient(k, alpha=alpha, beta=beta)
    got = mg.core_loss_density_igse_ccm(delta_b, duty=duty, fsw=f, k=k, alpha=alpha, beta=beta)
    assert_allclose(got, _igse_of_samples(t, b, k_i, alpha, beta), rtol=1e-9)
    closed = k_i * delta_b**beta * f**alpha * (duty ** (1 - alpha) + (1 - duty) ** (1 - alpha))
    assert_allclose(got, closed, rtol=1e-13)


@pytest.mark.parametrize(("duty", "d2"), [(0.2, 0.3), (0.45, 0.1), (0.3, 0.7)])
def test_igse_dcm_three_segments_against_sampled_waveform(duty, d2):
    # Source: REFERENCES 4.2 / SPEC 2.4 (derived from the iGSE): rise over D, fall over D2,
    # flat: P = k_i Delta B^beta f^alpha [D^(1 - alpha) + D2^(1 - alpha)], against the iGSE
    # integral over a sampled waveform (breakpoints on samples).
    k, f, delta_b, alpha, beta = 2.1, 120e3, 0.09, 1.45, 2.6
    n = 10000
    t = np.linspace(0.0, 1.0 / f, n + 1)
    b = np.interp(t, [0.0, duty / f, (duty + d2) / f, 1.0 / f], [0.0, delta_b, 0.0, 0.0])
    k_i = mg.igse_coefficient(k, alpha=alpha, beta=beta)
    got = mg.core_loss_density_igse_dcm(
        delta_b, duty=duty, d2=d2, fsw=f, k=k, alpha=alpha, beta=beta
    )
    assert_allclose(got, _igse_of_samples(t, b, k_i, alpha, beta), rtol=1e-9)
    closed = k_i * delta_b**beta * f**alpha * (duty ** (1 - alpha) + d2 ** (1 - alpha))
    assert_allclose(got, closed, rtol=1e-13)


def test_igse_dcm_at_boundary_equals_ccm():
    # With D + D2 = 1 the flat segment vanishes and the waveform is the CCM triangle.
    args = {"fsw": 100e3, "k": 5.0, "alpha": 1.4, "beta": 2.7}
    assert_allclose(
        mg.core_loss_density_igse_dcm(0.1, duty=0.35, d2=0.65, **args),
        mg.core_loss_density_igse_ccm(0.1, duty=0.35, **args),
        rtol=1e-14,
    )


@pytest.mark.parametrize(("alpha", "ratio"), [(1.0, 1.0), (2.0, 8 / np.pi**2)])
def test_triangle_to_sine_ratio_at_half_duty(alpha, ratio):
    # Source: REFERENCES 4.2 (derived): at D = 0.5 and equal peak flux,
    # P_tri/P_sin = 4^alpha/[(2 pi)^(alpha - 1) int |cos|^alpha] = 1 (alpha = 1), 8/pi^2
    # (alpha = 2), whatever beta.
    f, b_pk, k = 50e3, 0.1, 7.0
    for beta in (2.0, 2.6):
        tri = mg.core_loss_density_igse_ccm(2 * b_pk, duty=0.5, fsw=f, k=k, alpha=alpha, beta=beta)
        sine = mg.core_loss_density_steinmetz(f, b_pk, k=k, alpha=alpha, beta=beta)
        assert_allclose(tri / sine, ratio, rtol=1e-14)


def test_igse_general_segment_rules():
    # The general piecewise-linear form of the iGSE (Venkatachalam et al. 2002).
    # Reference: the iGSE's definition integrated independently, P_v = (1/T) ∫ k_i |dB/dt|^α
    # ΔB^(β-α) dt with k_i = k / ((2π)^(α-1) ∫_0^2π |cos θ|^α 2^(β-α) dθ) (Venkatachalam,
    # Sullivan, Abdallah, Tacca, COMPEL 2002, eqs. 8-9; the θ integral by scipy.integrate.quad).
    # For a triangle of peak-to-peak ΔB rising over D·T and falling over (1 - D)·T the slopes
    # are constant, so P_v = k_i ΔB^β f^α (D^(1-α) + (1 - D)^(1-α)) (hand integration).
    from scipy.integrate import quad

    f, k, a, b_exp = 100e3, 5.0, 1.4, 2.7
    args = {"fsw": f, "k": k, "alpha": a, "beta": b_exp}
    theta, _ = quad(lambda t: abs(np.cos(t)) ** a * 2 ** (b_exp - a), 0.0, 2 * np.pi, limit=200)
    k_i = k / ((2 * np.pi) ** (a - 1) * theta)
    reference = k_i * 0.1**b_exp * f**a * (0.3 ** (1 - a) + 0.7 ** (1 - a))
    ccm = mg.core_loss_density_igse_ccm(0.1, duty=0.3, **args)
    assert_allclose(ccm, reference, rtol=1e-9)
    # The general form on signed or magnitude changes: the same reference.
    assert_allclose(mg.core_loss_density_igse([0.1, 0.1], [0.3, 0.7], **args), reference, rtol=1e-9)
    # A zero-length flat segment contributes nothing and divides by nothing.
    assert_allclose(
        mg.core_loss_density_igse([0.1, 0.0, -0.1], [0.3, 0.0, 0.7], **args), reference, rtol=1e-9
    )
    # A flat segment of finite length (DCM idle) adds no loss: rising over 0.3 T, falling
    # over 0.5 T, flat for 0.2 T: P_v = k_i ΔB^β f^α (0.3^(1-α) + 0.5^(1-α)) by the same
    # integration
    idle = k_i * 0.1**b_exp * f**a * (0.3 ** (1 - a) + 0.5 ** (1 - a))
    assert_allclose(
        mg.core_loss_density_igse([0.1, -0.1, 0.0], [0.3, 0.5, 0.2], **args), idle, rtol=1e-9
    )
    # A flux step (zero duration, nonzero change) needs infinite voltage: undefined.
    assert np.isnan(mg.core_loss_density_igse([0.1, -0.1], [0.0, 1.0], **args))
    assert np.isnan(mg.core_loss_density_igse_ccm(0.1, duty=0.0, **args))
    # Durations summing to more than one period, or negative: undefined.
    assert np.isnan(mg.core_loss_density_igse([0.1, -0.1], [0.6, 0.6], **args))
    assert np.isnan(mg.core_loss_density_igse_dcm(0.1, duty=0.6, d2=0.5, **args))
    assert np.isnan(mg.core_loss_density_igse([0.1, -0.1], [-0.1, 0.6], **args))
    # No swing, no loss.
    assert mg.core_loss_density_igse([0.0, 0.0], [0.5, 0.5], **args) == 0.0
    assert mg.core_loss_density_igse_ccm(0.0, duty=0.0, **args) == 0.0


def test_core_loss_temperature_factor_by_hand():
    # Common practice (parabolic temperature factor of ferrite loss). Hand calculation with
    # ct0 = 2.0, ct1 = 0.025 /K, ct2 = 1.25e-4 /K2: at 100 degC 2.0 - 2.5 + 1.25 = 0.75, and
    # the minimum lies at ct1/(2 ct2) = 100 degC.
    coeffs = {"ct0": 2.0, "ct1": 0.025, "ct2": 1.25e-4}
    assert_allclose(mg.core_loss_temperature_factor(100.0, **coeffs), 0.75, rtol=1e-15)
    t = np.linspace(20.0, 180.0, 161)
    factor = mg.core_loss_temperature_factor(t, **coeffs)
    assert t[np.argmin(factor)] == 100.0
    assert_allclose(
        mg.core_loss_temperature_factor(25.0, **coeffs), 2.0 - 0.625 + 0.078125, rtol=1e-15
    )


def test_steinmetz_k_conversion_from_mw_cm3_khz_mt():
    # Unit algebra (derivation in the docstring): P[mW/cm3] = k f[kHz]^alpha B[mT]^beta, and
    # 1 mW/cm3 = 1e3 W/m3. Both forms evaluated at f = 200 kHz, B = 50 mT.
    k_mw, alpha, beta = 4.2e-3, 1.45, 2.6
    f_hz, b_t = 200e3, 0.05
    p_mw_cm3 = k_mw * (f_hz / 1e3) ** alpha * (b_t * 1e3) ** beta
    k_si = mg.steinmetz_k_from_mw_cm3(k_mw, alpha=alpha, beta=beta)
    p_si = mg.core_loss_density_steinmetz(f_hz, b_t, k=k_si, alpha=alpha, beta=beta)
    assert_allclose(p_si, p_mw_cm3 * 1e3, rtol=1e-13)


def test_flux_density_by_hand():
    # Faraday's law (REFERENCES 12; Erickson & Maksimovic, inductor-design chapter):
    # Delta B = L Delta i/(N Ae). Hand calculation: 22 uH * 2 A / (14 * 125 mm2)
    # = 44e-6 / 1.75e-3 = 0.025142857 T.
    got = mg.flux_density_swing(22e-6, 2.0, turns=14, ae=125e-6)
    assert_allclose(got, 0.025142857, rtol=1e-8)
    # Same swing from the volt-seconds: V t_on/(N Ae) with V t_on = L Delta i.
    v, t_on = 11.0, 4e-6  # 11 V * 4 us = 44 uV s = 22 uH * 2 A
    assert_allclose(got, v * t_on / (14 * 125e-6), rtol=1e-14)
    assert_allclose(
        mg.peak_flux_density(22e-6, 9.0, turns=14, ae=125e-6),
        22e-6 * 9.0 / (14 * 125e-6),
        rtol=1e-15,
    )
    assert np.isnan(mg.peak_flux_density(22e-6, 9.0, turns=0, ae=125e-6))


# ---------------------------------------------------------------------------------------------
# Contracts: broadcasting and import cost

ROW = np.array([[0.4], [1.3], [2.2]])  # shape (3, 1)
COL = np.array([[1.0, 2.0, 3.0, 5.0]])  # shape (1, 4)

BROADCAST_CASES = {
    "copper_resistance_at": lambda a, b: mg.copper_resistance_at(a, 20.0 + 30.0 * b, t_ref=b),
    "copper_resistivity_at": lambda a, b: mg.copper_resistivity_at(40.0 * a, conductivity=b / 5),
    "skin_depth": lambda a, b: mg.skin_depth(1e5 * a, resistivity=RHO20, mu_r=b),
    "ac_resistance_factor_dowell": lambda a, b: mg.ac_resistance_factor_dowell(a, layers=b),
    "foil_equivalent_delta": lambda a, b: mg.foil_equivalent_delta(
        1e-3 * a, skin_depth=2e-4 * b, porosity=0.8
    ),
    "dowell_delta_from_factor": lambda a, b: mg.dowell_delta_from_factor(1 + a, layers=b),
    "ac_resistance_factor_isolated_wire": lambda a, b: mg.ac_resistance_factor_isolated_wire(
        1e-3 * a, skin_depth=1e-4 * b
    ),
    "copper_ac_loss_dowell": lambda a, b: mg.copper_ac_loss_dowell(
        0.01 * b,
        np.asarray(a)[..., np.newaxis] / np.arange(1, 8) ** 2,
        delta1=a,
        layers=b,
    ),
    "igse_coefficient": lambda a, b: mg.igse_coefficient(b, alpha=1 + a / 3, beta=2 + a / b),
    "core_loss_density_steinmetz": lambda a, b: mg.core_loss_density_steinmetz(
        1e5 * a, 0.02 * b, k=3.0, alpha=1.4, beta=2.5
    ),
    "core_loss_density_igse": lambda a, b: mg.core_loss_density_igse(
        np.stack(np.broadcast_arrays(0.05 * a, -0.05 * a, 0 * b), axis=-1),
        np.stack(np.broadcast_arrays(0.3 + 0 * a, 0.1 * b, 0 * b), axis=-1),
        fsw=1e5 * b,
        k=3.0,
        alpha=1.4,
        beta=2.5,
    ),
    "core_loss_density_igse_ccm": lambda a, b: mg.core_loss_density_igse_ccm(
        0.05 * a, duty=b / 6, fsw=1e5, k=3.0, alpha=1.4, beta=2.5
    ),
    "core_loss_density_igse_dcm": lambda a, b: mg.core_loss_density_igse_dcm(
        0.05 * a, duty=0.3, d2=b / 10, fsw=1e5, k=3.0, alpha=1 + a / 3, beta=2.5
    ),
    "core_loss_temperature_factor": lambda a, b: mg.core_loss_temperature_factor(
        50 * a, ct0=b, ct1=0.02, ct2=1e-4
    ),
    "steinmetz_k_from_mw_cm3": lambda a, b: mg.steinmetz_k_from_mw_cm3(
        b, alpha=1 + a / 3, beta=2.5
    ),
    "flux_density_swing": lambda a, b: mg.flux_density_swing(1e-5 * a, b, turns=10, ae=1e-4),
    "peak_flux_density": lambda a, b: mg.peak_flux_density(1e-5, a, turns=b, ae=1e-4),
}


def test_every_public_function_has_a_broadcast_case():
    assert set(BROADCAST_CASES) == set(mg.__all__)


@pytest.mark.parametrize("name", sorted(BROADCAST_CASES))
def test_grid_equals_point_by_point(name):
    # Contract (DEVELOPERS.md): a 2-D grid result equals point-by-point evaluation.
    func = BROADCAST_CASES[name]
    grid = func(ROW, COL)
    assert grid.shape == (3, 4)
    points = np.array(
        [[func(ROW[i, 0], COL[0, j]) for j in range(COL.shape[1])] for i in range(ROW.shape[0])]
    )
    assert np.all(np.isfinite(grid))
    assert_allclose(grid, points, rtol=1e-14, atol=0)


def test_import_does_not_load_scipy():
    # The command line must start fast: scipy is imported inside the functions that need it.
    code = "import sys, lossbudget.losses.magnetics; print('scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
