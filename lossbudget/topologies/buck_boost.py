"""Inverting buck-boost stage: regulated duty cycle, CCM/DCM and waveforms with drops.

Voltages are magnitudes here: the output is |Vout|. Edge losses are drawn from the input beside
the switch waveform.
"""

from __future__ import annotations

import numpy as np

from lossbudget.topologies.common import assemble, ideal_duty_limit, limit_checks


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
    """Regulated steady state of an inverting buck-boost stage (output magnitude).

    Parameters
    ----------
    vin : array_like
        Input voltage at the stage (after any input resistor). [V]
    vc : array_like
        Output voltage magnitude at the output capacitors. [V]
    i_out : array_like
        Average current the rectifier delivers to the output node. [A]
    fsw : array_like
        Switching frequency. [Hz]
    l : array_like
        Inductance. [H]
    r_sw : array_like
        Resistance in the switch path. [ohm]
    r_l : array_like
        Resistance in the inductor path. [ohm]
    r_rect : array_like
        Resistance in the rectifier path. [ohm]
    vf0 : array_like
        Rectifier threshold voltage (0 for a synchronous rectifier). [V]
    p_edge : array_like
        Edge losses drawn from the input beside the switch waveform. [W]
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
    CCM with x = 1 − D and I_L = I_out/x: D·(V_in − I_L R_sw) − I_L R_L − x·(|V| + V_f0 +
    I_L R_rect) − k_dt = 0, i.e. −x²(V_in + |V| + V_f0) + x(V_in + I R_sw − I R_rect − k_dt) −
    I(R_sw + R_L) = 0, larger root. DCM: I_pk·L·f = (V_in − I_pk(R_sw + R_L)/2)·D =
    (|V| + V_f0 + I_pk(R_L + R_rect)/2)·D2 with ½·I_pk·D2 = I_out. Without losses: M = D/(1 − D)
    and M = D/√K.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 (CCM), ch. 3 (loss-inclusive averaged model), ch. 5 (DCM).
    """
    vin, vc, i_out, fsw, l, r_sw, r_l, r_rect, vf0, p_edge, k_dt = np.broadcast_arrays(
        *(
            np.asarray(x, dtype=float)
            for x in (vin, vc, i_out, fsw, l, r_sw, r_l, r_rect, vf0, p_edge, k_dt)
        )
    )
    lf = l * fsw
    q = i_out
    with np.errstate(divide="ignore", invalid="ignore"):
        a = vin + vc + vf0
        b = vin + q * r_sw - q * r_rect - k_dt
        c = q * (r_sw + r_l)
        disc = b * b - 4.0 * a * c
        x = (b + np.sqrt(np.maximum(disc, 0.0))) / (2.0 * a)
        duty_c = 1.0 - x
        i_l = q / x
        di_c = (vin - i_l * (r_sw + r_l)) * duty_c / lf
        big_a = vc + vf0
        big_b = 0.5 * (r_l + r_rect)
        ipk_d = (
            q * big_b + np.sqrt(np.maximum(q * q * big_b * big_b + 2.0 * lf * q * big_a, 0.0))
        ) / lf
        d2_d = ipk_d * lf / (big_a + big_b * ipk_d)
        duty_d = ipk_d * lf / (vin - 0.5 * ipk_d * (r_sw + r_l))
        dcm_ok = (duty_d > 0) & (d2_d > 0) & (duty_d + d2_d < 1.0) & (q > 0)
    dcm = dcm_ok & bool(dcm_allowed)
    duty = np.where(dcm, duty_d, duty_c)
    d2 = np.where(dcm, d2_d, x)
    i_pk = np.where(dcm, ipk_d, i_l + 0.5 * di_c)
    i_valley = np.where(dcm, 0.0, i_l - 0.5 * di_c)
    no_root = ~dcm & ((disc < 0) | ~(x > 0) | ~(x <= 1.0))
    no_load = bool(dcm_allowed) & ~(i_out > 0)
    # a valley a rounding error below zero is the boundary itself, where the modes meet
    no_mode = bool(dcm_allowed) & ~dcm & (i_valley < -1e-12 * np.abs(i_pk))
    lim, lim_reason = limit_checks(
        duty, fsw, max_duty=max_duty, min_on_time=min_on_time, min_off_time=min_off_time
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        ideal = vc / (vin + vc)
    by_duty, by_duty_reason = ideal_duty_limit(ideal, max_duty=max_duty, failing=no_root | lim)
    return assemble(
        duty=duty,
        d2=d2,
        gap=np.zeros_like(duty),
        dcm=dcm,
        i_valley=i_valley,
        i_pk=i_pk,
        input_is_inductor=False,
        output_is_inductor=False,
        p_edge_input=p_edge,
        vin=vin,
        flags=[no_load, by_duty, no_root, no_mode, lim],
        reasons=[
            "no load: pulse skipping at zero load is not modelled",
            by_duty_reason,
            "the conduction drops cannot deliver this load: no duty cycle reaches the output",
            "no consistent CCM or DCM solution with these drops",
            lim_reason,
        ],
        blocks={"switch": vin + vc + vf0, "rect": vin + vc, "switch_settled": vin, "rect_idle": vc},
    )
