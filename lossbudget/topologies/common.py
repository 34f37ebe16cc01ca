"""Shared pieces of the steady-state solutions: the result type and the waveform layout.

Every topology returns a :class:`SteadyState` whose waveforms share one segment layout over the
period: ``on`` [0, D] (main switch conducting), ``gap`` [D, D + g] (the edge charge drawn
through the inductor after the main switch turns off, boost only), ``rect`` [D + g, D + D2]
(the rectifier conducting) and ``idle`` [D + D2, 1] (DCM only; zero length in CCM).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lossbudget.waveforms import Pwl

SEGMENTS = ("on", "gap", "rect", "idle")


@dataclass(frozen=True, slots=True, kw_only=True)
class SteadyState:
    """Regulated steady state of a stage at many operating points (arrays over points)."""

    duty: np.ndarray
    d2: np.ndarray
    gap: np.ndarray
    dcm: np.ndarray
    i_l: Pwl
    i_switch: Pwl
    i_rect: Pwl
    i_in_wave: Pwl
    i_out_wave: Pwl
    i_in_avg: np.ndarray
    delta_i: np.ndarray
    i_pk: np.ndarray
    i_valley: np.ndarray
    i_on: np.ndarray
    i_off: np.ndarray
    v_switch_block: np.ndarray
    v_rect_block: np.ndarray
    v_switch_settled: np.ndarray
    v_rect_idle: np.ndarray
    infeasible: np.ndarray
    reason: np.ndarray


def layout(duty, gap, d2):
    """Segment boundaries [0, D, D + g, D + D2, 1] along a new last axis.

    Parameters
    ----------
    duty : array_like
        Main-switch duty cycle D. [-]
    gap : array_like
        Fraction g of the period in which the edge charge flows (boost), 0 elsewhere. [-]
    d2 : array_like
        Fraction of the period of the inductor's falling slope (1 − D in CCM). [-]

    Returns
    -------
    ndarray
        Boundaries, shape (..., 5). [-]

    Notes
    -----
    The layout is the same for every topology and mode, so component currents can be added
    segment by segment.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 and ch. 5 (sub-intervals of CCM and DCM operation).
    """
    duty, gap, d2 = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (duty, gap, d2)))
    zero = np.zeros_like(duty)
    one = np.ones_like(duty)
    return np.stack([zero, duty, duty + gap, np.minimum(duty + d2, 1.0), one], axis=-1)


def inductor_segments(i_valley, i_pk, i_end, duty, gap, d2):
    """Start and end values of the inductor current on the four segments.

    Parameters
    ----------
    i_valley : array_like
        Current at the start of the on interval (0 in DCM). [A]
    i_pk : array_like
        Current at the end of the on interval. [A]
    i_end : array_like
        Current at the end of the falling slope (the valley in CCM, 0 in DCM). [A]
    duty, gap, d2 : array_like
        D, g and D2 as in :func:`layout`. [-]

    Returns
    -------
    tuple of ndarray
        (start, end), each shape (..., 4). [A]

    Notes
    -----
    The falling slope runs from i_pk to i_end over D2; the gap takes its first g of it.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 (inductor current ripple, piecewise-linear approximation).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        i_gap = np.where(d2 > 0, i_pk - (i_pk - i_end) * gap / d2, i_pk)
    zero = np.zeros_like(i_pk)
    start = np.stack([i_valley, i_pk, i_gap, zero], axis=-1)
    end = np.stack([i_pk, i_gap, i_end, zero], axis=-1)
    return start, end


def gap_fraction(q_gap, i_pk, i_end, d2):
    """Fraction of the period that carries a charge atop the falling slope.

    Parameters
    ----------
    q_gap : array_like
        Charge per period to carry, as an average current (charge × fsw). [A]
    i_pk, i_end : array_like
        Current at the start and the end of the falling slope. [A]
    d2 : array_like
        Fraction of the period of the falling slope. [-]

    Returns
    -------
    ndarray
        The fraction g with ∫_D^(D+g) i dτ = q_gap. [-]

    Notes
    -----
    With slope s = (i_pk − i_end)/D2 the charge is i_pk·g − s·g²/2; the smaller root is taken in
    the cancellation-free form g = 2q/(i_pk + √(i_pk² − 2·s·q)).

    References
    ----------
    .. [1] Derived (integral of a linear ramp); charge-balance method of R. W. Erickson,
       D. Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 2.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(d2 > 0, (i_pk - i_end) / d2, 0.0)
        disc = np.maximum(i_pk * i_pk - 2.0 * s * q_gap, 0.0)
        g = np.where(q_gap > 0, 2.0 * q_gap / (i_pk + np.sqrt(disc)), 0.0)
    return np.clip(g, 0.0, d2)


def limit_checks(duty, fsw, *, max_duty, min_on_time, min_off_time):
    """Flag duty cycles the controller cannot produce, with the reason.

    Parameters
    ----------
    duty : array_like
        Main-switch duty cycle. [-]
    fsw : array_like
        Switching frequency. [Hz]
    max_duty : float
        Controller's maximum duty cycle. [-]
    min_on_time : float
        Controller's minimum on-time. [s]
    min_off_time : float
        Controller's minimum off-time. [s]

    Returns
    -------
    tuple of ndarray
        (flag, reason): boolean and string arrays. [-]

    Notes
    -----
    D ≤ D_max; D·T ≥ t_on,min; (1 − D)·T ≥ t_off,min (common practice, REFERENCES §12).

    References
    ----------
    .. [1] Common practice: controller duty and timing limits (minimum on-time, maximum duty).
    """
    duty = np.asarray(duty, dtype=float)
    t_on = duty / fsw
    t_off = (1.0 - duty) / fsw
    over = duty > max_duty
    short_on = t_on < min_on_time
    short_off = t_off < min_off_time
    reason = np.full(duty.shape, "", dtype=object)
    reason = np.where(short_off, "off-time below operating.min_off_time", reason)
    reason = np.where(short_on, "on-time below operating.min_on_time", reason)
    reason = np.where(over, "duty above operating.max_duty", reason)
    return over | short_on | short_off, reason


def ideal_duty_limit(ideal, *, max_duty, failing):
    """Flag points whose lossless CCM duty alone exceeds the maximum duty.

    Parameters
    ----------
    ideal : array_like
        The lossless CCM duty cycle of the stage at the point (boost 1 − Vin/Vout, buck
        Vout/Vin, inverting buck-boost |Vout|/(Vin + |Vout|)). [-]
    max_duty : float
        Controller's maximum duty cycle. [-]
    failing : array_like
        Points that have no solution for another reason (no duty cycle found, or a duty
        limit passed): only these are blamed on the ideal duty. [-]

    Returns
    -------
    tuple of ndarray
        (flag, reason): boolean and string arrays; the reason names the ideal duty and the
        limit. [-]

    Notes
    -----
    Where the ideal duty passes ``max_duty`` no conduction drop is needed to explain the
    failure, so the reason names the duty, not the drops. The CCM ratios are those of an
    ideal converter (REFERENCES §8.1).

    References
    ----------
    .. [1] R. W. Erickson and D. Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
       2001, ch. 2 (CCM conversion ratios of the ideal boost, buck and buck-boost).
    """
    ideal = np.asarray(ideal, dtype=float)
    flag = np.asarray(failing, dtype=bool) & (ideal > max_duty)
    reason = np.full(ideal.shape, "", dtype=object)
    if flag.any():
        reason[flag] = np.char.mod(
            f"the ideal duty %.3f (before any conduction drop) alone exceeds "
            f"operating.max_duty {max_duty:g}", ideal[flag])
    return flag, reason


def dcm_peak_fixed_point(i0, update, *, iterations=40):
    """Iterate a contraction for the DCM peak current from an ideal start.

    Parameters
    ----------
    i0 : array_like
        Start value (the loss-free solution). [A]
    update : callable
        The map i → i_new, vectorised. [A]
    iterations : int
        Fixed number of sweeps. [-]

    Returns
    -------
    tuple of ndarray
        (i, converged): the peak current and where the last step was below 1e-12 relative. [A]

    Notes
    -----
    The conduction drops change the slopes by a few percent, so the map contracts strongly; a
    point where it does not settle is reported as not converged rather than guessed.

    References
    ----------
    .. [1] Derived: DCM charge balance with resistive drops on both slopes, method of
       R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 5.
    """
    i = np.asarray(i0, dtype=float)
    step = np.full(i.shape, np.inf)
    for _ in range(iterations):
        new = update(i)
        with np.errstate(invalid="ignore"):
            step = np.abs(new - i)
        i = new
    with np.errstate(invalid="ignore"):
        converged = step <= 1e-12 * np.maximum(np.abs(i), 1e-12)
    return i, converged


def assemble(
    *,
    duty,
    d2,
    gap,
    dcm,
    i_valley,
    i_pk,
    input_is_inductor,
    output_is_inductor,
    p_edge_input,
    vin,
    flags,
    reasons,
    blocks,
):
    """Build the component waveforms of a solved stage and collect its flags.

    Parameters
    ----------
    duty, d2, gap : ndarray
        D, D2 and the edge-charge gap g. [-]
    dcm : ndarray
        True where the stage is in discontinuous conduction. [-]
    i_valley, i_pk : ndarray
        Inductor current at the start and at the end of the on interval. [A]
    input_is_inductor : bool
        True where the input current is the inductor current (boost). [-]
    output_is_inductor : bool
        True where the current into the output node is the inductor current (buck). [-]
    p_edge_input : ndarray
        Edge losses drawn straight from the input, beside the switch waveform (buck,
        buck-boost); zero for the boost. [W]
    vin : ndarray
        Input voltage at the stage. [V]
    flags, reasons : list of ndarray
        Infeasibility flags and their reasons, in order of precedence. [-]
    blocks : dict
        Blocking voltages: switch, rect, switch_settled, rect_idle. [V]

    Returns
    -------
    SteadyState
        The solved stage, NaN wherever it is infeasible. [-]

    Notes
    -----
    Switch current: the inductor current over the on interval. Rectifier current: the falling
    slope after the gap. A point flagged infeasible carries NaN in every number.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 and ch. 5 (converter waveforms in CCM and DCM).
    """
    bad = np.zeros(np.shape(duty), dtype=bool)
    reason = np.full(np.shape(duty), "", dtype=object)
    for flag, text in zip(flags, reasons, strict=True):
        new = flag & ~bad
        reason = np.where(new, text, reason)
        bad = bad | flag
    nan = np.where(bad, np.nan, 1.0)
    duty, d2, gap = duty * nan, d2 * nan, gap * nan
    i_end = np.where(dcm, 0.0, i_valley) * nan
    i_valley = np.where(dcm, 0.0, i_valley) * nan
    i_pk = i_pk * nan
    t = layout(duty, gap, d2)
    start, end = inductor_segments(i_valley, i_pk, i_end, duty, gap, d2)
    zero = np.zeros_like(start[..., 0])
    i_l = Pwl(t, start, end)
    sw_start = np.stack([start[..., 0], zero, zero, zero], axis=-1)
    sw_end = np.stack([end[..., 0], zero, zero, zero], axis=-1)
    i_switch = Pwl(t, sw_start, sw_end)
    rc_start = np.stack([zero, zero, start[..., 2], zero], axis=-1)
    rc_end = np.stack([zero, zero, end[..., 2], zero], axis=-1)
    i_rect = Pwl(t, rc_start, rc_end)
    i_in_wave = i_l if input_is_inductor else i_switch
    i_out_wave = i_l if output_is_inductor else i_rect
    with np.errstate(divide="ignore", invalid="ignore"):
        i_in_avg = i_in_wave.mean() + np.where(input_is_inductor, 0.0, p_edge_input / vin)
    return SteadyState(
        duty=duty,
        d2=d2,
        gap=gap,
        dcm=np.where(bad, False, dcm),
        i_l=i_l,
        i_switch=i_switch,
        i_rect=i_rect,
        i_in_wave=i_in_wave,
        i_out_wave=i_out_wave,
        i_in_avg=i_in_avg * nan,
        delta_i=(i_pk - i_valley),
        i_pk=i_pk,
        i_valley=i_valley,
        i_on=i_valley,
        i_off=i_pk,
        v_switch_block=blocks["switch"] * nan,
        v_rect_block=blocks["rect"] * nan,
        v_switch_settled=blocks["switch_settled"] * nan,
        v_rect_idle=blocks["rect_idle"] * nan,
        infeasible=bad,
        reason=reason,
    )
