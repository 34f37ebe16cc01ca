"""Steady states of the three stages against the textbook ratios, ripples and boundaries.

Source throughout: R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed.,
Kluwer, 2001: ch. 2 (CCM conversion ratios M(D) and inductor ripple; the book writes the ripple
as half the peak-to-peak value, converted here), ch. 3 (boost with inductor resistance),
ch. 5 (DCM ratios and K_crit; table number from memory — verify).
"""

from __future__ import annotations

import numpy as np
import pytest

from lossbudget.topologies import STAGES

TINY = 1e-9  # ohm: parasitics small enough to leave the ideal ratios to 1e-6


def _solve(topology, *, vin, vc, i_out, l=22e-6, fsw=200e3, r=TINY, r_l=None, vf0=0.0,
           dcm=True):
    return STAGES[topology](vin=vin, vc=vc, i_out=i_out, fsw=fsw, l=l, r_sw=r,
                            r_l=r if r_l is None else r_l, r_rect=r, vf0=vf0, p_edge=0.0,
                            dcm_allowed=dcm)


@pytest.mark.parametrize(("topology", "vin", "vc", "m_of_d"), [
    ("boost", 24.0, 48.0, lambda d: 1 / (1 - d)),
    ("buck", 48.0, 12.0, lambda d: d),
    ("buck-boost", 12.0, 15.0, lambda d: d / (1 - d)),
])
def test_ccm_ratio_and_ripple(topology, vin, vc, m_of_d):
    s = _solve(topology, vin=vin, vc=vc, i_out=np.array([3.0, 5.0]))
    assert not s.dcm.any()
    np.testing.assert_allclose(m_of_d(s.duty), vc / vin, rtol=1e-6)
    d = s.duty
    # peak-to-peak ripple: buck (Vin − V)·D/(L f); boost and buck-boost Vin·D/(L f)
    expected = ((vin - vc) if topology == "buck" else vin) * d / (22e-6 * 200e3)
    np.testing.assert_allclose(s.delta_i, expected, rtol=1e-6)


@pytest.mark.parametrize(("topology", "vin", "vc", "m_dcm"), [
    ("boost", 24.0, 48.0, lambda d, k: (1 + np.sqrt(1 + 4 * d * d / k)) / 2),
    ("buck", 48.0, 12.0, lambda d, k: 2 / (1 + np.sqrt(1 + 4 * k / (d * d)))),
    ("buck-boost", 12.0, 15.0, lambda d, k: d / np.sqrt(k)),
])
def test_dcm_ratio(topology, vin, vc, m_dcm):
    i_out = np.array([0.05, 0.2])
    s = _solve(topology, vin=vin, vc=vc, i_out=i_out)
    assert s.dcm.all()
    k = 2 * 22e-6 * 200e3 / (vc / i_out)  # K = 2L/(R·Ts)
    np.testing.assert_allclose(m_dcm(s.duty, k), vc / vin, rtol=1e-6)


@pytest.mark.parametrize(("topology", "vin", "vc", "k_crit"), [
    ("boost", 24.0, 48.0, lambda d: d * (1 - d) ** 2),
    ("buck", 48.0, 12.0, lambda d: 1 - d),
    ("buck-boost", 12.0, 15.0, lambda d: (1 - d) ** 2),
])
def test_mode_boundary_k_crit(topology, vin, vc, k_crit):
    m = vc / vin
    d = {"boost": 1 - 1 / m, "buck": m, "buck-boost": m / (1 + m)}[topology]
    r_crit = 2 * 22e-6 * 200e3 / k_crit(d)  # the load resistance at K = K_crit
    i_crit = vc / r_crit
    s = _solve(topology, vin=vin, vc=vc, i_out=np.array([0.98 * i_crit, 1.02 * i_crit]))
    assert s.dcm.tolist() == [True, False]
    # at the boundary the DCM ratio equals the CCM one: both branches meet
    near = _solve(topology, vin=vin, vc=vc, i_out=np.array([0.9999 * i_crit, 1.0001 * i_crit]))
    np.testing.assert_allclose(near.duty[0], near.duty[1], rtol=1e-3)


def test_boost_with_inductor_resistance():
    """M = (1/(1−D))·1/(1 + R_L/((1−D)²R)) (ch. 3), duty found back from the solved point."""
    r_l, r_load, vin = 0.2, 20.0, 12.0
    vc = np.array([20.0, 30.0, 40.0])
    s = _solve("boost", vin=vin, vc=vc, i_out=vc / r_load, r=TINY, r_l=r_l, l=1e-3)
    d1 = 1 - s.duty
    m = (1 / d1) / (1 + r_l / (d1 * d1 * r_load))
    np.testing.assert_allclose(m, vc / vin, rtol=1e-9)


def test_boost_gain_ceiling_is_infeasible_beyond_it():
    """M_max = ½·√(R/R_L) (derived from ch. 3, REFERENCES §8.3): beyond it no duty works."""
    r_l, r_load, vin = 0.5, 50.0, 10.0
    m_max = 0.5 * np.sqrt(r_load / r_l)
    vc = vin * np.array([0.97 * m_max, 1.03 * m_max])
    s = _solve("boost", vin=vin, vc=vc, i_out=vc / r_load, r_l=r_l, l=1e-2, dcm=False)
    assert s.infeasible.tolist() == [False, True]
    assert "cannot deliver" in s.reason[1]


def _sampled(t_on: float, start: float, end: float, n: int = 400_000) -> np.ndarray:
    """A current sampled over one period (midpoints): a ramp from ``start`` to ``end`` over the
    first ``t_on`` of the period (a fraction), zero after it."""
    t = (np.arange(n) + 0.5) / n
    return np.where(t < t_on, start + (end - start) * t / t_on, 0.0)


def test_rms_of_the_waveforms_against_sampled_currents():
    """The stage's switch, rectifier and capacitor currents against the same ideal CCM
    currents drawn by hand and sampled at 400,000 points (midpoint rule, error ~1e-11): buck
    48 V -> 12 V, D = 1/4, ripple (48 - 12) V·D/(L·f); boost 24 V -> 48 V, D = 1/2, ripple
    24 V·D/(L·f), inductor current I_o/(1 - D) ([EM] ch. 2: the ideal CCM waveforms). The
    input bank of the buck carries the switch current less its mean, the output bank of the
    boost the diode current less I_o (charge balance, [EM] ch. 2)."""
    l, f = 22e-6, 200e3
    b = _solve("buck", vin=48.0, vc=12.0, i_out=5.0)
    di = (48.0 - 12.0) * 0.25 / (l * f)
    i_sw = _sampled(0.25, 5.0 - di / 2, 5.0 + di / 2)
    np.testing.assert_allclose(b.i_switch.mean(), i_sw.mean(), rtol=1e-6)
    np.testing.assert_allclose(b.i_switch.mean_square(), np.mean(i_sw**2), rtol=1e-6)
    ac_in = b.i_in_wave.mean_square() - b.i_in_wave.mean() ** 2
    np.testing.assert_allclose(ac_in, np.var(i_sw), rtol=1e-6)
    # rectifier: the falling ramp over the rest of the period
    i_d = _sampled(0.75, 5.0 + di / 2, 5.0 - di / 2)
    np.testing.assert_allclose(b.i_rect.mean_square(), np.mean(i_d**2), rtol=1e-6)

    s = _solve("boost", vin=24.0, vc=48.0, i_out=4.0)
    di = 24.0 * 0.5 / (l * f)
    i_l = 4.0 / 0.5
    i_diode = _sampled(0.5, i_l + di / 2, i_l - di / 2)
    np.testing.assert_allclose(s.i_rect.mean(), 4.0, rtol=1e-6)
    np.testing.assert_allclose(s.i_rect.mean_square(), np.mean(i_diode**2), rtol=1e-6)
    ac_out = s.i_out_wave.mean_square() - s.i_out_wave.mean() ** 2
    np.testing.assert_allclose(ac_out, np.var(i_diode), rtol=1e-6)
    i_switch = _sampled(0.5, i_l - di / 2, i_l + di / 2)
    np.testing.assert_allclose(s.i_switch.mean_square(), np.mean(i_switch**2), rtol=1e-6)


def test_edge_charge_gap_carries_the_edge_power():
    """The boost draws edge losses through the inductor: I_L rises by about P_edge/V_in and the
    rectifier still delivers exactly the output current (charge balance, [EM] ch. 2)."""
    base = _solve("boost", vin=24.0, vc=48.0, i_out=4.0)
    p_edge = 2.0
    s = STAGES["boost"](vin=24.0, vc=48.0, i_out=4.0, fsw=200e3, l=22e-6, r_sw=TINY, r_l=TINY,
                        r_rect=TINY, vf0=0.0, p_edge=p_edge, dcm_allowed=True)
    np.testing.assert_allclose(s.i_rect.mean(), 4.0, rtol=1e-9)
    np.testing.assert_allclose(24.0 * (s.i_l.mean() - base.i_l.mean()), p_edge, rtol=1e-6)


@pytest.mark.parametrize("i_out", [0.05, 0.2, 4.0])
def test_boost_energy_with_edge_power_and_diode_drop(i_out):
    """Energy conservation at the stage's terminals with negligible resistances: the input
    power Vin·<I_L> equals Vout·I_out + Vf0·I_out + P_edge, in DCM (light load) and in CCM;
    the edge power's extra inductor charge reaches the output node without crossing the diode
    ([EM] ch. 2 charge balance; the first law). Before the fix the DCM branch charged the
    diode drop on the edge charge too (about Vf0·P_edge/Vout too much input power)."""
    p_edge, vf0 = 0.3, 0.5
    s = STAGES["boost"](vin=24.0, vc=48.0, i_out=i_out, fsw=200e3, l=22e-6, r_sw=TINY, r_l=TINY,
                        r_rect=TINY, vf0=vf0, p_edge=p_edge, dcm_allowed=True)
    assert bool(s.dcm) == (i_out < 1.0)
    np.testing.assert_allclose(24.0 * s.i_l.mean(), (48.0 + vf0) * i_out + p_edge, rtol=1e-6)
