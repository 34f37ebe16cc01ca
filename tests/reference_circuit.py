"""Exact time-domain reference solution of the switched DC-DC circuit, for the tests.

The tests of the analytic engine compare it with this module, which shares no code with
``lossbudget`` (it imports nothing from it). The circuit is the boost, the buck or the
inverting buck-boost built from ideal elements plus the listed parasitics: a source ``vin``,
the main switch as a resistance ``r_switch`` while on, a rectifier (a piecewise-linear diode
``vf0 + rd*i``, a forced-continuous synchronous switch ``r_sync``, or a synchronous switch
opened at zero current), an inductor ``l`` with series ``dcr``, an output capacitor ``c`` with
series ``esr`` and a resistive load ``r_load`` across the capacitor branch. Switching is
instantaneous, with no dead time, so only waveforms and conduction losses are checked.

In each sub-interval of the period the circuit is linear in the state ``x = (i_L, v_C)``;
with the augmented state ``z = (i_L, v_C, 1)`` it obeys ``z' = M z`` and is solved exactly
by the matrix exponential. The periodic steady state is a linear solve in CCM and a 2-D
Newton iteration on ``(v_C(0), t2)`` in DCM (a bracketed 1-D root in ``v_C(0)`` when it
fails); averages, RMS values and conduction losses are integrated in closed form (Van Loan's
block exponential), so they carry only rounding error (about 1e-12 relative). The inverting
buck-boost is solved in magnitudes: its ``v_out``, ``v_C`` and output current are the
magnitudes of the negative quantities.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal, NamedTuple

import numpy as np
from scipy import linalg, optimize

Topology = Literal["boost", "buck", "buck-boost"]
Rectifier = Literal["diode", "sync", "sync-emulated"]

_TOPOLOGIES = ("boost", "buck", "buck-boost")
_RECTIFIERS = ("diode", "sync", "sync-emulated")
_N_SCAN = 256  # samples per interval to bracket events and extrema of the exact solution
_DUTY_GRID = np.concatenate(([1e-3], np.linspace(0.02, 0.98, 25), [0.995, 0.999]))


@dataclass(frozen=True, slots=True, kw_only=True)
class Interval:
    """One linear sub-interval of the period.

    Attributes
    ----------
    kind : str
        ``"on"`` (main switch on), ``"rectifier"`` (rectifier conducting) or ``"idle"``
        (both off, DCM). [-]
    t_start : float
        Start time within the period. [s]
    duration : float
        Length of the interval. [s]
    m : ndarray
        Augmented generator, shape (3, 3): ``z' = m z`` with ``z = (i_L, v_C, 1)``. [1/s]
    z0 : ndarray
        Augmented state ``(i_L [A], v_C [V], 1)`` at the start of the interval.
    g : float
        1 when the inductor current flows into the output node during the interval,
        else 0. [-]
    w_vout : ndarray
        Weights with ``v_out = w_vout . z`` during the interval. [ohm, -, V]
    """

    kind: str
    t_start: float
    duration: float
    m: np.ndarray = field(repr=False, compare=False)
    z0: np.ndarray = field(compare=False)
    g: float
    w_vout: np.ndarray = field(repr=False, compare=False)


@dataclass(frozen=True, slots=True, kw_only=True)
class _Circuit:
    topology: str
    rectifier: str
    vin: float
    fsw: float
    l: float
    dcr: float
    c: float
    esr: float
    r_load: float
    r_switch: float
    vf0: float  # rectifier offset: the diode's vf0, 0 for the synchronous kinds
    rd: float  # rectifier slope: the diode's rd, or r_sync

    @property
    def alpha(self) -> float:
        return self.r_load / (self.r_load + self.esr)

    @property
    def tau_idle(self) -> float:
        return (self.r_load + self.esr) * self.c

    def generator(self, kind: str) -> tuple[np.ndarray, float]:
        """Augmented generator and output-node flag of one kind of interval."""
        m = np.zeros((3, 3))
        m[1, 1] = -1.0 / self.tau_idle
        if kind == "idle":
            return m, 0.0
        if kind == "on":
            e0 = self.vin
            r_tot = self.dcr + self.r_switch
            s = g = 1.0 if self.topology == "buck" else 0.0
        else:  # rectifier conducting
            e0 = self.vin - self.vf0 if self.topology == "boost" else -self.vf0
            r_tot = self.dcr + self.rd
            s = g = 1.0
        a = self.alpha
        m[0, 0] = -(r_tot + s * g * a * self.esr) / self.l
        m[0, 1] = -s * a / self.l
        m[0, 2] = e0 / self.l
        m[1, 0] = a * g / self.c
        return m, g

    def interval(self, kind: str, t_start: float, duration: float, z0: np.ndarray) -> Interval:
        """One sub-interval of the given kind starting from the augmented state z0."""
        m, g = self.generator(kind)
        return Interval(
            kind=kind, t_start=t_start, duration=duration, m=m, z0=z0, g=g, w_vout=self.w_vout(g)
        )

    def w_vout(self, g: float) -> np.ndarray:
        """Weights with v_out = w . z (voltage across the load)."""
        return self.alpha * np.array([self.esr * g, 1.0, 0.0])

    def w_icap(self, g: float) -> np.ndarray:
        """Weights with i_C = w . z (current into the output capacitor branch)."""
        return self.alpha * np.array([g, -1.0 / self.r_load, 0.0])


@dataclass(frozen=True, slots=True, kw_only=True)
class CircuitSolution:
    """Periodic steady state of the switched circuit and its integrals.

    Attributes
    ----------
    topology, rectifier : str
        The circuit solved. [-]
    vin : float
        Source voltage. [V]
    fsw : float
        Switching frequency. [Hz]
    duty : float
        Duty cycle of the main switch. [-]
    d2 : float
        Fraction of the period the rectifier conducts (1 - duty in CCM). [-]
    mode : str
        ``"CCM"`` or ``"DCM"``. [-]
    vout_avg, vout_pp : float
        Mean and peak-to-peak voltage across the load (magnitudes for the inverting
        buck-boost). [V]
    iout_avg : float
        Mean load current. [A]
    pout, pin : float
        Mean load power and mean source power ``vin * iin_avg``. [W]
    iin_avg : float
        Mean source current. [A]
    loss_switch, loss_rectifier, loss_dcr, loss_esr : float
        Mean conduction losses of the main switch, the rectifier
        (``vf0 i + rd i^2`` or ``r_sync i^2``), the inductor DCR and the output-capacitor
        ESR. [W]
    i_l_avg, i_l_rms, i_l_pk, i_l_valley : float
        Inductor current: mean, RMS, maximum and minimum over the period. [A]
    i_switch_avg, i_switch_rms : float
        Main-switch current, mean and RMS over the period. [A]
    i_rect_avg, i_rect_rms : float
        Rectifier current, mean and RMS over the period. [A]
    i_cap_rms : float
        RMS current of the output capacitor. [A]
    intervals : tuple of Interval
        The linear sub-intervals of the period, with their exact start states.
    """

    topology: str
    rectifier: str
    vin: float
    fsw: float
    duty: float
    d2: float
    mode: str
    vout_avg: float
    vout_pp: float
    iout_avg: float
    pout: float
    iin_avg: float
    pin: float
    loss_switch: float
    loss_rectifier: float
    loss_dcr: float
    loss_esr: float
    i_l_avg: float
    i_l_rms: float
    i_l_pk: float
    i_l_valley: float
    i_switch_avg: float
    i_switch_rms: float
    i_rect_avg: float
    i_rect_rms: float
    i_cap_rms: float
    intervals: tuple[Interval, ...] = field(repr=False, compare=False)


class SampledWaveform(NamedTuple):
    """Waveforms of one period sampled on a uniform time grid.

    A named tuple, so that ``t, i_l, v_c, v_out = waveform(sol, n)`` also works.

    Attributes
    ----------
    t : ndarray
        Sample times from the start of the period (main switch turning on). [s]
    i_l : ndarray
        Inductor current. [A]
    v_c : ndarray
        Voltage of the ideal output capacitance (magnitude for the inverting stage). [V]
    v_out : ndarray
        Voltage across the load (magnitude for the inverting stage). [V]
    """

    t: np.ndarray
    i_l: np.ndarray
    v_c: np.ndarray
    v_out: np.ndarray


# --------------------------------------------------------------------------- exact pieces


def _gram(m: np.ndarray, z0: np.ndarray, tau: float) -> np.ndarray:
    """Integral of z z^T over [0, tau] for z' = m z, z(0) = z0 (Van Loan's block exponential)."""
    big = np.zeros((6, 6))
    big[:3, :3] = -m
    big[:3, 3:] = np.outer(z0, z0)
    big[3:, 3:] = m.T
    e = linalg.expm(big * tau)
    g = e[3:, 3:].T @ e[:3, 3:]
    return 0.5 * (g + g.T)


def _integral(m: np.ndarray, z0: np.ndarray, tau: float) -> np.ndarray:
    """Integral of z over [0, tau] for z' = m z, z(0) = z0."""
    big = np.zeros((4, 4))
    big[:3, :3] = m
    big[:3, 3] = z0
    return linalg.expm(big * tau)[:3, 3]


def _samples(m: np.ndarray, z0: np.ndarray, tau: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Exact states at n + 1 equally spaced times over [0, tau]."""
    t = np.linspace(0.0, tau, n + 1)
    step = linalg.expm(m * (tau / n))
    z = np.empty((n + 1, 3))
    z[0] = z0
    for k in range(n):
        z[k + 1] = step @ z[k]
    z[-1] = linalg.expm(m * tau) @ z0  # the end point exactly, free of accumulated rounding
    return t, z


def _state_at(m: np.ndarray, z0: np.ndarray, t: float) -> np.ndarray:
    return linalg.expm(m * t) @ z0


def _extremes(m: np.ndarray, z0: np.ndarray, tau: float, w: np.ndarray) -> tuple[float, float]:
    """Minimum and maximum of w . z(t) over [0, tau], end points included."""
    t, z = _samples(m, z0, tau, _N_SCAN)
    q = z @ w
    out = []
    for sign in (1.0, -1.0):  # minimum, then maximum
        k = int(np.argmin(sign * q))
        best = sign * q[k]
        if 0 < k < len(t) - 1:
            res = optimize.minimize_scalar(
                lambda s, sign=sign: sign * (w @ _state_at(m, z0, s)),
                bounds=(t[k - 1], t[k + 1]),
                method="bounded",
                options={"xatol": 1e-12 * tau},
            )
            best = min(best, float(res.fun))
        out.append(sign * best)
    return out[0], out[1]


def _first_nonpositive(m: np.ndarray, z0: np.ndarray, tau: float) -> float | None:
    """First time in (0, tau] where the inductor current reaches zero, or None."""
    t, z = _samples(m, z0, tau, _N_SCAN)
    hits = np.nonzero(z[1:, 0] <= 0.0)[0]
    if hits.size == 0:
        return None
    k = int(hits[0]) + 1
    if z[k, 0] == 0.0:
        return float(t[k])
    return optimize.brentq(
        lambda s: _state_at(m, z0, s)[0], t[k - 1], t[k], xtol=1e-15 * tau, rtol=1e-15
    )


# --------------------------------------------------------------------------- steady state


def _dcm_guess(ckt: _Circuit, duty: float) -> tuple[float, float]:
    """Output voltage and rectifier interval of the lossless DCM circuit (first guess)."""
    t_s = 1.0 / ckt.fsw
    k = 2.0 * ckt.l / (ckt.r_load * t_s)
    t1 = duty * t_s
    if ckt.topology == "boost":
        v = ckt.vin * (1.0 + np.sqrt(1.0 + 4.0 * duty**2 / k)) / 2.0
        t2 = ckt.vin * t1 / max(v - ckt.vin, 1e-9 * ckt.vin)
    elif ckt.topology == "buck":
        v = ckt.vin * 2.0 / (1.0 + np.sqrt(1.0 + 4.0 * k / duty**2))
        t2 = (ckt.vin - v) * t1 / v
    else:
        v = ckt.vin * duty / np.sqrt(k)
        t2 = ckt.vin * t1 / v
    return float(v), float(t2)


def _dcm_newton(
    ckt: _Circuit, m_rect: np.ndarray, e_on: np.ndarray, t_off: float, v0: float, t2: float
) -> tuple[float, float] | None:
    """Solve i_L(t1 + t2) = 0 and v_C(T) = v_C(0) for (v_C(0), t2) by Newton's method."""
    t2 = min(max(t2, 1e-6 * t_off), t_off)
    last = np.inf
    for _ in range(80):
        z1 = e_on @ np.array([0.0, v0, 1.0])
        e2 = linalg.expm(m_rect * t2)
        z2 = e2 @ z1
        dz2_dv = e2 @ e_on[:, 1]
        dz2_dt = m_rect @ z2
        dec = np.exp(-(t_off - t2) / ckt.tau_idle)
        res = np.array([z2[0], z2[1] * dec - v0])
        jac = np.array(
            [
                [dz2_dv[0], dz2_dt[0]],
                [dz2_dv[1] * dec - 1.0, (dz2_dt[1] + z2[1] / ckt.tau_idle) * dec],
            ]
        )
        try:
            step = np.linalg.solve(jac, -res)
        except np.linalg.LinAlgError:
            return None
        lam = 1.0
        while not 0.0 < t2 + lam * step[1] <= t_off and lam > 1e-9:
            lam *= 0.5
        v0 += lam * step[0]
        t2 += lam * step[1]
        size = max(abs(step[0]) / max(abs(v0), 1e-12), abs(step[1]) / t_off)
        # converged: a step at the rounding floor, or one that no longer shrinks (the floor
        # rises with the conditioning of the map, about R C / T)
        if lam == 1.0 and (size <= 1e-12 or (size <= 1e-8 and size > 0.1 * last)):
            return v0, t2
        last = size
    return None


def _dcm_bracketed(
    ckt: _Circuit, m_rect: np.ndarray, e_on: np.ndarray, t_off: float, v_hint: float
) -> tuple[float, float] | None:
    """Solve the DCM steady state as a bracketed 1-D root in v_C(0) (slow, robust)."""

    def rect_end(v0: float) -> tuple[float, float]:
        z1 = e_on @ np.array([0.0, v0, 1.0])
        if z1[0] <= 0.0:
            return 0.0, z1[1]
        t2 = _first_nonpositive(m_rect, z1, t_off)
        t2 = t_off if t2 is None else t2
        return t2, _state_at(m_rect, z1, t2)[1]

    def miss(v0: float) -> float:
        t2, v2 = rect_end(v0)
        return v2 * np.exp(-(t_off - t2) / ckt.tau_idle) - v0

    if miss(0.0) <= 0.0:
        return None
    hi = max(v_hint, ckt.vin)
    for _ in range(60):
        if miss(hi) < 0.0:
            break
        hi *= 2.0
    else:
        return None
    v0 = optimize.brentq(miss, 0.0, hi, xtol=1e-15 * hi, rtol=4.0 * np.finfo(float).eps)
    t2 = rect_end(v0)[0]
    polished = _dcm_newton(ckt, m_rect, e_on, t_off, v0, t2)
    if polished is not None and abs(polished[1] - t2) <= 1e-6 * t_off:
        return polished
    return v0, t2


def _steady_state(ckt: _Circuit, duty: float) -> tuple[tuple[Interval, ...], str, float]:
    """Periodic steady state: the chained intervals, the mode and d2."""
    t_s = 1.0 / ckt.fsw
    t1 = duty * t_s
    t_off = t_s - t1
    m_on, _ = ckt.generator("on")
    m_rect, _ = ckt.generator("rectifier")
    e_on = linalg.expm(m_on * t1)
    phi = linalg.expm(m_rect * t_off) @ e_on
    x0 = np.linalg.solve(np.eye(2) - phi[:2, :2], phi[:2, 2])
    z0 = np.array([x0[0], x0[1], 1.0])
    z1 = e_on @ z0
    ccm = ckt.rectifier == "sync" or (z1[0] > 0.0 and _first_nonpositive(m_rect, z1, t_off) is None)
    if ccm:
        intervals = (
            ckt.interval("on", 0.0, t1, z0),
            ckt.interval("rectifier", t1, t_off, z1),
        )
        return intervals, "CCM", 1.0 - duty

    guesses = [_dcm_guess(ckt, duty)]
    t_cross = _first_nonpositive(m_rect, z1, t_off) if z1[0] > 0.0 else None
    if t_cross is not None:
        guesses.insert(0, (float(x0[1]), t_cross))

    def candidates():  # lazily: the bracketed solve runs only when Newton's method fails
        for v_guess, t2_guess in guesses:
            yield _dcm_newton(ckt, m_rect, e_on, t_off, v_guess, t2_guess)
        yield _dcm_bracketed(ckt, m_rect, e_on, t_off, max(g[0] for g in guesses))

    for found in candidates():
        if found is None:
            continue
        v0, t2 = found
        z0 = np.array([0.0, v0, 1.0])
        z1 = e_on @ z0
        if z1[0] <= 0.0 or v0 <= 0.0:
            continue
        first = _first_nonpositive(m_rect, z1, t2 * (1.0 - 1e-9))
        if first is not None:  # an earlier zero crossing: not the physical solution
            continue
        z2 = _state_at(m_rect, z1, t2)
        v_end = ckt.alpha * v0  # load voltage at the end of the idle interval
        if ckt.topology == "boost" and ckt.vin - v_end > ckt.vf0:
            raise ValueError(
                "the rectifier would conduct again before the period ends (vin above the "
                "discharged output plus vf0); this circuit is outside the reference's range"
            )
        intervals = (
            ckt.interval("on", 0.0, t1, z0),
            ckt.interval("rectifier", t1, t2, z1),
            ckt.interval("idle", t1 + t2, t_off - t2, z2),
        )
        return intervals, "DCM", t2 / t_s
    f_lc = 1.0 / (2.0 * np.pi * np.sqrt(ckt.l * ckt.c))
    raise RuntimeError(
        f"no DCM steady state found at duty {duty:.6g} (LC resonance {f_lc / ckt.fsw:.3g} fsw, "
        f"R C = {ckt.r_load * ckt.c * ckt.fsw:.3g} T: a ringing or fast-discharging output "
        "is outside this reference's range)"
    )


def _vout_avg(ckt: _Circuit, intervals: tuple[Interval, ...]) -> float:
    total = sum(iv.w_vout @ _integral(iv.m, iv.z0, iv.duration) for iv in intervals)
    return float(total * ckt.fsw)


def _solution(ckt: _Circuit, duty: float) -> CircuitSolution:
    intervals, mode, d2 = _steady_state(ckt, duty)
    f = ckt.fsw
    w_i = np.array([1.0, 0.0, 0.0])
    acc = dict.fromkeys(
        ("il", "il2", "sw", "sw2", "rect", "rect2", "iin", "vout", "vout2", "ic2"), 0.0
    )
    i_min, i_max, v_min, v_max = np.inf, -np.inf, np.inf, -np.inf
    for iv in intervals:
        gram = _gram(iv.m, iv.z0, iv.duration)
        w_v = iv.w_vout
        w_c = ckt.w_icap(iv.g)
        il, il2 = gram[0, 2], gram[0, 0]
        acc["il"] += il
        acc["il2"] += il2
        acc["vout"] += w_v @ gram[:, 2]
        acc["vout2"] += w_v @ gram @ w_v
        acc["ic2"] += w_c @ gram @ w_c
        if iv.kind == "on":
            acc["sw"] += il
            acc["sw2"] += il2
            acc["iin"] += il
        elif iv.kind == "rectifier":
            acc["rect"] += il
            acc["rect2"] += il2
            if ckt.topology == "boost":
                acc["iin"] += il
        lo, hi = _extremes(iv.m, iv.z0, iv.duration, w_i)
        i_min, i_max = min(i_min, lo), max(i_max, hi)
        lo, hi = _extremes(iv.m, iv.z0, iv.duration, w_v)
        v_min, v_max = min(v_min, lo), max(v_max, hi)
    avg = {k: v * f for k, v in acc.items()}
    vout_avg = avg["vout"]
    return CircuitSolution(
        topology=ckt.topology,
        rectifier=ckt.rectifier,
        vin=ckt.vin,
        fsw=ckt.fsw,
        duty=duty,
        d2=d2,
        mode=mode,
        vout_avg=vout_avg,
        vout_pp=v_max - v_min,
        iout_avg=vout_avg / ckt.r_load,
        pout=avg["vout2"] / ckt.r_load,
        iin_avg=avg["iin"],
        pin=ckt.vin * avg["iin"],
        loss_switch=ckt.r_switch * avg["sw2"],
        loss_rectifier=ckt.vf0 * avg["rect"] + ckt.rd * avg["rect2"],
        loss_dcr=ckt.dcr * avg["il2"],
        loss_esr=ckt.esr * avg["ic2"],
        i_l_avg=avg["il"],
        i_l_rms=float(np.sqrt(avg["il2"])),
        i_l_pk=i_max,
        i_l_valley=i_min,
        i_switch_avg=avg["sw"],
        i_switch_rms=float(np.sqrt(avg["sw2"])),
        i_rect_avg=avg["rect"],
        i_rect_rms=float(np.sqrt(avg["rect2"])),
        i_cap_rms=float(np.sqrt(avg["ic2"])),
        intervals=intervals,
    )


def _circuit(
    *,
    topology: str,
    rectifier: str,
    vin: float,
    fsw: float,
    l: float,
    dcr: float,
    c: float,
    esr: float,
    r_load: float,
    r_switch: float,
    vf0: float,
    rd: float,
    r_sync: float,
) -> _Circuit:
    if topology not in _TOPOLOGIES:
        raise ValueError(f"topology: expected one of {_TOPOLOGIES}, got {topology!r}")
    if rectifier not in _RECTIFIERS:
        raise ValueError(f"rectifier: expected one of {_RECTIFIERS}, got {rectifier!r}")
    for name, value in (("vin", vin), ("fsw", fsw), ("l", l), ("c", c), ("r_load", r_load)):
        if not np.isfinite(value) or value <= 0.0:
            raise ValueError(f"{name}: expected a positive finite number, got {value!r}")
    for name, value in (
        ("dcr", dcr),
        ("esr", esr),
        ("r_switch", r_switch),
        ("vf0", vf0),
        ("rd", rd),
        ("r_sync", r_sync),
    ):
        if not np.isfinite(value) or value < 0.0:
            raise ValueError(f"{name}: expected a non-negative finite number, got {value!r}")
    diode = rectifier == "diode"
    return _Circuit(
        topology=topology,
        rectifier=rectifier,
        vin=float(vin),
        fsw=float(fsw),
        l=float(l),
        dcr=float(dcr),
        c=float(c),
        esr=float(esr),
        r_load=float(r_load),
        r_switch=float(r_switch),
        vf0=float(vf0) if diode else 0.0,
        rd=float(rd) if diode else float(r_sync),
    )


# --------------------------------------------------------------------------- public


def solve_periodic(
    *,
    topology: Topology,
    rectifier: Rectifier,
    vin: float,
    duty: float,
    fsw: float,
    l: float,
    dcr: float,
    c: float,
    esr: float,
    r_load: float,
    r_switch: float,
    vf0: float = 0.0,
    rd: float = 0.0,
    r_sync: float = 0.0,
) -> CircuitSolution:
    """Exact periodic steady state of the switched converter at a given duty.

    Parameters
    ----------
    topology : {"boost", "buck", "buck-boost"}
        Circuit; "buck-boost" is the inverting stage, solved in magnitudes. [-]
    rectifier : {"diode", "sync", "sync-emulated"}
        "diode": conducts ``vf0 + rd*i`` while forward biased; "sync": ``r_sync`` on whenever
        the main switch is off (the current may reverse); "sync-emulated": ``r_sync`` on
        while the main switch is off, opened when its current reaches zero. [-]
    vin : float
        Source voltage. [V]
    duty : float
        Duty cycle of the main switch, 0 < duty < 1. [-]
    fsw : float
        Switching frequency. [Hz]
    l : float
        Inductance. [H]
    dcr : float
        Inductor series resistance. [ohm]
    c : float
        Output capacitance. [F]
    esr : float
        Output-capacitor series resistance. [ohm]
    r_load : float
        Load resistance across the capacitor branch. [ohm]
    r_switch : float
        Main-switch on-resistance, Rds(on). [ohm]
    vf0 : float, optional
        Diode threshold voltage (diode only). [V]
    rd : float, optional
        Diode slope resistance (diode only). [ohm]
    r_sync : float, optional
        Synchronous-rectifier on-resistance (sync kinds only). [ohm]

    Returns
    -------
    CircuitSolution
        Steady state, averages, RMS values and conduction losses (fields in SI units).

    Raises
    ------
    ValueError
        On a bad argument, or a diode that would conduct again in the idle interval.
    RuntimeError
        When no DCM steady state is found.

    Notes
    -----
    Kirchhoff's laws in each switch state give ``z' = M z`` with ``z = (i_L, v_C, 1)``;
    ``L di/dt = e0 - r i - s v_out``, ``C dv_C/dt = (R g i - v_C)/(R + esr)`` and
    ``v_out = R (v_C + esr g i)/(R + esr)``, where ``s`` and ``g`` say whether the inductor
    sees the output and feeds the output node. Each interval is solved by ``expm(M t)``.
    CCM: ``x(T) = x(0)`` is a linear solve. DCM (the inductor current reaches zero with the
    diode or the emulated sync): Newton's method on ``i_L(t1 + t2) = 0``,
    ``v_C(T) = v_C(0)`` (falling back to Brent's method on ``v_C(0)`` with the exact
    zero-current event), checked for an earlier zero crossing by sampling the exact
    solution. Averages and RMS values are ``w . (integral of z)`` and ``w^T (integral of
    z z^T) w``, integrals in closed form, exact to rounding (about 1e-12 relative). Extrema
    come from 256 exact samples per interval refined by a bounded scalar search.

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimovic, "Fundamentals of Power Electronics", 2nd ed.,
       Kluwer, 2001, ch. 2 (the three converter circuits) and ch. 5 (DCM).
    .. [2] C. F. Van Loan, "Computing integrals involving the matrix exponential",
       IEEE Trans. Automatic Control, vol. 23, no. 3, pp. 395-404, 1978 (block-exponential
       integrals; volume and pages from memory).
    """
    ckt = _circuit(
        topology=topology,
        rectifier=rectifier,
        vin=vin,
        fsw=fsw,
        l=l,
        dcr=dcr,
        c=c,
        esr=esr,
        r_load=r_load,
        r_switch=r_switch,
        vf0=vf0,
        rd=rd,
        r_sync=r_sync,
    )
    if not 0.0 < duty < 1.0:
        raise ValueError(f"duty: expected 0 < duty < 1, got {duty!r}")
    return _solution(ckt, float(duty))


def regulate(
    *,
    vout: float,
    topology: Topology,
    rectifier: Rectifier,
    vin: float,
    fsw: float,
    l: float,
    dcr: float,
    c: float,
    esr: float,
    r_load: float,
    r_switch: float,
    vf0: float = 0.0,
    rd: float = 0.0,
    r_sync: float = 0.0,
) -> CircuitSolution:
    """Steady state at the duty that makes the mean load voltage equal ``vout``.

    Parameters
    ----------
    vout : float
        Target mean load voltage (a magnitude for the inverting buck-boost). [V]
    topology, rectifier, vin, fsw, l, dcr, c, esr, r_load, r_switch, vf0, rd, r_sync
        As in `solve_periodic`. [-, -, V, Hz, H, ohm, F, ohm, ohm, ohm, V, ohm, ohm]

    Returns
    -------
    CircuitSolution
        The steady state at the duty found; ``vout_avg`` equals ``vout`` to about 1e-12
        relative. [-]

    Raises
    ------
    ValueError
        When ``vout`` is outside the range the circuit reaches for 0.001 <= duty < 1.

    Notes
    -----
    The duty is the root of ``vout_avg(duty) - vout``, bracketed by scanning duties upwards
    from 0.001 and refined by Brent's method. The scan stops at the first duty that
    overshoots, so with the boost and the buck-boost (whose gain falls again beyond its
    maximum) the root on the lower-duty branch is the one returned; a target between two
    scan points and above both is caught by a bounded search for the maximum.

    References
    ----------
    .. [1] R. P. Brent, "Algorithms for Minimization without Derivatives", Prentice-Hall,
       1973, ch. 4 (the root finder, as scipy.optimize.brentq; chapter from memory).
    """
    ckt = _circuit(
        topology=topology,
        rectifier=rectifier,
        vin=vin,
        fsw=fsw,
        l=l,
        dcr=dcr,
        c=c,
        esr=esr,
        r_load=r_load,
        r_switch=r_switch,
        vf0=vf0,
        rd=rd,
        r_sync=r_sync,
    )
    if not np.isfinite(vout) or vout <= 0.0:
        raise ValueError(f"vout: expected a positive finite magnitude, got {vout!r}")

    def miss(duty: float) -> float:
        intervals, _, _ = _steady_state(ckt, duty)
        return _vout_avg(ckt, intervals) - vout

    values = []
    bracket = None
    for k, duty in enumerate(_DUTY_GRID):
        values.append(miss(float(duty)))
        if values[-1] >= 0.0:
            if k == 0:
                raise ValueError(
                    f"vout: {vout:g} V is below the output at duty {duty:g} "
                    f"({values[-1] + vout:.6g} V)"
                )
            bracket = (float(_DUTY_GRID[k - 1]), float(duty))
            break
    if bracket is None:
        k = int(np.argmax(values))
        lo = float(_DUTY_GRID[max(k - 1, 0)])
        hi = float(_DUTY_GRID[min(k + 1, len(_DUTY_GRID) - 1)])
        peak = optimize.minimize_scalar(
            lambda d: -miss(d), bounds=(lo, hi), method="bounded", options={"xatol": 1e-10}
        )
        if -peak.fun < 0.0:
            raise ValueError(
                f"vout: {vout:g} V is above the largest output this circuit reaches "
                f"({vout - peak.fun:.6g} V at duty {peak.x:.4g})"
            )
        bracket = (lo, float(peak.x))
    duty = optimize.brentq(miss, *bracket, xtol=1e-15, rtol=4.0 * np.finfo(float).eps)
    return _solution(ckt, duty)


def waveform(
    solution: CircuitSolution, n: int = 1001, *, endpoint: bool = False
) -> SampledWaveform:
    """Sample one period of the exact steady-state waveforms.

    Parameters
    ----------
    solution : CircuitSolution
        A result of `solve_periodic` or `regulate`. [-]
    n : int, optional
        Number of samples. [-]
    endpoint : bool, optional
        Include t = T, propagated from the last interval (so ``x(T)`` can be compared with
        ``x(0)``). [-]

    Returns
    -------
    SampledWaveform
        ``t`` [s], ``i_l`` [A], ``v_c`` [V], ``v_out`` [V] (magnitudes for the inverting
        buck-boost). At a switching instant the sample belongs to the interval starting
        there (right-hand limit).

    Notes
    -----
    Each sample is the exact solution ``expm(M (t - t_start)) z0`` of its interval, stepped
    by the exact one-step propagator ``expm(M h)``.

    References
    ----------
    .. [1] C. F. Van Loan, "Computing integrals involving the matrix exponential",
       IEEE Trans. Automatic Control, vol. 23, no. 3, pp. 395-404, 1978 (augmented-state
       form of the affine system; details from memory).
    """
    if n < 2:
        raise ValueError(f"n: expected at least 2 samples, got {n!r}")
    t_s = 1.0 / solution.fsw
    t = np.linspace(0.0, t_s, n, endpoint=endpoint)
    z = np.empty((n, 3))
    v_out = np.empty(n)
    last = len(solution.intervals) - 1
    for j, iv in enumerate(solution.intervals):
        t_end = iv.t_start + iv.duration
        mask = (t >= iv.t_start) & ((t < t_end) | (j == last))
        idx = np.nonzero(mask)[0]
        if idx.size == 0:
            continue
        s = t[idx] - iv.t_start
        z[idx[0]] = _state_at(iv.m, iv.z0, s[0])
        if idx.size > 1:
            step = linalg.expm(iv.m * (s[1] - s[0]))
            for k in idx[1:]:
                z[k] = step @ z[k - 1]
        v_out[idx] = z[idx] @ iv.w_vout
    return SampledWaveform(t=t, i_l=z[:, 0].copy(), v_c=z[:, 1].copy(), v_out=v_out)
