"""Self-checks of the exact switched-circuit reference solver (tests/reference_circuit.py).

The solver is the outside check of the engine, so it is checked here against conservation of
energy, against the textbook steady-state results in their limits of validity, and against a
second integration method (scipy's Simpson rule on its sampled waveforms). "Near ideal" below
means every resistance 1e-6 ohm and C = 1 F: the neglected loss terms are of order
r/R = 1e-7 times gain factors below 10, and the relative output ripple D T/(R C) is below
1e-6, so a textbook ratio derived for lossless, ripple-free operation holds to a few 1e-6;
the tolerance 2e-5 leaves a margin of about five.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate

from tests.reference_circuit import regulate, solve_periodic, waveform

TOPOLOGIES = ("boost", "buck", "buck-boost")
RECTIFIERS = ("diode", "sync", "sync-emulated")
T_S = 10e-6  # switching period [s]
VIN = 10.0
R_TINY = 1e-6
NEAR_IDEAL_RTOL = 2e-5  # see the module docstring


def near_ideal(**over):
    """Keyword arguments of a near-ideal circuit, with overrides."""
    kw = {
        "vin": VIN,
        "fsw": 1.0 / T_S,
        "l": 100e-6,
        "dcr": R_TINY,
        "c": 1.0,
        "esr": R_TINY,
        "r_load": 10.0,
        "r_switch": R_TINY,
        "vf0": 0.0,
        "rd": R_TINY,
        "r_sync": R_TINY,
    }
    kw.update(over)
    return kw


def lossy(**over):
    """Keyword arguments of a circuit with every parasitic large enough to matter."""
    kw = {
        "vin": 12.0,
        "fsw": 200e3,
        "l": 15e-6,
        "dcr": 0.04,
        "c": 47e-6,
        "esr": 0.02,
        "r_load": 8.0,
        "r_switch": 0.03,
        "vf0": 0.45,
        "rd": 0.03,
        "r_sync": 0.02,
    }
    kw.update(over)
    return kw


def ccm_ratio(topology, d):
    """Source: Erickson & Maksimovic, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 2:
    M = 1/(1-D) (boost), D (buck), D/(1-D) (inverting buck-boost, magnitude)."""
    return {"boost": 1.0 / (1.0 - d), "buck": d, "buck-boost": d / (1.0 - d)}[topology]


def k_crit(topology, d):
    """Source: Erickson & Maksimovic 2001, ch. 5, table of CCM/DCM characteristics (table
    number 5.2 from memory -- verify): K_crit = D(1-D)^2, 1-D, (1-D)^2."""
    return {"boost": d * (1 - d) ** 2, "buck": 1 - d, "buck-boost": (1 - d) ** 2}[topology]


def dcm_ratio(topology, d, k):
    """Source: Erickson & Maksimovic 2001, ch. 5, same table (number from memory -- verify):
    M = (1 + sqrt(1 + 4D^2/K))/2 (boost), 2/(1 + sqrt(1 + 4K/D^2)) (buck), D/sqrt(K)
    (inverting buck-boost, magnitude); K = 2L/(R T)."""
    if topology == "boost":
        return (1.0 + np.sqrt(1.0 + 4.0 * d**2 / k)) / 2.0
    if topology == "buck":
        return 2.0 / (1.0 + np.sqrt(1.0 + 4.0 * k / d**2))
    return d / np.sqrt(k)


def energy_residual(s):
    return s.pin - (s.pout + s.loss_switch + s.loss_rectifier + s.loss_dcr + s.loss_esr)


# --------------------------------------------------------------------------- invariants


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", RECTIFIERS)
@pytest.mark.parametrize("r_load", [8.0, 400.0])  # heavy load (CCM) and light load
def test_energy_is_conserved(topology, rectifier, r_load):
    # Source: conservation of energy; over one period of the steady state the stored energy
    # returns to its start, so the source power equals the load power plus the losses.
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=0.4, **lossy(r_load=r_load))
    assert s.pout > 0.0
    assert abs(energy_residual(s)) <= 1e-9 * s.pin
    # Hand calculation: K = 2 L fsw / R = 0.75 at 8 ohm, above K_crit(0.4) = 0.144, 0.6, 0.36
    # (boost, buck, buck-boost; Erickson & Maksimovic 2001, ch. 5), and 0.015 at 400 ohm,
    # below them: DCM with the diode and the emulated sync, never with the forced sync.
    expected = "DCM" if (r_load > 100.0 and rectifier != "sync") else "CCM"
    assert s.mode == expected


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", RECTIFIERS)
def test_state_is_periodic(topology, rectifier):
    # Source: definition of the periodic steady state, x(T) = x(0). The sample at T is
    # propagated through every interval from x(0), so it does not assume the result.
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=0.35, **lossy(r_load=60.0))
    w = waveform(s, 64, endpoint=True)
    assert w.t[-1] == pytest.approx(T_S / 2.0, rel=1e-12)  # fsw = 200 kHz
    i_scale = max(abs(s.i_l_pk), abs(s.i_l_valley))
    assert abs(w.i_l[-1] - w.i_l[0]) <= 1e-9 * i_scale
    assert abs(w.v_c[-1] - w.v_c[0]) <= 1e-9 * abs(w.v_c[0])


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", RECTIFIERS)
def test_currents_add_up(topology, rectifier):
    # Source: Kirchhoff's current law (common practice): the inductor current is carried by
    # the switch or the rectifier (or is zero), and the capacitor carries no mean current.
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=0.45, **lossy(r_load=80.0))
    assert_allclose(s.i_switch_avg + s.i_rect_avg, s.i_l_avg, rtol=1e-10)
    assert_allclose(s.i_switch_rms**2 + s.i_rect_rms**2, s.i_l_rms**2, rtol=1e-10)
    feed = s.i_l_avg if topology == "buck" else s.i_rect_avg
    assert_allclose(feed, s.iout_avg, rtol=1e-9)
    source = s.i_l_avg if topology == "boost" else s.i_switch_avg
    assert_allclose(source, s.iin_avg, rtol=1e-12)


# --------------------------------------------------------------------------- textbook CCM


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", ["sync", "diode"])
def test_near_ideal_ccm_ratio_and_ripple(topology, rectifier):
    d = 0.4
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=d, **near_ideal())
    m = ccm_ratio(topology, d)
    assert s.mode == "CCM"
    assert_allclose(s.vout_avg, m * VIN, rtol=NEAR_IDEAL_RTOL)
    # Source: Erickson & Maksimovic 2001, ch. 2, inductor ripple, converted to peak-to-peak:
    # Vin D/(L f) (boost, buck-boost), (Vin - Vout) D/(L f) (buck).
    v_l_on = VIN - m * VIN if topology == "buck" else VIN
    assert_allclose(s.i_l_pk - s.i_l_valley, v_l_on * d * T_S / 100e-6, rtol=NEAR_IDEAL_RTOL)
    assert_allclose(s.d2, 1.0 - d, rtol=1e-12)


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_near_ideal_ccm_rms_currents(topology):
    # Source: Erickson & Maksimovic 2001, Appendix A (RMS of a ramp segment):
    # I_rms^2 = delta (I_m^2 + dI^2/12) over a fraction delta of the period.
    d = 0.3
    s = solve_periodic(topology=topology, rectifier="sync", duty=d, **near_ideal())
    i_o = ccm_ratio(topology, d) * VIN / 10.0
    i_l = i_o if topology == "buck" else i_o / (1.0 - d)
    v_l_on = VIN * (1.0 - d) if topology == "buck" else VIN
    di = v_l_on * d * T_S / 100e-6
    rtol = NEAR_IDEAL_RTOL
    assert_allclose(s.i_l_avg, i_l, rtol=rtol)
    assert_allclose(s.i_l_rms, np.sqrt(i_l**2 + di**2 / 12.0), rtol=rtol)
    assert_allclose(s.i_switch_rms, np.sqrt(d * (i_l**2 + di**2 / 12.0)), rtol=rtol)
    assert_allclose(s.i_rect_rms, np.sqrt((1 - d) * (i_l**2 + di**2 / 12.0)), rtol=rtol)
    # Capacitor RMS: /work/shared/REFERENCES.md §7.1, derived from the same ramp RMS and
    # Kirchhoff's current law: dI/sqrt(12) (buck), sqrt(I_o^2 D/(1-D) + (1-D) dI^2/12) (others).
    if topology == "buck":
        i_cap = di / np.sqrt(12.0)
    else:
        i_cap = np.sqrt(i_o**2 * d / (1 - d) + (1 - d) * di**2 / 12.0)
    assert_allclose(s.i_cap_rms, i_cap, rtol=rtol)


@pytest.mark.parametrize("topology", ["buck", "boost"])
def test_output_ripple_of_the_capacitor(topology):
    # Source: Erickson & Maksimovic 2001, ch. 2, capacitor ripple, peak-to-peak:
    # buck dV = dI/(8 f C); boost dV = I_o D/(f C) (location from memory -- verify).
    # ESR 0. The formulas take the load current (boost) or the ripple current into C (buck)
    # as ideal; the neglected part is of the order of the relative ripple, below 1e-4 here,
    # hence rtol 1e-3.
    d, c = 0.4, 10e-3
    s = solve_periodic(topology=topology, rectifier="sync", duty=d, **near_ideal(c=c, esr=0.0))
    if topology == "buck":
        di = (VIN - d * VIN) * d * T_S / 100e-6
        expected = di * T_S / (8.0 * c)
    else:
        i_o = VIN / (1.0 - d) / 10.0
        expected = i_o * d * T_S / c
    assert s.vout_pp / s.vout_avg < 1e-4
    assert_allclose(s.vout_pp, expected, rtol=1e-3)


def test_boost_with_inductor_resistance():
    # Source: Erickson & Maksimovic 2001, ch. 3 (equivalent circuit with inductor copper
    # loss): M = (1/(1-D)) / (1 + R_L/((1-D)^2 R)), eta = 1/(1 + R_L/((1-D)^2 R)).
    # Small-ripple result: the neglected terms are of second order in the relative ripple,
    # (dI/I_L)^2 <= 1e-4 with L = 1 mH (dI/I_L about 0.0096, printed below), so rtol 1e-4;
    # a second circuit with ten times the inductance must come ten times closer or better.
    d, r_l, r = 0.6, 0.2, 10.0
    m = (1.0 / (1.0 - d)) / (1.0 + r_l / ((1.0 - d) ** 2 * r))
    eta = 1.0 / (1.0 + r_l / ((1.0 - d) ** 2 * r))
    errors = []
    for l in (1e-3, 10e-3):
        kw = near_ideal(l=l, dcr=r_l, esr=0.0, r_switch=0.0, r_sync=0.0, r_load=r)
        s = solve_periodic(topology="boost", rectifier="sync", duty=d, **kw)
        assert ((s.i_l_pk - s.i_l_valley) / s.i_l_avg) ** 2 <= 1e-4
        assert_allclose(s.vout_avg, m * VIN, rtol=1e-4)
        assert_allclose(s.pout / s.pin, eta, rtol=1e-4)
        errors.append(abs(s.vout_avg / (m * VIN) - 1.0))
    assert errors[1] <= 0.1 * errors[0]


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_conduction_drops_in_volt_second_balance(topology):
    # Source: volt-second and charge balance with conduction drops, by the method of
    # Erickson & Maksimovic 2001, ch. 3 (derived forms in /work/shared/REFERENCES.md §8.3):
    #   buck:       Vout = D Vin - I (D R_on + R_L) - (1-D) V_D
    #   boost:      Vin - I_L (R_L + D R_on + D' R_D) - D' (Vout + V_D) = 0, I_L = I_o/D'
    #   buck-boost: D (Vin - I_L R_on) - D' (Vout + V_D + I_L R_D) - I_L R_L = 0
    # Small-ripple forms: L = 1 mH and C = 1 F hold the relative ripples below 1e-2 and 1e-6;
    # the neglected terms are of second order, rtol 1e-4.
    d, r_on, r_l, v_d, r_d = 0.45, 0.05, 0.08, 0.5, 0.04
    rd = 0.0 if topology == "buck" else r_d  # the buck form has no diode slope
    kw = near_ideal(l=1e-3, dcr=r_l, esr=0.0, r_switch=r_on, vf0=v_d, rd=rd)
    s = solve_periodic(topology=topology, rectifier="diode", duty=d, **kw)
    assert s.mode == "CCM"
    dp = 1.0 - d
    r = 10.0
    if topology == "buck":
        # Vout (1 + (D R_on + R_L)/R) = D Vin - D' V_D
        v = (d * VIN - dp * v_d) / (1.0 + (d * r_on + r_l) / r)
    elif topology == "boost":
        # Vin - (V/(R D')) (R_L + D R_on + D' R_D) - D' V - D' V_D = 0
        v = (VIN - dp * v_d) / (dp + (r_l + d * r_on + dp * rd) / (r * dp))
    else:
        # D Vin - D' V_D - (V/(R D')) (D R_on + D' R_D + R_L) - D' V = 0
        v = (d * VIN - dp * v_d) / (dp + (d * r_on + dp * rd + r_l) / (r * dp))
    assert_allclose(s.vout_avg, v, rtol=1e-4)


# --------------------------------------------------------------------------- textbook DCM


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", ["diode", "sync-emulated"])
def test_near_ideal_dcm_ratio(topology, rectifier):
    d, r = 0.4, 10.0
    k = 0.3 * k_crit(topology, d)
    l = k * r * T_S / 2.0
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=d, **near_ideal(l=l))
    m = dcm_ratio(topology, d, k)
    assert s.mode == "DCM"
    assert_allclose(s.vout_avg, m * VIN, rtol=NEAR_IDEAL_RTOL)
    # Source: inductor volt-second balance in DCM (Erickson & Maksimovic 2001, ch. 5):
    # Vin D = (V - Vin) D2 (boost), (Vin - V) D = V D2 (buck), Vin D = V D2 (buck-boost).
    d2 = {"boost": d / (m - 1.0), "buck": d * (1.0 - m) / m, "buck-boost": d / m}[topology]
    assert_allclose(s.d2, d2, rtol=NEAR_IDEAL_RTOL)
    assert s.i_l_valley == pytest.approx(0.0, abs=1e-9 * s.i_l_pk)
    assert s.i_rect_rms > 0.0


@pytest.mark.parametrize("topology", TOPOLOGIES)
def test_forced_continuous_sync_stays_ccm(topology):
    # Source: Erickson & Maksimovic 2001, ch. 2 and ch. 5: with a switch that conducts both
    # ways the CCM ratio holds at any load; below K_crit the valley current is negative.
    d, r = 0.4, 10.0
    k = 0.3 * k_crit(topology, d)
    l = k * r * T_S / 2.0
    s = solve_periodic(topology=topology, rectifier="sync", duty=d, **near_ideal(l=l))
    assert s.mode == "CCM"
    assert s.i_l_valley < 0.0
    assert_allclose(s.vout_avg, ccm_ratio(topology, d) * VIN, rtol=NEAR_IDEAL_RTOL)


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize(("k_over_kcrit", "mode"), [(1.1, "CCM"), (0.9, "DCM")])
def test_mode_boundary(topology, k_over_kcrit, mode):
    # Source: Erickson & Maksimovic 2001, ch. 5: DCM with a diode when K < K_crit(D).
    d, r = 0.4, 10.0
    l = k_over_kcrit * k_crit(topology, d) * r * T_S / 2.0
    s = solve_periodic(topology=topology, rectifier="diode", duty=d, **near_ideal(l=l))
    assert s.mode == mode
    if mode == "CCM":
        assert_allclose(s.vout_avg, ccm_ratio(topology, d) * VIN, rtol=NEAR_IDEAL_RTOL)
        assert s.i_l_valley > 0.0


# --------------------------------------------------------------------------- second method


@pytest.mark.parametrize(("topology", "rectifier"), [("boost", "diode"), ("buck", "sync")])
@pytest.mark.parametrize("r_load", [8.0, 400.0])
def test_closed_form_integrals_match_simpson(topology, rectifier, r_load):
    # Source: scipy.integrate.simpson on 40001 samples of the exact waveforms (a second
    # integration method). ESR 0 keeps v_out continuous, so the rule converges as h^2 at the
    # slope breaks of the switching instants: about (1/40000)^2 relative, far below 1e-6.
    kw = lossy(r_load=r_load, esr=0.0)
    s = solve_periodic(topology=topology, rectifier=rectifier, duty=0.4, **kw)
    w = waveform(s, 40001, endpoint=True)
    f = 1.0 / w.t[-1]
    assert_allclose(f * integrate.simpson(w.i_l, x=w.t), s.i_l_avg, rtol=1e-6)
    assert_allclose(np.sqrt(f * integrate.simpson(w.i_l**2, x=w.t)), s.i_l_rms, rtol=1e-6)
    assert_allclose(f * integrate.simpson(w.v_out, x=w.t), s.vout_avg, rtol=1e-6)
    assert_allclose(f * integrate.simpson(w.v_out**2, x=w.t) / r_load, s.pout, rtol=1e-6)
    assert_allclose(kw["dcr"] * f * integrate.simpson(w.i_l**2, x=w.t), s.loss_dcr, rtol=1e-6)
    # The extrema: the samples never exceed them, and come within the sampling step.
    assert w.i_l.max() <= s.i_l_pk * (1 + 1e-12)
    assert w.i_l.min() >= s.i_l_valley - 1e-12 * s.i_l_pk
    assert_allclose(w.v_out.max() - w.v_out.min(), s.vout_pp, rtol=1e-3)


# --------------------------------------------------------------------------- regulation


@pytest.mark.parametrize("topology", TOPOLOGIES)
@pytest.mark.parametrize("rectifier", RECTIFIERS)
@pytest.mark.parametrize("r_load", [8.0, 400.0])
def test_regulate_hits_the_target(topology, rectifier, r_load):
    # Source: the definition of regulation; the target itself is the check value.
    target = 5.0 if topology == "buck" else 20.0
    s = regulate(vout=target, topology=topology, rectifier=rectifier, **lossy(r_load=r_load))
    assert abs(s.vout_avg - target) <= 1e-9 * target
    # Re-solving at the duty found gives the same circuit (no state carried over).
    again = solve_periodic(
        topology=topology, rectifier=rectifier, duty=s.duty, **lossy(r_load=r_load)
    )
    assert_allclose(again.vout_avg, s.vout_avg, rtol=1e-12)


def test_regulate_takes_the_lower_duty_branch_of_the_boost():
    # Source: /work/shared/REFERENCES.md §8.3, derived from Erickson & Maksimovic 2001, ch. 3:
    # with inductor resistance only, M = D'/(D'^2 + R_L/R) peaks at D' = sqrt(R_L/R) with
    # M_max = sqrt(R/R_L)/2 (small ripple; here 5.0 at D = 0.9).
    r_l, r = 0.1, 10.0
    kw = near_ideal(l=1e-3, dcr=r_l, esr=0.0, r_switch=0.0, r_sync=0.0, r_load=r)
    m_max, d_peak = 0.5 * np.sqrt(r / r_l), 1.0 - np.sqrt(r_l / r)
    target = 0.95 * m_max * VIN
    s = regulate(vout=target, topology="boost", rectifier="sync", **kw)
    assert abs(s.vout_avg - target) <= 1e-9 * target
    assert s.duty < d_peak
    # Hand calculation: M D'^2 - D' + M R_L/R = 0, whose larger root
    # D' = (1 + sqrt(1 - 4 M^2 R_L/R))/(2 M) is the lower duty; rtol 1e-3 for the small ripple.
    m_t = target / VIN
    dp = (1.0 + np.sqrt(1.0 - 4.0 * m_t**2 * r_l / r)) / (2.0 * m_t)
    assert_allclose(s.duty, 1.0 - dp, rtol=1e-3)
    with pytest.raises(ValueError, match="above the largest output"):
        regulate(vout=1.05 * m_max * VIN, topology="boost", rectifier="sync", **kw)


def test_regulate_refuses_a_buck_target_above_the_input():
    # Source: a buck cannot raise its input voltage (Erickson & Maksimovic 2001, ch. 2).
    with pytest.raises(ValueError, match="vout"):
        regulate(vout=1.01 * 12.0, topology="buck", rectifier="sync", **lossy())


def test_bad_arguments_are_refused():
    with pytest.raises(ValueError, match="duty"):
        solve_periodic(topology="boost", rectifier="diode", duty=1.0, **lossy())
    with pytest.raises(ValueError, match="topology"):
        solve_periodic(topology="flyback", rectifier="diode", duty=0.5, **lossy())
    with pytest.raises(ValueError, match="r_load"):
        solve_periodic(topology="buck", rectifier="sync", duty=0.5, **lossy(r_load=0.0))


@pytest.mark.parametrize(("d", "l"), [(0.001, 1e-6), (0.01, 10e-6)])
def test_deep_dcm_with_a_diode_drop(d, l):
    # Hand calculation, the DCM method of Erickson & Maksimovic 2001, ch. 5, lossless but for
    # the diode threshold: volt-second balance Vin D = (V + vf0) D2, charge balance
    # V/R = i_pk D2 / 2 with i_pk = Vin D T/L, so V (V + vf0) = Vin^2 D^2 / K and
    # V = (-vf0 + sqrt(vf0^2 + 4 Vin^2 D^2/K))/2 (inverting buck-boost, magnitude).
    vf0, r = 0.6, 10.0
    k = 2.0 * l / (r * T_S)
    s = solve_periodic(topology="buck-boost", rectifier="diode", duty=d, **near_ideal(l=l, vf0=vf0))
    v = (-vf0 + np.sqrt(vf0**2 + 4.0 * VIN**2 * d**2 / k)) / 2.0
    assert s.mode == "DCM"
    assert_allclose(s.vout_avg, v, rtol=NEAR_IDEAL_RTOL)
    assert_allclose(s.d2, VIN * d / (v + vf0), rtol=NEAR_IDEAL_RTOL)


def test_tiny_duty_with_a_large_diode_drop_is_solved():
    # A circuit whose DCM state lies outside the basin of Newton's first guesses (the
    # solver falls back to a bracketed root): the result must still conserve energy
    # (conservation of energy) and be periodic (definition of the steady state).
    kw = lossy(vin=5.8, fsw=275e3, l=2.7e-6, dcr=0.024, c=5.8e-6, esr=0.039, r_load=2.4)
    kw.update(r_switch=0.015, vf0=0.62, rd=0.06)
    s = solve_periodic(topology="buck-boost", rectifier="diode", duty=0.001, **kw)
    assert s.mode == "DCM"
    assert 0.0 < s.d2 < 0.999
    assert abs(energy_residual(s)) <= 1e-9 * s.pin
    w = waveform(s, 16, endpoint=True)
    assert abs(w.i_l[-1] - w.i_l[0]) <= 1e-9 * s.i_l_pk
    assert abs(w.v_c[-1] - w.v_c[0]) <= 1e-9 * w.v_c[0]
