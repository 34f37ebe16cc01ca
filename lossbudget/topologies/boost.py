"""Boost stage: regulated duty cycle, CCM/DCM and waveforms with conduction drops.

The inductor current is the input current. Edge losses (switching, node charge, recovery,
core) are charge drawn from the input through the inductor: they raise the inductor current,
so the rectifier conducts for slightly less than the falling slope (the gap).
"""

from __future__ import annotations

import numpy as np

from lossbudget.topologies.common import assemble, gap_fraction, ideal_duty_limit, limit_checks


def steady_state(
    *,
    vin,
    vc,
    i_out,
    fsw,
    l,
    r_sw,
    r_l,
    r_rect,
    vf0,
    p_edge,
    dcm_allowed,
    k_dt=0.0,
    max_duty=1.0,
    min_on_time=0.0,
    min_off_time=0.0,
):
    """Regulated steady state of a boost stage.

    Parameters
    ----------
    vin : array_like
        Input voltage at the stage (after any input resistor). [V]
    vc : array_like
        Output voltage at the output capacitors. [V]
    i_out : array_like
        Average current the rectifier delivers to the output node. [A]
    fsw : array_like
        Switching frequency. [Hz]
    l : array_like
        Inductance. [H]
    r_sw : array_like
        Resistance in the switch path (channel and series resistors). [ohm]
    r_l : array_like
        Resistance in the inductor path (winding and series resistors). [ohm]
    r_rect : array_like
        Resistance in the rectifier path (slope resistance or channel, series resistors). [ohm]
    vf0 : array_like
        Rectifier threshold voltage (0 for a synchronous rectifier). [V]
    p_edge : array_like
        Edge losses drawn through the inductor. [W]
    dcm_allowed : bool
        True for a diode or a diode-emulating synchronous rectifier. [-]
    k_dt : array_like
        Volt-second term of the body diode in the dead times, d_bd·Vsd. [V]
    max_duty : float
        Controller's maximum duty cycle. [-]
    min_on_time, min_off_time : float
        Controller's minimum on- and off-time. [s]

    Returns
    -------
    SteadyState
        Duty, mode, D2 and the component waveforms. [-]

    Notes
    -----
    CCM, with x = 1 − D, Q = I_out + P_edge/V_C the charge the falling slope carries and
    I_L = Q/x: volt-second balance
    V_in − I_L·R_L − D·I_L·R_sw − x·V_C − D_r·V_f0 − I_out·R_rect − k_dt = 0 with the
    rectifier's share D_r = x·I_out/Q gives −x²(V_C + I_out V_f0/Q) + x(V_in + Q R_sw −
    I_out R_rect − k_dt) − Q(R_L + R_sw) = 0, whose larger root is the normal branch.
    DCM: I_pk·L·f = (V_in − I_pk(R_L + R_sw)/2)·D
    = (V_C + s·V_f0 − V_in + I_pk(R_L + s·R_rect)/2)·D2 with the rectifier's share
    s = I_out/Q of the falling slope's charge (as in CCM), and ½·I_pk·D2 = Q, a quadratic in
    I_pk. At D + D2 = 1 it is the CCM solution at zero valley current, so the modes meet.
    Both reduce to M = 1/(1 − D) and the DCM ratio (1 + √(1 + 4D²/K))/2 without losses.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 (CCM), ch. 3 (boost with inductor resistance, M·η), ch. 5 (DCM, K_crit).
    """
    vin, vc, i_out, fsw, l, r_sw, r_l, r_rect, vf0, p_edge, k_dt = np.broadcast_arrays(
        *(
            np.asarray(x, dtype=float)
            for x in (vin, vc, i_out, fsw, l, r_sw, r_l, r_rect, vf0, p_edge, k_dt)
        )
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        q_gap = np.where(vc > 0, p_edge / vc, 0.0)
        q = i_out + q_gap
        share = np.where(q > 0, i_out / q, 1.0)
        a = vc + share * vf0
        b = vin + q * r_sw - i_out * r_rect - k_dt
        c = q * (r_l + r_sw)
        disc = b * b - 4.0 * a * c
        x = (b + np.sqrt(np.maximum(disc, 0.0))) / (2.0 * a)
        duty_c = 1.0 - x
        i_l = np.where(x > 0, q / x, np.nan)
        di_c = (vin - i_l * (r_l + r_sw)) * duty_c / (l * fsw)
        iv_c = i_l - 0.5 * di_c
        ipk_c = i_l + 0.5 * di_c

        # DCM: L f I² − 2 Q B I − 2 Q A = 0; the rectifier's drops only over its share of
        # the falling slope (the rest of the charge is the edge charge of the gap), as in CCM,
        # so that the two modes meet exactly where the valley current reaches zero
        lf = l * fsw
        # (the gap charge, edge power drawn through the inductor, does not pass the diode:
        # its forward drop and slope resistance act on the output's share only)
        big_a = vc + share * vf0 - vin
        big_b = 0.5 * (r_l + share * r_rect)
        ipk_d = (
            q * big_b + np.sqrt(np.maximum(q * q * big_b * big_b + 2.0 * lf * q * big_a, 0.0))
        ) / lf
        d2_d = ipk_d * lf / (big_a + big_b * ipk_d)
        duty_d = ipk_d * lf / (vin - 0.5 * ipk_d * (r_l + r_sw))
        dcm_ok = (big_a > 0) & (duty_d > 0) & (d2_d > 0) & (duty_d + d2_d < 1.0) & (q > 0)
    dcm = dcm_ok & bool(dcm_allowed)
    duty = np.where(dcm, duty_d, duty_c)
    d2 = np.where(dcm, d2_d, x)
    i_pk = np.where(dcm, ipk_d, ipk_c)
    i_valley = np.where(dcm, 0.0, iv_c)
    gap = gap_fraction(q_gap, i_pk, np.where(dcm, 0.0, iv_c), d2)
    below = vc <= vin
    no_root = ~dcm & ((disc < 0) | ~(x > 0) | ~(x <= 1.0))
    no_load = bool(dcm_allowed) & ~(i_out > 0)
    # a valley a rounding error below zero is the boundary itself, where the modes meet
    no_mode = bool(dcm_allowed) & ~dcm & (i_valley < -1e-12 * np.abs(i_pk))
    lim, lim_reason = limit_checks(
        duty, fsw, max_duty=max_duty, min_on_time=min_on_time, min_off_time=min_off_time
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        ideal = 1.0 - vin / vc
    by_duty, by_duty_reason = ideal_duty_limit(ideal, max_duty=max_duty, failing=no_root | lim)
    return assemble(
        duty=duty,
        d2=d2,
        gap=gap,
        dcm=dcm,
        i_valley=i_valley,
        i_pk=i_pk,
        input_is_inductor=True,
        output_is_inductor=False,
        p_edge_input=np.zeros_like(vin),
        vin=vin,
        flags=[no_load, below, by_duty, no_root, no_mode, lim],
        reasons=[
            "no load: pulse skipping at zero load is not modelled",
            "boost cannot regulate an output at or below its input",
            by_duty_reason,
            "the conduction drops cannot deliver this load: no duty cycle reaches the output",
            "no consistent CCM or DCM solution with these drops",
            lim_reason,
        ],
        blocks={"switch": vc + vf0, "rect": vc, "switch_settled": vin, "rect_idle": vc - vin},
    )
