"""Buck stage: regulated duty cycle, CCM/DCM and waveforms with conduction drops.

The inductor current is the output current. Edge losses are drawn from the input beside the
switch waveform.
"""

from __future__ import annotations

import numpy as np

from lossbudget.topologies.common import (
    assemble,
    dcm_peak_fixed_point,
    ideal_duty_limit,
    limit_checks,
)


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
    """Regulated steady state of a buck stage.

    Parameters
    ----------
    vin : array_like
        Input voltage at the stage (after any input resistor). [V]
    vc : array_like
        Output voltage at the output capacitors. [V]
    i_out : array_like
        Average inductor current (the current delivered to the output node). [A]
    fsw : array_like
        Switching frequency. [Hz]
    l : array_like
        Inductance. [H]
    r_sw : array_like
        Resistance in the switch path. [ohm]
    r_l : array_like
        Resistance in the inductor path (winding, inductor and output series resistors). [ohm]
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
    CCM: V_out = D·V_in − I·(D·R_sw + R_L) − (1 − D)·(V_f0 + I·R_rect) − k_dt, solved for D.
    DCM: I_pk·L·f = (V_in − V_C − I_pk(R_sw + R_L)/2)·D = (V_C + V_f0 + I_pk(R_L + R_rect)/2)·D2
    with ½·I_pk·(D + D2) = I_out, solved by a contraction on I_pk. Without losses these give
    M = D and M = 2/(1 + √(1 + 4K/D²)).

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
    with np.errstate(divide="ignore", invalid="ignore"):
        i_l = i_out
        den = vin - i_l * r_sw + vf0 + i_l * r_rect
        duty_c = (vc + i_l * r_l + vf0 + i_l * r_rect + k_dt) / den
        di_c = (vin - vc - i_l * (r_sw + r_l)) * duty_c / lf

        def slopes(i):
            return vin - vc - 0.5 * i * (r_sw + r_l), vc + vf0 + 0.5 * i * (r_l + r_rect)

        def update(i):
            a, b = slopes(i)
            return np.sqrt(np.maximum(2.0 * i_out / (lf * (1.0 / a + 1.0 / b)), 0.0))

        a0, _ = slopes(0.0)
        ipk_d, conv = dcm_peak_fixed_point(update(np.zeros_like(vin)), update)
        a_d, b_d = slopes(ipk_d)
        duty_d = ipk_d * lf / a_d
        d2_d = ipk_d * lf / b_d
        dcm_ok = (a_d > 0) & (b_d > 0) & conv & (duty_d + d2_d < 1.0) & (i_out > 0) & (a0 > 0)
    dcm = dcm_ok & bool(dcm_allowed)
    duty = np.where(dcm, duty_d, duty_c)
    d2 = np.where(dcm, d2_d, 1.0 - duty_c)
    i_pk = np.where(dcm, ipk_d, i_l + 0.5 * di_c)
    i_valley = np.where(dcm, 0.0, i_l - 0.5 * di_c)
    below = vc >= vin
    no_root = ~dcm & (~(den > 0) | ~(duty_c < 1.0) | ~(duty_c > 0))
    no_load = bool(dcm_allowed) & ~(i_out > 0)
    # a valley a rounding error below zero is the boundary itself, where the modes meet
    no_mode = bool(dcm_allowed) & ~dcm & (i_valley < -1e-12 * np.abs(i_pk))
    lim, lim_reason = limit_checks(
        duty, fsw, max_duty=max_duty, min_on_time=min_on_time, min_off_time=min_off_time
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        ideal = vc / vin
    by_duty, by_duty_reason = ideal_duty_limit(ideal, max_duty=max_duty, failing=no_root | lim)
    return assemble(
        duty=duty,
        d2=d2,
        gap=np.zeros_like(duty),
        dcm=dcm,
        i_valley=i_valley,
        i_pk=i_pk,
        input_is_inductor=False,
        output_is_inductor=True,
        p_edge_input=p_edge,
        vin=vin,
        flags=[no_load, below, by_duty, no_root, no_mode, lim],
        reasons=[
            "no load: pulse skipping at zero load is not modelled",
            "buck cannot reach an output at or above its input",
            by_duty_reason,
            "the conduction drops cannot deliver this load: no duty cycle reaches the output",
            "no consistent CCM or DCM solution with these drops",
            lim_reason,
        ],
        blocks={"switch": vin + vf0, "rect": vin, "switch_settled": vin - vc, "rect_idle": vc},
    )
