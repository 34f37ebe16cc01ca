"""The coupled solve: operating point, every loss, temperatures, over many points at once.

:func:`solve` broadcasts the operating axes (vin, vout, load, ambient, fsw), resolves the
design's parameters at the chosen corner, and for every point finds the regulated steady state
(:mod:`lossbudget.topologies`), computes each loss mechanism (:mod:`lossbudget.losses`) and
couples the losses to the thermal network (:mod:`lossbudget.thermal`): losses heat the parts,
hot parts lose more. Losses that the volt-second balance does not carry (switching, node
charge, recovery, dead time, core, AC copper, ESR, leakage) are drawn from the input at the
edges; in a boost they raise the inductor current, elsewhere they add to the input current.
The result is a :class:`~lossbudget.budget.Budget`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace

import numpy as np

from lossbudget.budget import AXES, Budget, MechanismStatus
from lossbudget.design import Corner, Design, Diode, Mosfet, ScaleFactors
from lossbudget.errors import DesignError
from lossbudget.factorial import Variants, stacked_design, take
from lossbudget.losses import capacitors as capm
from lossbudget.losses import diode as dio
from lossbudget.losses import edges as edg
from lossbudget.losses import inductance as ind_m
from lossbudget.losses import magnetics as mag
from lossbudget.losses import mosfet as mos
from lossbudget.losses import overshoot as osh
from lossbudget.losses import ring as rng
from lossbudget.ratings import over_rating, part_ratings
from lossbudget.thermal import build_network, solve_coupled
from lossbudget.topologies import STAGES

N_HARMONICS = 24
CHUNK = 25_000
INNER_STEPS = 4
INNER_STEPS_THERMAL = 2
INNER_STEPS_MAX = 60
BALANCE_TOL = 3e-4
"""The inner passes of a full evaluation go on past INNER_STEPS (up to INNER_STEPS_MAX) where
the power the stage was solved with and the power its losses then draw differ by more than this
fraction of the input power (under a third of BALANCE_FLAG: the shipped designs need no extra
pass, a 4-ohm input fuse needs a few)."""
BALANCE_FLAG = 1e-3
"""A solved point whose Vin·I_in and Pout + every loss still differ by more than this fraction
is flagged not_converged with both figures."""
THERMAL_TOL = 0.01
CEILING = 300.0
EDGE_MECHANISMS = ("turn_on", "turn_off", "coss", "dead_time", "reverse_recovery")


# --------------------------------------------------------------------------------------------
# parameters at a corner
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class _Fet:
    count: int
    t_points: tuple[float, ...]
    r_points: tuple[float, ...]
    v_plateau: float
    qg: float
    qgs2: float
    qgd: float
    rg: float
    a: float | None
    ae: float | None
    eon: tuple[float, float, float] | None
    eoff: tuple[float, float, float] | None
    includes: tuple[str, ...]
    vsd_t: tuple[float, ...] | None
    vsd_v: tuple[float, ...] | None
    qrr: tuple[float, float, float] | None
    erec: float | None


@dataclass(frozen=True, slots=True, kw_only=True)
class _Diode:
    count: int
    vf0_t: tuple[float, ...]
    vf0_v: tuple[float, ...]
    rd_t: tuple[float, ...]
    rd_v: tuple[float, ...]
    a: float | None
    qrr: tuple[float, float, float] | None
    erec: float | None
    leakage: tuple[float, float, float, float] | None


def _num(x):
    """A float from a 0-d result; an array (one value per variant) stays an array."""
    return float(x) if np.ndim(x) == 0 else np.asarray(x, dtype=float)


def _text(x) -> str:
    """A number for a note; the range where it differs between variants."""
    if np.ndim(x) == 0:
        return f"{float(x):g}"
    return f"{float(np.min(x)):g}..{float(np.max(x)):g} (by variant)"


def _pick(v, corner: Corner) -> float:
    """A value at a corner, NaN where the design does not give it (not modelled)."""
    return np.nan if v is None else v.pick(corner)


def _fet(m: Mosfet, corner: Corner) -> _Fet:
    if m.qgs2 is not None:
        qgs2 = m.qgs2.pick(corner)
    elif m.has_gate_timing:
        qgs2 = _num(
            mos.gate_plateau_charge_qgs2(m.qgs.pick(corner), v_th=m.v_th, v_plateau=m.v_plateau)
        )
    else:
        qgs2 = np.nan
    a = ae = None
    if m.qoss is not None:
        a = _num(mos.charge_coefficient_from_q(m.qoss.value.pick(corner), v_ref=m.qoss.at))
    if m.eoss is not None:
        ae = _num(mos.charge_coefficient_from_e(m.eoss.value.pick(corner), v_ref=m.eoss.at))
        if a is None:
            a = ae
    bd = m.body_diode
    includes = tuple(
        sorted(set((m.eon.includes if m.eon else ()) + (m.eoff.includes if m.eoff else ())))
    )
    return _Fet(
        count=m.count,
        t_points=m.rds_on.t,
        r_points=m.rds_on.pick(corner),
        v_plateau=np.nan if m.v_plateau is None else m.v_plateau,
        qg=_pick(m.qg, corner),
        qgs2=qgs2,
        qgd=_pick(m.qgd, corner),
        rg=m.rg,
        a=a,
        ae=ae,
        eon=(m.eon.e.pick(corner), m.eon.at_v, m.eon.at_i) if m.eon else None,
        eoff=(m.eoff.e.pick(corner), m.eoff.at_v, m.eoff.at_i) if m.eoff else None,
        includes=includes,
        vsd_t=bd.vsd.t if bd else None,
        vsd_v=bd.vsd.pick(corner) if bd else None,
        qrr=(bd.qrr.q.pick(corner), bd.qrr.at_i, bd.qrr.at) if bd and bd.qrr else None,
        erec=bd.erec.pick(corner) if bd and bd.erec else None,
    )


def _diode(d: Diode, corner: Corner) -> _Diode:
    return _Diode(
        count=d.count,
        vf0_t=d.vf0.t,
        vf0_v=d.vf0.pick(corner),
        rd_t=d.rd.t,
        rd_v=d.rd.pick(corner),
        a=_num(mos.charge_coefficient_from_q(d.qc.value.pick(corner), v_ref=d.qc.at))
        if d.qc
        else None,
        qrr=(d.qrr.q.pick(corner), d.qrr.at_i, d.qrr.at) if d.qrr else None,
        erec=d.erec.pick(corner) if d.erec else None,
        leakage=(d.leakage.i.pick(corner), d.leakage.at, d.leakage.at_v, d.leakage.doubles_every)
        if d.leakage
        else None,
    )


@dataclass(frozen=True, slots=True, kw_only=True)
class _Context:
    """Everything the evaluation needs that does not change from point to point."""

    design: Design
    corner: Corner
    sw: _Fet
    rect: _Fet | _Diode
    sync: bool
    dcm_allowed: bool
    l: float
    l_at_i: tuple[float, ...]
    l_points: tuple[float, ...]
    dcr: float
    r_pos: dict[str, float]
    caps: tuple
    cap_c: tuple[float, ...]
    cap_esr: tuple[tuple[tuple[float, ...], tuple[float, ...]], ...]
    delta1_ref: float | None
    layers: int
    nodes: tuple[str, ...]
    parts: tuple[str, ...]
    network: object
    gate_drive: bool
    quiescent: bool
    overshoot: bool
    edges_not_modelled: dict[tuple[str, str], str]
    notes: list[str] = field(default_factory=list)
    scale: ScaleFactors = field(default_factory=ScaleFactors)


def _context(design: Design, corner: Corner) -> _Context:
    sync = design.rectifier_kind == "sync"
    rect = _fet(design.rectifier, corner) if sync else _diode(design.rectifier, corner)
    r_pos = dict.fromkeys(("input", "switch", "rectifier", "inductor", "output", "load"), 0.0)
    for res in design.resistors:
        r_pos[res.position] += res.r.pick(corner) / res.count
    ind = design.inductor
    delta1_ref = None
    layers = 1
    w = ind.winding
    notes: list[str] = []
    if w is not None and not w.litz:
        layers = w.layers or 1
        if w.layers == 1:
            notes.append(
                "copper_ac: Dowell's 1-D layer model is poor for a single-layer winding "
                "(toroid, drum core) and near an air gap; treat the AC copper loss as indicative"
            )
        if w.rac_rdc is not None:
            delta1_ref = _num(mag.dowell_delta_from_factor(w.rac_rdc, layers=layers))
            notes.append(
                f"copper_ac: Dowell's Δ1 back-solved from rac_rdc = {_text(w.rac_rdc)} at the "
                "nominal fsw and 25 degC" + ("" if w.layers else ", layers = 1 assumed")
            )
    if ind.l_at_i:
        notes.append(
            "inductor.l: inductance over the current, taken at the mean inductor current per "
            "part (the DC bias the ripple rides on), linear between the points and held "
            "outside them; the peak flux integrates the curve up to the peak current"
        )
    # optional gate and driver data (SPEC §5): an edge without them is not modelled
    drv = design.driver
    fets = [design.switch] + ([design.rectifier] if sync else [])
    gate_drive = drv.given and all(f.qg is not None for f in fets)
    timing_key = "{p}.v_plateau, qgd, qgs (with v_th) or qgs2, and driver.v_drive, r_source, r_sink"
    edges_not_modelled = {}
    sw_d = design.switch
    sw_timing = drv.given and sw_d.has_gate_timing
    if sw_d.eon is None and not sw_timing:
        edges_not_modelled["switch", "turn_on"] = timing_key.format(p="switch") + " (or switch.eon)"
    if sw_d.eoff is None and not sw_timing:
        edges_not_modelled["switch", "turn_off"] = (
            timing_key.format(p="switch") + " (or switch.eoff)"
        )
    overshoot = sw_d.loop_inductance is not None and sw_timing
    if sw_d.loop_inductance is not None:
        notes.append(
            "switch v_pk allowance: the turn-off overshoot L_loop·I_pk/t_fi (switch."
            "loop_inductance, t_fi from the gate-charge timing) replaces limits.v_spike"
            if overshoot
            else "switch.loop_inductance: the turn-off overshoot cannot be derived without the "
            "gate-charge timing (switch.v_plateau, qgd, qgs or qgs2 and the driver); "
            "limits.v_spike is used instead"
        )
    if sync and not (drv.given and design.rectifier.has_gate_timing):
        edges_not_modelled["rectifier", "turn_off"] = timing_key.format(p="rectifier")
    if ind.core is not None and ind.core.ct is None:
        notes.append(
            "core: no inductor.core.ct given, so the core loss has no temperature dependence "
            "(taken at the fitted k, alpha, beta whatever the core's temperature)"
        )
    caps = design.capacitors
    network = _network(design)
    parts = ("switch", "rectifier", "inductor", *(c.name for c in caps))
    return _Context(
        design=design,
        corner=corner,
        sw=_fet(design.switch, corner),
        rect=rect,
        sync=sync,
        dcm_allowed=(not sync) or design.light_load == "diode-emulation",
        l=ind.l.pick(corner),
        l_at_i=ind.l_at_i,
        l_points=tuple(v.pick(corner) for v in ind.l_points),
        dcr=ind.dcr.pick(corner) * (design.calibration or ScaleFactors()).copper,
        r_pos=r_pos,
        caps=caps,
        cap_c=tuple(c.c.pick(corner) for c in caps),
        cap_esr=tuple((c.esr.t, c.esr.pick(corner)) for c in caps),
        delta1_ref=delta1_ref,
        layers=layers,
        nodes=network.nodes,
        parts=parts,
        network=network,
        gate_drive=gate_drive,
        quiescent=bool(np.isfinite(drv.quiescent))
        and (drv.supply != "aux" or drv.v_aux is not None or np.isfinite(drv.v_drive)),
        edges_not_modelled=edges_not_modelled,
        overshoot=overshoot,
        notes=notes,
        scale=design.calibration or ScaleFactors(),
    )


def _at_points(ctx: _Context, g: _Grid) -> _Context:
    """The context with every per-variant array taken at the points' variants.

    A single design's context holds no such arrays and is returned as it is. The thermal
    network stays whole: its per-variant transfer resistances are taken by the coupled solve.
    """
    if g.variant is None:
        return ctx
    idx = g.variant
    return replace(
        ctx,
        **{f.name: take(getattr(ctx, f.name), idx) for f in fields(ctx) if f.name != "network"},
    )


def thermal_nodes(design: Design) -> tuple[str, ...]:
    """Names of the thermal network's nodes (parts, cases, sinks), as the budget reports them."""
    return _network(design).nodes


def thermal_paths(design: Design) -> tuple[tuple[str, str, float, str], ...]:
    """Every resistance of the design's thermal network, with the key it comes from.

    Returns
    -------
    tuple
        (node, node, resistance [K/W], the design key and how it is counted) per path or
        link; a part of ``count`` parallel devices has its resistances divided by the count.
    """
    res: list[tuple[str, str, float, str]] = []

    def part(name: str, th, count: int) -> None:
        per = (f" / count {count}" if count > 1 else "") if np.ndim(count) == 0 else (
            " / count (by variant)")
        if th.sink is not None:
            if th.rth_jc is not None and th.rth_cs is not None:
                res.append((name, f"{name}.case", th.rth_jc / count, f"{name}.thermal.rth_jc{per}"))
                res.append((f"{name}.case", th.sink, th.rth_cs / count,
                            f"{name}.thermal.rth_cs{per}"))
            elif th.rth_jc is not None:
                res.append((name, th.sink, th.rth_jc / count, f"{name}.thermal.rth_jc{per}"))
            elif th.rth_jb is not None:
                res.append((name, th.sink, th.rth_jb / count, f"{name}.thermal.rth_jb{per}"))
        if th.rth_ha is not None:
            res.append((name, "ambient", th.rth_ha / count, f"{name}.thermal.rth_ha{per}"))
        if th.rth_ja is not None:
            res.append((name, "ambient", th.rth_ja / count, f"{name}.thermal.rth_ja{per}"))

    part("switch", design.switch.thermal, design.switch.count)
    part("rectifier", design.rectifier.thermal, design.rectifier.count)
    part("inductor", design.inductor.thermal, design.inductor.count)
    for c in design.capacitors:
        part(c.name, c.thermal, c.count)
    rth_scale = dict(design.calibration.rth) if design.calibration else {}
    for s in design.sinks:
        if s.rth_to_ambient is not None:
            scaled = rth_scale.get(s.name, 1.0)
            res.append((s.name, "ambient", s.rth_to_ambient * scaled,
                         f"thermal.sink {s.name}: rth_to_ambient"
                         + (f" × calibration.rth.{s.name} {scaled:g}" if scaled != 1.0 else "")))
    for link in design.links:
        res.append((link.between[0], link.between[1], link.rth, "thermal.link"))
    return tuple(res)


def _network(design: Design):
    nodes: list[str] = []
    for name, th in (("switch", design.switch.thermal), ("rectifier", design.rectifier.thermal),
                     ("inductor", design.inductor.thermal),
                     *((c.name, c.thermal) for c in design.capacitors)):
        nodes.append(name)
        if th.sink is not None and th.rth_jc is not None and th.rth_cs is not None:
            nodes.append(f"{name}.case")
    nodes.extend(s.name for s in design.sinks)
    res = [(a, b, r) for a, b, r, _ in thermal_paths(design)]
    try:
        return build_network(nodes, res)
    except ValueError as exc:
        raise DesignError(f"{design.source}: thermal: {exc}") from None


# --------------------------------------------------------------------------------------------
# one evaluation of every loss at given node temperatures
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True, kw_only=True)
class _Grid:
    vin: np.ndarray
    vout: np.ndarray
    load: np.ndarray
    ambient: np.ndarray
    fsw: np.ndarray
    variant: np.ndarray | None = None

    def take(self, index) -> _Grid:
        return _Grid(
            **{a: getattr(self, a)[index] for a in AXES},
            variant=None if self.variant is None else self.variant[index],
        )


@dataclass(slots=True, kw_only=True)
class _Evaluation:
    losses: dict
    zero: dict
    node_power: np.ndarray
    stage: object
    stresses: dict
    vout_pp: np.ndarray
    source_power: np.ndarray
    extrapolated: np.ndarray
    reverse_current: np.ndarray
    notes: np.ndarray  # per point: what is extrapolated or clipped ("" where nothing is)
    starved: np.ndarray  # the input resistor cannot pass the power the stage draws
    ring: tuple | None = None


def _note(notes: np.ndarray, mask, text: str) -> np.ndarray:
    """Append ``text`` to the per-point notes where ``mask`` holds."""
    mask = np.broadcast_to(np.asarray(mask, dtype=bool), notes.shape)
    if not mask.any():
        return notes
    joined = np.where(notes == "", text, notes + "; " + text) if notes.size else notes
    return np.where(mask, joined, notes).astype(object)


def _supply_voltage(ctx: _Context, vin_eff, vc):
    drv = ctx.design.driver
    if drv.supply == "vin":
        return vin_eff
    if drv.supply == "vout":
        return vc
    return np.full(np.shape(vc), drv.v_aux if drv.v_aux is not None else drv.v_drive)


def _no_reason(*_):
    """Stands in for np.where where the zero reasons are not wanted."""
    return None


def _gate_timing(fet: _Fet, drv) -> tuple:
    """Transition times (t_ri, t_fv, t_rv, t_fi) of a MOSFET from its gate charges."""
    with np.errstate(invalid="ignore", divide="ignore"):
        ig_on = mos.gate_current_on(
            v_drive=drv.v_drive,
            v_plateau=fet.v_plateau,
            r_source=drv.r_source,
            rg_on=drv.rg_on,
            rg=fet.rg,
        )
        ig_off = mos.gate_current_off(
            v_plateau=fet.v_plateau, r_sink=drv.r_sink, rg_off=drv.rg_off, rg=fet.rg
        )
        return (
            mos.transition_time(fet.qgs2, i_gate=ig_on),
            mos.transition_time(fet.qgd, i_gate=ig_on),
            mos.transition_time(fet.qgd, i_gate=ig_off),
            mos.transition_time(fet.qgs2, i_gate=ig_off),
        )


def _ring_charge(ctx: _Context) -> tuple[float, float]:
    """Charge coefficients of the switch and the opposite device on the C ∝ v^-1/2 law."""
    return (0.0 if ctx.sw.a is None else ctx.sw.a), (0.0 if ctx.rect.a is None else ctx.rect.a)


def _delta1(ctx: _Context, f, t_l):
    """Dowell's Δ1 of the winding at frequency ``f``, or None without winding data."""
    d = ctx.design
    w = d.inductor.winding
    if w is None or w.litz or (w.rac_rdc is None and w.wire_diameter is None):
        return None
    rho = mag.copper_resistivity_at(t_l)
    if ctx.delta1_ref is not None:
        rho_ref = mag.copper_resistivity_at(25.0)
        return ctx.delta1_ref * np.sqrt(f / d.operating.fsw.nom) * np.sqrt(rho_ref / rho)
    delta = mag.skin_depth(f, resistivity=rho)
    return mag.foil_equivalent_delta(w.wire_diameter, skin_depth=delta, porosity=w.porosity)


def _ring_q(ctx: _Context, st, *, dcr, t_l, r_loop):
    """Quality factor and series resistance of the DCM node ring at every point.

    ``operating.ring_q`` where given (R_ring = ω0·L/Q); otherwise R_ring = the winding's
    resistance at the small-signal ring frequency (Dowell) + the core's series equivalent
    (Steinmetz at the ring's initial current) + the series resistors in the inductor path
    (SPEC §2.3). Returns (Q, R_ring), or None where the node holds no charge.
    """
    a_s, a_o = _ring_charge(ctx)
    if np.all(np.asarray(a_s + a_o) <= 0.0):
        return None
    ind = ctx.design.inductor
    # the ring runs at (almost) zero inductor current: the inductance at its lowest-current point
    l_stage = ctx.l / ind.count
    v_b, v_set = st.v_switch_block, st.v_switch_settled
    with np.errstate(invalid="ignore", divide="ignore"):
        w0 = rng.ring_frequency_small_signal(
            v_set=v_set, v_block=v_b, l=l_stage, a_self=a_s, a_opp=a_o
        )
        q_given = ctx.design.operating.ring_q
        if q_given is not None:
            q = np.full(np.shape(v_b), q_given)
            return q, rng.ring_resistance_from_q(q, omega0=w0, l=l_stage)
        f_r = w0 / (2.0 * np.pi)
        delta1 = _delta1(ctx, f_r, t_l)
        fr = 1.0 if delta1 is None else mag.ac_resistance_factor_dowell(delta1, layers=ctx.layers)
        r = dcr * fr + r_loop
        core = ind.core
        if core is not None:
            u0 = rng.ring_energy(v_b, v_set=v_set, v_block=v_b, a_self=a_s, a_opp=a_o)
            i_r = np.sqrt(2.0 * u0 / l_stage)
            r_core = rng.core_series_resistance_steinmetz(
                i_r / ind.count, f=f_r, l=ctx.l, turns=core.turns, ae=core.ae, ve=core.ve,
                k=core.k, alpha=core.alpha, beta=core.beta,
            )
            if core.ct is not None:
                r_core = r_core * mag.core_loss_temperature_factor(
                    t_l, ct0=core.ct[0], ct1=core.ct[1], ct2=core.ct[2]
                )
            r = r + r_core / ind.count
        return rng.ring_q_from_resistance(r, omega0=w0, l=l_stage), r


def _ring_turn_on(ctx: _Context, st, *, v, fsw, q):
    """The DCM node ring at the main switch's turn-on: coss and decay energies per cycle.

    The context's charges, inductance and ``dcm_turn_on`` for
    :func:`lossbudget.losses.edges.dcm_turn_on_energies`; None where the node holds no charge.
    """
    a_s, a_o = _ring_charge(ctx)
    if np.all(np.asarray(a_s + a_o) <= 0.0) or q is None:
        return None
    return edg.dcm_turn_on_energies(
        v,
        fsw=fsw,
        dcm=st.dcm,
        v_block=st.v_switch_block,
        v_set=st.v_switch_settled,
        duty=st.duty,
        d2=st.d2,
        q=q,
        l=ctx.l / ctx.design.inductor.count,
        a_self=a_s,
        a_opp=a_o,
        ae_self=ctx.sw.ae,
        ae_opp=ctx.rect.ae if ctx.sync else None,
        mode=ctx.design.operating.dcm_turn_on,
    )


def _edge(ctx: _Context, st, *, v, fsw, t_sw, t_r, ring_q, reasons=True):
    """Switching-edge losses of both devices (SPEC §2.3), energies × fsw.

    ``ring_q`` is the quality factor of the DCM node ring at each point (:func:`_ring_q`).
    The zero reasons are strings over every point; ``reasons=False`` (the thermal and
    intermediate passes, which never report them) leaves them None.
    """
    pick = np.where if reasons else _no_reason
    sw, rc = ctx.sw, ctx.rect
    drv = ctx.design.driver
    dcm = st.dcm
    i_v = st.i_valley
    i_pk = st.i_pk
    a_sw = 0.0 if sw.a is None else sw.a
    a_op = 0.0 if rc.a is None else rc.a
    ae_sw = sw.ae
    ae_op = rc.ae if ctx.sync else None
    q_node = mos.node_charge(v, a=a_sw) + mos.node_charge(v, a=a_op)
    t_dead = drv.dead_time
    out: dict[tuple[str, str], np.ndarray] = {}
    zero: dict[tuple[str, str], np.ndarray] = {}
    t_ri, t_fv, t_rv, t_fi = _gate_timing(sw, drv)
    reversed_ = ~dcm & (i_v < 0)
    hard_on = ~dcm & (i_v > 0)
    # main switch turn-on
    if sw.eon is not None:
        e_on = mos.reference_energy_scaled(
            sw.eon[0], at_v=sw.eon[1], at_i=sw.eon[2], v=v, i=np.maximum(i_v, 0.0)
        )
    else:
        e_on = mos.turn_on_energy(v, np.maximum(i_v, 0.0), t_ri=t_ri, t_fv=t_fv)
    out["switch", "turn_on"] = np.where(hard_on, e_on, 0.0) * fsw
    zero["switch", "turn_on"] = pick(
        dcm, "zero-current turn-on (DCM)", pick(reversed_, "reversed current at turn-on", "")
    )
    # main switch turn-off at the peak current
    if sw.eoff is not None:
        e_off = mos.reference_energy_scaled(
            sw.eoff[0], at_v=sw.eoff[1], at_i=sw.eoff[2], v=v, i=i_pk
        )
    else:
        # the channel is relieved of the energy the node stores, the same energy that coss
        # charges at the next hard turn-on (one energy for both edges)
        q_er = mos.node_charge_energy_equivalent(
            v,
            e_node=mos.hard_turn_on_coss_energy(
                v, a_self=a_sw, a_opp=a_op, ae_self=ae_sw, ae_opp=ae_op
            ),
        )
        e_off = mos.turn_off_energy(v, i_pk, t_rv=t_rv, t_fi=t_fi, q_node=q_er)
    out["switch", "turn_off"] = e_off * fsw
    zero["switch", "turn_off"] = pick(e_off == 0, "capacitive turn-off (slow node)", "")
    # node charge at the main switch's turn-on; in DCM from the voltage the node ring leaves
    coss_given = sw.a is not None
    ring = _ring_turn_on(ctx, st, v=v, fsw=fsw, q=ring_q)
    if ring is not None:
        out["inductor", "ring"] = np.where(dcm, ring["e_decay"], 0.0) * fsw
        zero["inductor", "ring"] = pick(dcm, pick(ring["e_decay"] == 0, "no node charge", ""),
                                        "no idle interval (CCM)")
    if coss_given:
        e_hard = mos.hard_turn_on_coss_energy(
            v, a_self=a_sw, a_opp=a_op, ae_self=ae_sw, ae_opp=ae_op
        )
        e_dcm = ring["e_coss"]
        if t_dead is not None:
            v_r = mos.residual_voltage(
                v, charge_moved=np.abs(i_v) * t_dead, a_self=a_sw, a_opp=a_op
            )
            e_rev = mos.partial_swing_coss_energy(
                v, v_residual=v_r, a_self=a_sw, a_opp=a_op, ae_self=ae_sw, ae_opp=ae_op
            )
        else:
            e_rev = e_hard
        e_coss = np.where(dcm, e_dcm, np.where(reversed_, e_rev, e_hard))
        if "coss" in sw.includes:
            e_coss = np.zeros_like(e_coss)
        out["switch", "coss"] = e_coss * fsw
        zero["switch", "coss"] = pick(
            e_coss == 0,
            pick(
                reversed_,
                "soft turn-on: reversed current swings the node",
                "included in switch.eon" if "coss" in sw.includes else "no voltage at turn-on",
            ),
            "",
        )
    # reverse recovery
    if rc.qrr is not None:
        q = mos.qrr_scaled(
            rc.qrr[0], i=np.maximum(i_v, 0.0), i_ref=rc.qrr[1], t_j=t_r, t_ref=rc.qrr[2]
        )
        q = np.where(hard_on, q, 0.0)
        e_d = mos.recovery_energy_diode(q, v=v, erec=rc.erec)
        e_s = mos.recovery_energy_switch(q, v=v, erec=rc.erec)
        if "reverse_recovery" in sw.includes:
            e_s = np.zeros_like(e_s)
        out["rectifier", "reverse_recovery"] = e_d * fsw
        out["switch", "reverse_recovery"] = e_s * fsw
        why = pick(
            dcm,
            "no forward current at turn-on (DCM)",
            pick(reversed_, "body diode not conducting (reversed current)", ""),
        )
        zero["rectifier", "reverse_recovery"] = why
        zero["switch", "reverse_recovery"] = why
    if ctx.sync:
        # the synchronous FET: its body diode clamps both edges unless the current reverses
        _, _, t_rv_r, t_fi_r = _gate_timing(rc, drv)
        q_er_r = mos.node_charge_energy_equivalent(
            v,
            e_node=mos.hard_turn_on_coss_energy(
                v, a_self=a_op, a_opp=a_sw, ae_self=ae_op, ae_opp=ae_sw
            ),
        )
        e_off_r = mos.turn_off_energy(v, np.abs(i_v), t_rv=t_rv_r, t_fi=t_fi_r, q_node=q_er_r)
        out["rectifier", "turn_off"] = np.where(reversed_, e_off_r, 0.0) * fsw
        zero["rectifier", "turn_off"] = pick(
            reversed_,
            pick(e_off_r == 0, "capacitive turn-off (slow node)", ""),
            pick(dcm, "zero-current turn-off (diode emulation)", "body diode clamps the turn-off"),
        )
        out["rectifier", "turn_on"] = np.zeros_like(v)
        zero["rectifier", "turn_on"] = np.full(np.shape(v), "zero-voltage turn-on", dtype=object)
        if coss_given and t_dead is not None and rc.a is not None:
            v_r = mos.residual_voltage(v, charge_moved=i_pk * t_dead, a_self=a_op, a_opp=a_sw)
            e_sync = mos.partial_swing_coss_energy(
                v, v_residual=v_r, a_self=a_op, a_opp=a_sw, ae_self=ae_op, ae_opp=ae_sw
            )
            out["rectifier", "coss"] = e_sync * fsw
            zero["rectifier", "coss"] = pick(e_sync == 0, "node swings within the dead time", "")
        if t_dead is not None and rc.vsd_v is not None:
            vsd_r = dio.linear_in_temperature(t_r, t_points=rc.vsd_t, values=rc.vsd_v)
            t1 = mos.body_diode_conduction_time(t_dead, i=i_pk, q_node=q_node)
            e1 = mos.dead_time_energy(vsd_r, i=i_pk, t_conduct=t1)
            e2 = np.where(hard_on, mos.dead_time_energy(vsd_r, i=i_v, t_conduct=t_dead), 0.0)
            out["rectifier", "dead_time"] = (e1 + e2) * fsw
            zero["rectifier", "dead_time"] = pick(
                e1 + e2 == 0, "node swing fills the dead time", ""
            )
            if sw.vsd_v is not None:
                vsd_s = dio.linear_in_temperature(t_sw, t_points=sw.vsd_t, values=sw.vsd_v)
                t2 = mos.body_diode_conduction_time(t_dead, i=np.abs(i_v), q_node=q_node)
                e3 = np.where(reversed_, mos.dead_time_energy(vsd_s, i=i_v, t_conduct=t2), 0.0)
                out["switch", "dead_time"] = e3 * fsw
                zero["switch", "dead_time"] = pick(e3 == 0, "current not reversed", "")
            dead = {"t1": t1, "t2": np.where(hard_on, t_dead, 0.0)}
        else:
            dead = None
    else:
        dead = None
    return out, zero, dead


def _calibrated(ctx: _Context, losses: dict) -> dict:
    """Losses with the design's calibration factors on the edge energies and the core."""
    k = ctx.scale
    factor = {"turn_on": k.switching, "turn_off": k.switching, "coss": k.coss}
    out = {key: val * factor.get(key[1], 1.0) for key, val in losses.items()}
    if ("inductor", "core") in out:
        out["inductor", "core"] = out["inductor", "core"] * k.core
    return out


def _cap_losses(ctx: _Context, st, *, position, wave, v_dc, fsw, temps, full=True):
    """ESR losses of the banks at one position sharing a ripple current by impedance.

    The models are in :mod:`lossbudget.losses.capacitors`. With ``full=False`` only the
    losses: no RMS currents, no voltage ripple.
    """
    idx = [k for k, c in enumerate(ctx.caps) if c.position == position]
    if not idx:
        return {}, {}, None
    ms_ac = np.maximum(wave.mean_square() - wave.mean() ** 2, 0.0)
    esr = []
    cap = []
    for k in idx:
        c = ctx.caps[k]
        t_pts, r_pts = ctx.cap_esr[k]
        esr.append(
            np.maximum(
                dio.linear_in_temperature(temps[c.name], t_points=t_pts, values=r_pts),
                capm.ESR_FLOOR,
            )
            / c.count
        )
        c_val = ctx.cap_c[k]
        if c.c_bias:
            c_at = capm.capacitance_at_bias(
                v_dc,
                c_points_v=[p[0] for p in c.c_bias],
                c_points=[p[1] for p in c.c_bias],
                scale=c_val / c.c.typ,
            )
        else:
            c_at = np.full(np.shape(v_dc), c_val)
        cap.append(c_at * c.count)
    shape = np.shape(ms_ac)
    esr_b = np.stack([np.broadcast_to(e, shape) for e in esr], axis=-1)
    cap_b = np.stack([np.broadcast_to(x, shape) for x in cap], axis=-1)
    harm = wave.harmonics_rms(N_HARMONICS) if len(idx) > 1 else np.zeros((*shape, 0))
    ms = capm.bank_mean_squares(harm, ms_ac, esr=esr_b, capacitance=cap_b, fsw=fsw)
    losses = {}
    rms = {}
    for j, k in enumerate(idx):
        losses[ctx.caps[k].name, "esr"] = capm.esr_loss(esr_b[..., j], ms[..., j])
        rms[ctx.caps[k].name] = np.sqrt(ms[..., j])
    if not full:
        return losses, {}, None
    mean = wave.mean()[..., None]
    ripple = capm.ripple_voltage_banks(
        wave.t,
        wave.start - mean,
        wave.end - mean,
        fsw=fsw,
        esr=esr_b,
        capacitance=cap_b,
        n_harmonics=N_HARMONICS,
    )
    return losses, rms, ripple


def _evaluate(
    ctx: _Context,
    g: _Grid,
    temps: dict[str, np.ndarray],
    *,
    full: bool = True,
    probe: bool = False,
):
    """Every loss at given node temperatures: an _Evaluation, or the node powers (not full).

    ``probe`` runs the passes of a full evaluation only as far as the last stage solve, which
    tells the infeasible points, and returns that stage with the node powers a thermal
    evaluation (not full) at the same temperatures returns, which its first passes share.
    """
    ctx = _at_points(ctx, g)
    d = ctx.design
    sw, rc = ctx.sw, ctx.rect
    shape = g.vin.shape
    t_sw, t_r, t_l = temps["switch"], temps["rectifier"], temps["inductor"]
    k_ch = ctx.scale.conduction
    rds_sw = mos.rds_on_at(t_sw, t_points=sw.t_points, r_points=sw.r_points) / sw.count * k_ch
    extrap = mos.rds_on_extrapolated(t_sw, t_points=sw.t_points)
    notes = _note(
        np.full(shape, "", dtype=object),
        extrap,
        "switch Rds(on) extrapolated above its hottest point",
    )
    if ctx.sync:
        r_rc = mos.rds_on_at(t_r, t_points=rc.t_points, r_points=rc.r_points) / rc.count * k_ch
        extrap_rc = mos.rds_on_extrapolated(t_r, t_points=rc.t_points)
        notes = _note(notes, extrap_rc, "rectifier Rds(on) extrapolated above its hottest point")
        extrap = extrap | extrap_rc
        vf0 = np.zeros(shape)
    else:
        r_rc = dio.linear_in_temperature(t_r, t_points=rc.rd_t, values=rc.rd_v) / rc.count
        vf0 = dio.linear_in_temperature(t_r, t_points=rc.vf0_t, values=rc.vf0_v)
        # a line through the points continued until it is clipped at zero: flagged
        for name, t_pts, values, got in (
            ("Vf0", rc.vf0_t, rc.vf0_v, vf0),
            ("Rd", rc.rd_t, rc.rd_v, r_rc),
        ):
            clipped = (np.shape(t_pts)[-1] > 1) & (got <= 0.0) & (np.max(values, axis=-1) > 0)
            notes = _note(notes, clipped, f"rectifier {name} clipped at 0 outside its points")
            extrap = extrap | clipped
    ind = d.inductor
    dcr = mag.copper_resistance_at(ctx.dcr, t_l, t_ref=ind.dcr_at) / ind.count
    rp = ctx.r_pos
    buck = d.topology == "buck"
    r_sw = rds_sw + rp["switch"]
    r_rect = r_rc + rp["rectifier"] + (0.0 if buck else rp["output"])
    r_l = dcr + rp["inductor"] + (rp["output"] if buck else 0.0)
    vc = g.vout + rp["load"] * g.load
    qg_total = 0.0
    if ctx.gate_drive:
        qg_total = sw.qg * sw.count + (rc.qg * rc.count if ctx.sync else 0.0)
    i_gate = qg_total * g.fsw
    i_q = (d.driver.quiescent if np.isfinite(d.driver.quiescent) else 0.0) * ctx.scale.quiescent
    i_sup = i_gate + i_q
    supply = d.driver.supply
    i_out = g.load + (i_sup if supply == "vout" else 0.0)
    v_edge_of = {"boost": lambda vi: vc, "buck": lambda vi: vi, "buck-boost": lambda vi: vi + vc}[
        d.topology
    ]
    stage_fn = STAGES[d.topology]
    op = d.operating
    vin_eff = g.vin
    p_extra = np.zeros(shape)
    # the inductance per part: a constant, or the curve over the current taken at the mean
    # inductor current of the previous pass (the first pass from the lossless estimate)
    l_part = np.full(shape, ctx.l)
    if ctx.l_at_i:
        i_dc = {"boost": vc * i_out / g.vin, "buck": i_out,
                "buck-boost": i_out * (g.vin + vc) / g.vin}[d.topology]
        l_part = ind_m.inductance_at_current(i_dc / ind.count, points_i=ctx.l_at_i,
                                             points_l=ctx.l_points)

    def tally(st, edge, zero, dead, slow, vin_eff):
        """The losses of one pass and the node powers they heat."""
        losses: dict[tuple[str, str], np.ndarray] = {}
        zeros: dict[tuple[str, str], np.ndarray] = dict(zero)
        # conduction
        losses["switch", "conduction"] = mos.conduction_loss(rds_sw, i_rms=st.i_switch.rms())
        if ctx.sync:
            ms = st.i_rect.mean_square()
            if dead is not None:
                ms = ms - (st.i_pk**2 * dead["t1"] + st.i_valley**2 * dead["t2"]) * g.fsw
            losses["rectifier", "conduction"] = r_rc * np.maximum(ms, 0.0)
        else:
            losses["rectifier", "forward"] = dio.forward_loss(
                vf0, r_rc, i_avg=st.i_rect.mean(), i_rms=st.i_rect.rms()
            )
        losses["inductor", "copper_dc"] = dcr * st.i_l.mean_square()
        losses.update(edge)
        losses.update(slow["losses"])
        zeros.update(slow["zero"])
        # series resistors
        i_in_total = st.i_in_avg + (i_sup if supply == "vin" else 0.0)
        # mean squares only at the positions that hold a resistor
        ms_at = {
            "input": lambda: i_in_total**2,
            "switch": st.i_switch.mean_square,
            "rectifier": st.i_rect.mean_square,
            "inductor": st.i_l.mean_square,
            "output": st.i_out_wave.mean_square,
            "load": lambda: g.load**2,
        }
        for res in d.resistors:
            losses[res.name, "conduction"] = (
                res.r.pick(ctx.corner) / res.count * ms_at[res.position]()
            )
        v_supply = _supply_voltage(ctx, vin_eff, vc)
        if ctx.gate_drive:
            losses["driver", "gate_drive"] = mos.gate_drive_power(
                qg_total, v_supply=v_supply, fsw=g.fsw
            )
        if ctx.quiescent:
            losses["controller", "quiescent"] = i_q * v_supply
        # node powers: each part's losses, plus the gate energy burnt in its internal resistance
        share_sw = mos.gate_resistance_share(
            rg=sw.rg,
            r_source=d.driver.r_source,
            rg_on=d.driver.rg_on,
            r_sink=d.driver.r_sink,
            rg_off=d.driver.rg_off,
        )
        node_power = np.zeros((*shape, len(ctx.nodes)))
        for (comp, _), val in losses.items():
            if comp in ctx.nodes:
                node_power[..., ctx.nodes.index(comp)] += val
        if ctx.gate_drive:
            node_power[..., ctx.nodes.index("switch")] += (
                sw.qg * sw.count * g.fsw * d.driver.v_drive * share_sw
            )
        if ctx.sync and ctx.gate_drive:
            share_rc = mos.gate_resistance_share(
                rg=rc.rg,
                r_source=d.driver.r_source,
                rg_on=d.driver.rg_on,
                r_sink=d.driver.r_sink,
                rg_off=d.driver.rg_off,
            )
            node_power[..., ctx.nodes.index("rectifier")] += (
                rc.qg * rc.count * g.fsw * d.driver.v_drive * share_rc
            )
        return losses, zeros, i_in_total, node_power

    slow = slow_first = thermal = None
    steps = INNER_STEPS if full else INNER_STEPS_THERMAL
    last = steps - 1  # index of the final pass; a full evaluation extends it until balanced
    step = -1
    while step < last:
        step += 1
        # what only the reported point needs (reasons, ripple, stresses): the last full pass
        report = full and step == last
        l_used = l_part
        st = stage_fn(
            vin=vin_eff,
            vc=vc,
            i_out=i_out,
            fsw=g.fsw,
            l=l_used / ind.count,
            r_sw=r_sw,
            r_l=r_l,
            r_rect=r_rect,
            vf0=vf0,
            p_edge=p_extra,
            dcm_allowed=ctx.dcm_allowed,
            max_duty=op.max_duty,
            min_on_time=op.min_on_time,
            min_off_time=op.min_off_time,
        )
        if probe and step == steps - 1:
            return st, thermal
        if ctx.l_at_i:
            i_mean = st.i_l.mean() / ind.count
            l_part = np.where(
                np.isfinite(i_mean),
                ind_m.inductance_at_current(np.where(np.isfinite(i_mean), i_mean, 0.0),
                                            points_i=ctx.l_at_i, points_l=ctx.l_points),
                l_used,
            )
        v = v_edge_of(vin_eff)
        ring = _ring_q(ctx, st, dcr=dcr, t_l=t_l, r_loop=r_l - dcr)
        edge, zero, dead = _edge(
            ctx, st, v=v, fsw=g.fsw, t_sw=t_sw, t_r=t_r, ring_q=None if ring is None else ring[0],
            reasons=report,
        )
        for key in ctx.edges_not_modelled:  # no gate data: the edge is not modelled
            edge.pop(key, None)
        edge = _calibrated(ctx, edge)
        i_in_total = st.i_in_avg + (i_sup if supply == "vin" else 0.0)
        # an infeasible point keeps its first, finite inputs so that its reason stays the
        # stage's own (NaN would turn every check false). Behind an input resistor R the
        # stage draws P = vin_eff·I_in; vin_eff = vin - R·P/vin_eff has the root
        # (vin + sqrt(vin² - 4RP))/2, which the update takes so that a large R converges in
        # a few passes (the plain vin - R·I_in update has a loop gain of R·I_in/vin_eff); with
        # 4RP > vin² no input voltage delivers the power: the point is left to the stage.
        r_in = rp["input"]
        starved = np.zeros(shape, dtype=bool)
        if np.any(r_in > 0):
            p_stage = vin_eff * i_in_total
            disc = g.vin**2 - 4.0 * r_in * p_stage
            with np.errstate(invalid="ignore"):
                root = 0.5 * (g.vin + np.sqrt(np.maximum(disc, 0.0)))
            vin_next = np.where(np.isfinite(i_in_total), root, g.vin)
            starved = np.isfinite(disc) & (disc < 0)
        else:
            vin_next = g.vin
        # the slow losses (harmonics) once per thermal step; again on the reported pass of the
        # final evaluation, so its stresses and rows belong to the reported operating point
        if step == 0 or slow is None or report:
            slow = _slow_losses(
                ctx, st, g=g, vin_eff=vin_eff, vc=vc, temps=temps, dcr=dcr, full=report,
                l_part=l_used,
            )
            slow["losses"] = _calibrated(ctx, slow["losses"])
        if step == 0:
            slow_first = slow
        if probe and step == INNER_STEPS_THERMAL - 1:
            # a thermal evaluation ends here, with the slow losses of its first pass
            thermal = tally(st, edge, zero, dead, slow_first, vin_next)[-1]
        # the volt-second balance carries each resistive drop at its interval's mean current;
        # the ripple's share of the I²R losses is drawn at the edges like the others
        p_ripple = (
            r_sw * st.i_switch.ripple_square()
            + r_rect * st.i_rect.ripple_square()
            + r_l * st.i_l.ripple_square()
        )
        p_new = sum(edge.values()) + sum(slow["losses"].values()) + p_ripple
        p_next = np.where(np.isfinite(p_new), p_new, 0.0)
        if report and not probe and last < INNER_STEPS_MAX - 1:
            # the stage of this pass was solved with p_extra and vin_eff; its losses draw
            # p_new at vin_next: where they differ, pass again (the energy balance
            # Vin·I_in = Pout + every loss holds only where they agree). A point that agrees
            # keeps this pass's inputs, so the next pass repeats it exactly: its result does
            # not depend on the other points of the grid.
            with np.errstate(invalid="ignore"):
                gap = np.abs(p_new - p_extra) + np.abs(vin_next - vin_eff) * np.abs(i_in_total)
                scale = np.abs(vin_eff * i_in_total)
                open_ = np.isfinite(gap) & (gap > BALANCE_TOL * scale)
            if np.any(open_):
                last += 1
                vin_next = np.where(open_, vin_next, vin_eff)
                p_next = np.where(open_, p_next, p_extra)
        vin_eff = vin_next
        p_extra = p_next
    losses, zeros, i_in_total, node_power = tally(st, edge, zero, dead, slow, vin_eff)
    if not full:
        return node_power
    aux = d.driver.supply == "aux"
    source_power = g.vin * i_in_total + (
        losses.get(("driver", "gate_drive"), 0.0) + losses.get(("controller", "quiescent"), 0.0)
        if aux
        else 0.0
    )
    stresses = _stresses(ctx, st, vc=vc, vin_eff=vin_eff, slow=slow)
    notes = _note(notes, slow["extrapolated"], "core-loss fit extrapolated outside its fit_range")
    for _key, text in slow["notes"]:
        notes = _note(notes, text[0], text[1])
    extrap = extrap | slow["extrapolated"] | slow["clipped"]
    return _Evaluation(
        losses=losses,
        zero=zeros,
        node_power=node_power,
        stage=st,
        stresses=stresses,
        vout_pp=slow["vout_pp"],
        source_power=source_power,
        extrapolated=extrap,
        reverse_current=~st.dcm & (st.i_valley < 0),
        notes=notes,
        starved=starved,
        ring=None if ring is None else (np.where(st.dcm, ring[0], np.nan),
                                        np.where(st.dcm, ring[1], np.nan)),
    )


def _slow_losses(ctx: _Context, st, *, g: _Grid, vin_eff, vc, temps, dcr, full, l_part):
    """Core, AC copper, ESR and leakage: the losses that need harmonics or blocking intervals."""
    d = ctx.design
    ind = d.inductor
    t_l = temps["inductor"]
    out: dict[tuple[str, str], np.ndarray] = {}
    zero: dict[tuple[str, str], np.ndarray] = {}
    shape = np.shape(g.vin)
    extrap = np.zeros(shape, dtype=bool)
    clipped = np.zeros(shape, dtype=bool)
    notes: list[tuple[str, tuple[np.ndarray, str]]] = []
    core = ind.core
    di_part = (st.i_pk - st.i_valley) / ind.count
    ipk_part = st.i_pk / ind.count
    delta_b = b_pk = None
    if core is not None:
        # Faraday: the swing with the inductance the stage used; the peak from the flux
        # linkage up to the peak current where the inductance falls with current
        delta_b = mag.flux_density_swing(l_part, di_part, turns=core.turns, ae=core.ae)
        if ctx.l_at_i:
            b_pk = ind_m.flux_linkage_at_current(
                ipk_part, points_i=ctx.l_at_i, points_l=ctx.l_points
            ) / (core.turns * core.ae)
        else:
            b_pk = mag.peak_flux_density(ctx.l, ipk_part, turns=core.turns, ae=core.ae)
        pv_ccm = mag.core_loss_density_igse_ccm(
            delta_b, duty=st.duty, fsw=g.fsw, k=core.k, alpha=core.alpha, beta=core.beta
        )
        pv_dcm = mag.core_loss_density_igse_dcm(
            delta_b, duty=st.duty, d2=st.d2, fsw=g.fsw, k=core.k, alpha=core.alpha, beta=core.beta
        )
        pv = np.where(st.dcm, pv_dcm, pv_ccm)
        if core.ct is not None:
            factor = mag.core_loss_temperature_factor(
                t_l, ct0=core.ct[0], ct1=core.ct[1], ct2=core.ct[2]
            )
            # a fitted polynomial taken where it goes negative: no negative loss, a flag
            negative = factor < 0
            clipped = clipped | negative
            notes.append(
                (
                    "ct",
                    (
                        negative,
                        "core temperature factor ct negative at this winding temperature, "
                        "clipped at 0",
                    ),
                )
            )
            pv = pv * np.maximum(factor, 0.0)
        out["inductor", "core"] = pv * core.ve * ind.count
        if core.fit_f is not None:
            extrap = extrap | (g.fsw < core.fit_f[0]) | (g.fsw > core.fit_f[1])
        if core.fit_b is not None:
            with np.errstate(invalid="ignore"):
                extrap = extrap | (delta_b / 2 > core.fit_b[1]) | (delta_b / 2 < core.fit_b[0])
    delta1 = _delta1(ctx, g.fsw, t_l)
    if delta1 is not None:
        harm = st.i_l.harmonics_rms(N_HARMONICS)
        n = np.arange(1, N_HARMONICS + 1)
        # harmonics above the last one summed, from the RMS of the current's derivative
        n2_tail = st.i_l.derivative_mean_square() / (4 * np.pi**2) - np.sum(
            n * n * harm * harm, axis=-1
        )
        out["inductor", "copper_ac"] = mag.copper_ac_loss_dowell(
            dcr, harm, delta1=delta1, layers=ctx.layers
        ) + mag.copper_ac_tail_dowell(
            dcr,
            n2_tail,
            delta_last=delta1 * np.sqrt(N_HARMONICS),
            layers=ctx.layers,
            n_last=N_HARMONICS,
        )
    if not ctx.sync and ctx.rect.leakage is not None:
        i_ref, t_ref, v_ref, dbl = ctx.rect.leakage
        idle = np.maximum(1.0 - st.duty - st.d2, 0.0)
        v_blk = np.stack([st.v_rect_block, st.v_rect_idle], axis=-1)
        frac = np.stack([st.duty, idle], axis=-1)
        out["rectifier", "leakage"] = dio.leakage_loss(
            temps["rectifier"],
            v_blocking=v_blk,
            fractions=frac,
            i_ref=i_ref,
            t_ref=t_ref,
            v_ref=v_ref,
            doubling=dbl,
        )
    cin, rms_in, _ = _cap_losses(
        ctx,
        st,
        position="input",
        wave=st.i_in_wave,
        v_dc=vin_eff,
        fsw=g.fsw,
        temps=temps,
        full=full,
    )
    cout, rms_out, ripple = _cap_losses(
        ctx,
        st,
        position="output",
        wave=st.i_out_wave,
        v_dc=vc,
        fsw=g.fsw,
        temps=temps,
        full=full,
    )
    out.update(cin)
    out.update(cout)
    # an ESR line through its points continued below the floor outside them: flagged
    for k, c in enumerate(ctx.caps):
        t_pts, r_pts = ctx.cap_esr[k]
        if np.shape(t_pts)[-1] > 1:
            r_at = dio.linear_in_temperature(temps[c.name], t_points=t_pts, values=r_pts)
            low = r_at <= capm.ESR_FLOOR
            clipped = clipped | low
            notes.append(
                (c.name, (low, f"{c.name} ESR clipped at {capm.ESR_FLOOR:g} ohm outside its "
                          "points"))
            )
    return {
        "losses": out,
        "zero": zero,
        "extrapolated": extrap,
        "clipped": clipped,
        "notes": notes,
        "vout_pp": ripple if ripple is not None else np.full(shape, np.nan),
        "cap_rms": {**rms_in, **rms_out},
        "delta_b": delta_b,
        "b_pk": b_pk,
        "l_part": l_part,
    }


def _stresses(ctx: _Context, st, *, vc, vin_eff, slow):
    """Per-part stresses (the ringing allowance is added by the limit check)."""
    d = ctx.design
    s: dict[tuple[str, str], np.ndarray] = {}
    for comp, wave, v_blk, count in (
        ("switch", st.i_switch, st.v_switch_block, ctx.sw.count),
        ("rectifier", st.i_rect, st.v_rect_block, ctx.rect.count),
    ):
        s[comp, "i_avg"] = wave.mean() / count
        s[comp, "i_rms"] = wave.rms() / count
        s[comp, "i_pk"] = wave.peak() / count
        s[comp, "v_pk"] = v_blk
    if ctx.overshoot:
        # the loop current falls in t_fi at the main switch's turn-off (SPEC §2.10)
        t_fi = _gate_timing(ctx.sw, d.driver)[3]
        s["switch", "v_overshoot"] = osh.turn_off_overshoot(
            d.switch.loop_inductance, st.i_pk, t_fi
        )
    ind = d.inductor
    s["inductor", "i_avg"] = st.i_l.mean() / ind.count
    s["inductor", "i_rms"] = st.i_l.rms() / ind.count
    s["inductor", "i_pk"] = st.i_pk / ind.count
    if ctx.l_at_i:
        s["inductor", "l"] = slow["l_part"]
    if slow["b_pk"] is not None:
        s["inductor", "b_pk"] = slow["b_pk"]
        s["inductor", "delta_b"] = slow["delta_b"]
    for c in d.capacitors:
        if c.name in slow["cap_rms"]:
            s[c.name, "i_rms"] = slow["cap_rms"][c.name] / c.count
        s[c.name, "v_pk"] = vin_eff if c.position == "input" else vc
    return s


# --------------------------------------------------------------------------------------------
# statuses: which mechanisms are computed, zero by design, or not modelled
# --------------------------------------------------------------------------------------------


def _statuses(ctx: _Context) -> dict[tuple[str, str], tuple[str, str]]:
    d = ctx.design
    sw, rc = d.switch, d.rectifier
    st: dict[tuple[str, str], tuple[str, str]] = {}
    coss_key = "switch.qoss or switch.eoss"
    st["switch", "conduction"] = ("computed", "")
    st["switch", "turn_on"] = ("computed", "")
    st["switch", "turn_off"] = ("computed", "")
    for key in (("switch", "turn_on"), ("switch", "turn_off")):
        if key in ctx.edges_not_modelled:
            st[key] = ("not_modelled", ctx.edges_not_modelled[key])
    st["switch", "coss"] = ("computed", "") if (sw.qoss or sw.eoss) else ("not_modelled", coss_key)
    if ctx.sync and d.light_load == "diode-emulation":
        # the switch's body diode conducts in the dead times only while the inductor current
        # is reversed, which diode emulation never lets it be: no data would change a number
        st["switch", "dead_time"] = (
            "not_applicable",
            "diode emulation: the inductor current never reverses, so the switch's body "
            "diode never conducts",
        )
    elif ctx.sync:
        has_dt = d.driver.dead_time is not None
        st["switch", "dead_time"] = (
            ("computed", "")
            if has_dt and sw.body_diode
            else ("not_modelled", "driver.dead_time and switch.body_diode.vsd")
        )
    else:
        st["switch", "dead_time"] = ("not_applicable", "diode rectifier: no dead time")
    if ctx.sync:
        bd = rc.body_diode
        st["switch", "reverse_recovery"] = (
            ("computed", "") if bd and bd.qrr else ("not_modelled", "rectifier.body_diode.qrr")
        )
    elif rc.qrr is not None:
        st["switch", "reverse_recovery"] = ("computed", "")
    elif rc.qc is not None:
        st["switch", "reverse_recovery"] = (
            "not_applicable",
            "junction charge only (rectifier.qc): counted in coss",
        )
    else:
        st["switch", "reverse_recovery"] = ("not_modelled", "rectifier.qrr or rectifier.qc")
    if ctx.sync:
        st["rectifier", "conduction"] = ("computed", "")
        st["rectifier", "turn_on"] = ("computed", "")
        st["rectifier", "turn_off"] = (
            ("not_modelled", ctx.edges_not_modelled["rectifier", "turn_off"])
            if ("rectifier", "turn_off") in ctx.edges_not_modelled
            else ("computed", "")
        )
        has = (sw.qoss or sw.eoss) and (rc.qoss or rc.eoss) and d.driver.dead_time is not None
        st["rectifier", "coss"] = (
            ("computed", "")
            if has
            else ("not_modelled", "switch and rectifier qoss/eoss with driver.dead_time")
        )
        st["rectifier", "dead_time"] = (
            ("computed", "")
            if d.driver.dead_time is not None and rc.body_diode
            else ("not_modelled", "driver.dead_time and rectifier.body_diode")
        )
        st["rectifier", "reverse_recovery"] = st["switch", "reverse_recovery"]
    else:
        st["rectifier", "forward"] = ("computed", "")
        st["rectifier", "reverse_recovery"] = st["switch", "reverse_recovery"]
        st["rectifier", "leakage"] = (
            ("computed", "") if rc.leakage else ("not_modelled", "rectifier.leakage")
        )
    ind = d.inductor
    st["inductor", "copper_dc"] = ("computed", "")
    w = ind.winding
    if w is None:
        st["inductor", "copper_ac"] = ("not_modelled", "inductor.winding")
    elif w.litz:
        st["inductor", "copper_ac"] = ("not_modelled", "litz wire: no published model implemented")
    elif w.rac_rdc is None and w.wire_diameter is None:
        st["inductor", "copper_ac"] = ("not_modelled", "inductor.winding.rac_rdc or geometry")
    else:
        st["inductor", "copper_ac"] = ("computed", "")
    st["inductor", "core"] = ("computed", "") if ind.core else ("not_modelled", "inductor.core")
    if not ctx.dcm_allowed:
        st["inductor", "ring"] = ("not_applicable", "forced-continuous: no DCM idle interval")
    elif np.any(np.asarray(sum(_ring_charge(ctx))) > 0.0):
        st["inductor", "ring"] = ("computed", "")
    else:
        st["inductor", "ring"] = ("not_modelled", "switch.qoss or switch.eoss (node charge)")
    for c in d.capacitors:
        st[c.name, "esr"] = ("computed", "")
    for r in d.resistors:
        st[r.name, "conduction"] = ("computed", "")
    st["driver", "gate_drive"] = (
        ("computed", "")
        if ctx.gate_drive
        else (
            "not_modelled",
            "driver.v_drive, r_source, r_sink and switch.qg"
            + (" and rectifier.qg" if ctx.sync else ""),
        )
    )
    st["controller", "quiescent"] = (
        ("computed", "")
        if ctx.quiescent
        else (
            "not_modelled",
            "driver.quiescent" if not np.isfinite(d.driver.quiescent) else "driver.v_aux",
        )
    )
    return st


def not_modelled(design: Design) -> list[tuple[str, str, str]]:
    """(component, mechanism, the key that would enable it) for every mechanism left out."""
    ctx = _context(design, "typ")
    return [(c, m, note) for (c, m), (kind, note) in _statuses(ctx).items()
            if kind == "not_modelled"]


# --------------------------------------------------------------------------------------------
# public entry
# --------------------------------------------------------------------------------------------


def _axes(design: Design, *, vin, load, load_fraction, vout, ambient, fsw, outer: bool):
    op = design.operating
    if load is not None and load_fraction is not None:
        raise ValueError("give load or load_fraction, not both")
    if load is None:
        frac = 1.0 if load_fraction is None else np.asarray(load_fraction, dtype=float)
        load = np.asarray(frac, dtype=float) * op.iout_rated
    values = {
        "vin": np.asarray(vin, dtype=float),
        "vout": np.asarray(op.vout.nom if vout is None else vout, dtype=float),
        "load": np.abs(np.asarray(load, dtype=float)),
        "ambient": np.asarray(op.ambient.nom if ambient is None else ambient, dtype=float),
        "fsw": np.asarray(op.fsw.nom if fsw is None else fsw, dtype=float),
    }
    given = {
        "vin": True,
        "vout": vout is not None,
        "load": True,
        "ambient": ambient is not None,
        "fsw": fsw is not None,
    }
    if outer:
        dims = [a for a in AXES if given[a]]
        for k, a in enumerate(dims):
            arr = np.atleast_1d(values[a]).ravel()
            shape = [1] * len(dims)
            shape[k] = arr.size
            values[a] = arr.reshape(shape)
    shape = np.broadcast_shapes(*(np.shape(v) for v in values.values()))
    return {a: np.broadcast_to(values[a], shape) for a in AXES}, shape


def solve(
    design: Design,
    *,
    vin,
    load=None,
    load_fraction=None,
    vout=None,
    ambient=None,
    fsw=None,
    corner: Corner = "typ",
) -> Budget:
    """Solve the loss budget at operating points broadcast from the given axes.

    Parameters
    ----------
    design : Design or Variants
        A design from :func:`lossbudget.load_design`, or design variants from
        :func:`lossbudget.variants`: then every variant is solved over the same axes in one
        vectorised solve, and every array of the budget gains a leading variant axis.
    vin : array_like
        Input voltage. [V]
    load : array_like, optional
        Output current, a positive magnitude (inverting stage included). [A]
    load_fraction : array_like, optional
        Output current as a fraction of the rated current, instead of ``load``. [-]
    vout : array_like, optional
        Output voltage (negative for the inverting buck-boost); the nominal if omitted. [V]
    ambient : array_like, optional
        Ambient temperature; the nominal if omitted. [degC]
    fsw : array_like, optional
        Switching frequency; the nominal if omitted. [Hz]
    corner : {"typ", "worst"}
        Part values: typical, or worst case (max resistances, drops, charges, leakage; min
        capacitance, inductance and saturation current).

    Returns
    -------
    Budget
        Losses, temperatures, stresses, flags over the broadcast grid; for variants of shape
        (variants, *grid), ``variant_labels`` naming them. Omitted axes take each variant's
        own nominal (a varied ``operating.fsw``).

    Notes
    -----
    Duty from the volt-second balance with every conduction drop and the charge balance of
    the rectifier (boost, buck-boost) or the inductor (buck); losses the balance does not
    carry are drawn at the edges (derived, SPEC §2.1). Temperatures from the coupled fixed
    point T = T_a + Z·P(T) from the ambient (REFERENCES §9.5, derived).

    References
    ----------
    .. [1] R. W. Erickson, D. Maksimović, Fundamentals of Power Electronics, 2nd ed., Kluwer,
       2001, ch. 2 (steady state), ch. 3 (loss-inclusive averaged models), ch. 5 (DCM).
    .. [2] JEDEC JESD51-2, -8, -12 (thermal-resistance definitions of the network).
    """
    return _solve(
        design,
        vin=vin,
        load=load,
        load_fraction=load_fraction,
        vout=vout,
        ambient=ambient,
        fsw=fsw,
        corner=corner,
        outer=False,
    )


def _solve(design, *, vin, load, load_fraction, vout, ambient, fsw, corner, outer) -> Budget:
    if corner not in ("typ", "worst"):
        raise ValueError(f"corner: expected 'typ' or 'worst', got {corner!r}")
    if isinstance(design, Variants):
        return _solve_variants(
            design,
            vin=vin,
            load=load,
            load_fraction=load_fraction,
            vout=vout,
            ambient=ambient,
            fsw=fsw,
            corner=corner,
            outer=outer,
        )
    coords, shape = _axes(
        design,
        vin=vin,
        load=load,
        load_fraction=load_fraction,
        vout=vout,
        ambient=ambient,
        fsw=fsw,
        outer=outer,
    )
    ctx = _context(design, corner)
    flat = _Grid(**{a: np.ascontiguousarray(coords[a]).ravel().astype(float) for a in AXES})
    sign = -1.0 if design.topology == "buck-boost" else 1.0
    flat = _Grid(
        vin=flat.vin, vout=np.abs(flat.vout), load=flat.load, ambient=flat.ambient, fsw=flat.fsw
    )
    bad_vout = (sign * np.asarray(coords["vout"]).ravel()) <= 0
    statuses_raw = _statuses(ctx)
    pieces = _solve_points(ctx, flat, statuses_raw)
    return _assemble_budget(ctx, coords, shape, pieces, statuses_raw, bad_vout, corner)


def _solve_points(ctx: _Context, flat: _Grid, statuses_raw) -> list:
    """The chunks of a flat point set, each one vectorised evaluation."""
    n = flat.vin.size
    return [
        _solve_chunk(ctx, flat.take(slice(s, min(s + CHUNK, n))), statuses_raw)
        for s in range(0, n, CHUNK)
    ]


def _variant_axes(vs: Variants, sd: Design, m: int, *, vin, load, load_fraction, vout, ambient,
                  fsw, outer):
    """Axes of shape (m, *grid) for one group: the grid given, nominals per variant."""
    coords, shape = _axes(
        vs.base,
        vin=vin,
        load=load,
        load_fraction=load_fraction,
        vout=vout,
        ambient=ambient,
        fsw=fsw,
        outer=outer,
    )
    full = (m, *shape)
    lead = (m,) + (1,) * len(shape)
    op = sd.operating
    out = {a: np.broadcast_to(coords[a], full) for a in AXES}
    nominal = {"vout": (vout, op.vout.nom), "ambient": (ambient, op.ambient.nom),
               "fsw": (fsw, op.fsw.nom)}
    for a, (given, nom) in nominal.items():
        if given is None and np.ndim(nom):
            out[a] = np.broadcast_to(np.reshape(nom, lead), full)
    if load is None and np.ndim(op.iout_rated):
        frac = np.asarray(coords["load"]) / vs.base.operating.iout_rated
        out["load"] = frac * np.reshape(op.iout_rated, lead)
    return out, full


def _solve_variants(vs: Variants, *, vin, load, load_fraction, vout, ambient, fsw, corner,
                    outer) -> Budget:
    """Every variant × the grid as one flat point set per structure group.

    Each point carries its variant's index; the stacked design holds the differing part
    values as arrays over the group's variants, taken per point in the evaluation. A loop
    runs over the structure groups only (parts whose optional data differ in kind), never
    over the variants.
    """
    budgets = []
    groups = vs.groups()
    for members in groups:
        sd = stacked_design(vs, members)
        m = members.size
        coords, full = _variant_axes(
            vs,
            sd,
            m,
            vin=vin,
            load=load,
            load_fraction=load_fraction,
            vout=vout,
            ambient=ambient,
            fsw=fsw,
            outer=outer,
        )
        ctx = _context(sd, corner)
        npts = int(np.prod(full[1:], dtype=np.int64))
        sign = -1.0 if sd.topology == "buck-boost" else 1.0
        flat = _Grid(
            vin=np.ascontiguousarray(coords["vin"]).ravel().astype(float),
            vout=np.abs(np.ascontiguousarray(coords["vout"]).ravel().astype(float)),
            load=np.ascontiguousarray(coords["load"]).ravel().astype(float),
            ambient=np.ascontiguousarray(coords["ambient"]).ravel().astype(float),
            fsw=np.ascontiguousarray(coords["fsw"]).ravel().astype(float),
            variant=np.repeat(np.arange(m), npts),
        )
        bad_vout = (sign * np.asarray(coords["vout"]).ravel()) <= 0
        statuses_raw = _statuses(ctx)
        pieces = _solve_points(ctx, flat, statuses_raw)
        b = _assemble_budget(ctx, coords, full, pieces, statuses_raw, bad_vout, corner)
        budgets.append(b)
    return _join_variants(vs, budgets, groups)


def _join_variants(vs: Variants, budgets: list[Budget], groups: list[np.ndarray]) -> Budget:
    """One budget over all variants from the budgets of the structure groups."""
    n = vs.size
    first = budgets[0]
    full = (n, *first.shape[1:])
    labels = tuple(str(x) for x in vs.labels)

    def fill(get, keys, blank):
        out = {}
        for k in keys:
            like = next(get(b)[k] for b in budgets if k in get(b))
            arr = np.full(full, blank, dtype=np.asarray(like).dtype if blank is not None
                          else object)
            for b, members in zip(budgets, groups, strict=True):
                if k in get(b):
                    arr[members] = np.broadcast_to(get(b)[k], b.shape)
            out[k] = arr
        return out

    def keys_of(get):
        seen: dict = {}
        for b in budgets:
            seen.update(dict.fromkeys(get(b)))
        return list(seen)

    def one(get, blank):
        return fill(lambda b: {"x": get(b)}, ["x"], blank)["x"]

    coords = fill(lambda b: b.coords, AXES, np.nan)
    coords["variant"] = np.broadcast_to(
        np.arange(n).reshape((n,) + (1,) * (len(full) - 1)), full
    )
    losses = fill(lambda b: b.losses, keys_of(lambda b: b.losses), np.nan)
    statuses = {}
    for key in keys_of(lambda b: b.statuses):
        treat = {
            (b.statuses[key].kind, b.statuses[key].note if b.statuses[key].kind != "computed"
             else "")
            for b in budgets if key in b.statuses
        }
        kinds = {k for k, _ in treat}
        mixed = len(treat) > 1 or any(key not in b.statuses for b in budgets)
        zr = np.full(full, "", dtype=object)
        by_point = np.full(full, "", dtype=object) if mixed else None
        for b, members in zip(budgets, groups, strict=True):
            st = b.statuses.get(key)
            if st is None:
                by_point[members] = "not_applicable: not in this variant's design"
            elif st.kind != "computed":
                if mixed:
                    by_point[members] = f"{st.kind}: {st.note}" if st.note else st.kind
            elif st.zero_reason is not None:
                zr[members] = np.broadcast_to(st.zero_reason, b.shape)
        if "computed" in kinds or mixed:
            statuses[key] = MechanismStatus(kind="computed", zero_reason=zr, by_point=by_point)
            if key not in losses:
                losses[key] = np.where(one(lambda b: b.flagged, True), np.nan, 0.0)
            else:
                losses[key] = np.where(np.isnan(losses[key]) & ~one(lambda b: b.flagged, True),
                                       0.0, losses[key])
        else:
            st = next(b.statuses[key] for b in budgets if key in b.statuses)
            statuses[key] = MechanismStatus(kind=st.kind, note=st.note)
    limits = {}
    for node in keys_of(lambda b: b.temperature_limits):
        arr = np.full(n, np.nan)
        for b, members in zip(budgets, groups, strict=True):
            if node in b.temperature_limits:
                arr[members] = np.broadcast_to(b.temperature_limits[node], members.shape)
        limits[node] = arr
    flags = fill(lambda b: b.flags, keys_of(lambda b: b.flags), False)
    prov = dict(first.provenance)
    prov["variants"] = {
        "count": n,
        "structure_groups": len(groups),
        "parts_file": vs.source,
        "slots": {s: [a.name for a in alts] for s, alts in vs.slots.items()},
        "varied": {k: sorted({float(x) for x in v}) for k, v in vs.values.items()},
    }
    prov["notes"] = sorted({note for b in budgets for note in b.provenance["notes"]})
    return Budget(
        design_name=first.design_name,
        topology=first.topology,
        coords=coords,
        losses=losses,
        statuses=statuses,
        temperatures=fill(lambda b: b.temperatures, keys_of(lambda b: b.temperatures), np.nan),
        temperature_limits=limits,
        stresses=fill(lambda b: b.stresses, keys_of(lambda b: b.stresses), np.nan),
        output_power=one(lambda b: b.output_power, np.nan),
        duty=one(lambda b: b.duty, np.nan),
        d2=one(lambda b: b.d2, np.nan),
        dcm=one(lambda b: b.dcm, False),
        vout_pp=one(lambda b: b.vout_pp, np.nan),
        flags=flags,
        reason=one(lambda b: b.reason, ""),
        provenance=prov,
        source_input_power=one(lambda b: b.source_input_power, np.nan),
        loop_gain=one(lambda b: b.loop_gain, np.nan),
        variant_labels=labels,
    )


@dataclass(slots=True, kw_only=True)
class _Chunk:
    ev: _Evaluation
    temps: np.ndarray
    flags: dict
    reason: np.ndarray
    loop_gain: np.ndarray
    pout: np.ndarray
    diverging: np.ndarray


def _temps_dict(ctx: _Context, temps: np.ndarray) -> dict[str, np.ndarray]:
    return {name: temps[..., ctx.nodes.index(name)] for name in ctx.parts}


def _solve_chunk(ctx: _Context, g: _Grid, statuses_raw) -> _Chunk:
    n = g.vin.size
    amb = np.repeat(g.ambient[:, None], len(ctx.nodes), axis=1)
    # the stage at the ambient tells the infeasible points; its first passes are also the
    # coupled solve's first step, which starts from the ambient
    first, power_at_ambient = _evaluate(ctx, g, _temps_dict(ctx, amb), probe=True)
    infeasible = first.infeasible.copy()
    reason = first.reason.astype(object).copy()
    ok = np.flatnonzero(~infeasible)
    start = {"power": power_at_ambient[ok], "temps": amb[ok]}
    # nodes whose temperature changes some loss: the semiconductors and the winding always,
    # a capacitor bank only where its ESR is given over temperature
    heated = [ctx.nodes.index(p) for p in ("switch", "rectifier", "inductor")] + [
        ctx.nodes.index(c.name) for c in ctx.caps if np.shape(c.esr.t)[-1] > 1
    ]

    def power_of(temps, index):
        if start and index.size == ok.size and np.array_equal(temps, start["temps"]):
            return start.pop("power")
        start.clear()
        sub = g.take(ok[index])
        return _evaluate(ctx, sub, _temps_dict(ctx, temps), full=False)

    temps = np.full((n, len(ctx.nodes)), np.nan)
    diverging = np.full((n, len(ctx.nodes)), np.nan)
    runaway = np.zeros(n, dtype=bool)
    not_conv = np.zeros(n, dtype=bool)
    gain = np.full(n, np.nan)
    if ok.size:
        stack = ctx.network.transfer_resistance.ndim == 3
        sol = solve_coupled(
            power_of,
            ctx.network,
            ambient=g.ambient[ok],
            tol=THERMAL_TOL,
            ceiling=CEILING,
            heated=heated,
            transfer=ctx.network.transfer_resistance[g.variant[ok]] if stack else None,
        )
        temps[ok] = sol.temperatures
        diverging[ok] = sol.last_temperatures
        runaway[ok] = sol.runaway
        not_conv[ok] = sol.not_converged
        gain[ok] = sol.loop_gain
        und = np.zeros(n, dtype=bool)
        und[ok] = sol.undefined
        infeasible |= und
        reason[ok] = np.where(sol.reason != "", sol.reason, reason[ok])
        reason[und] = "the operating point becomes infeasible as the parts heat up"
    good = ~(infeasible | runaway | not_conv)
    t_eval = np.where(good[:, None], temps, amb)
    ev = _evaluate(ctx, g, _temps_dict(ctx, t_eval))
    # points that the final evaluation finds infeasible (rare, near a limit)
    late = good & ev.stage.infeasible
    infeasible |= late
    reason = np.where(late, ev.stage.reason, reason)
    starved = good & ~late & ev.starved
    infeasible |= starved
    reason = np.where(
        starved,
        "the input resistors cannot pass the power the stage draws (4·R·P > Vin²)",
        reason,
    )
    flags = {"infeasible": infeasible, "runaway": runaway, "not_converged": not_conv}
    # keep of a chunk only what the budget reports, so that a large map fits in memory: the
    # stage's duty, D2 and mode without its waveforms, each zero reason as references to a
    # few shared strings instead of a wide string per point
    st = ev.stage
    ev.stage = _StageSummary(duty=st.duty, d2=st.d2, dcm=st.dcm)
    ev.zero = {k: _shared_strings(v) for k, v in ev.zero.items()}
    return _Chunk(
        ev=ev, temps=temps, flags=flags, reason=reason, loop_gain=gain, pout=g.vout * g.load,
        diverging=diverging,
    )


@dataclass(frozen=True, slots=True, kw_only=True)
class _StageSummary:
    duty: np.ndarray
    d2: np.ndarray
    dcm: np.ndarray


def _shared_strings(values):
    """An array of strings as an object array whose equal entries share one string."""
    values = np.asarray(values)
    if values.ndim == 0 or values.dtype.kind not in "UO":
        return values
    labels, codes = np.unique(values, return_inverse=True)
    shared = np.empty(labels.size, dtype=object)
    shared[:] = labels.tolist()
    return shared[codes].reshape(values.shape)


def _assemble_budget(ctx: _Context, coords, shape, pieces, statuses_raw, bad_vout, corner):
    def cat(get):
        return np.concatenate([get(p) for p in pieces]).reshape(shape)

    flags = {k: cat(lambda p, k=k: p.flags[k]) for k in ("infeasible", "runaway", "not_converged")}
    bad = flags["infeasible"] | flags["runaway"] | flags["not_converged"]
    nan = np.where(bad, np.nan, 1.0)
    losses = {}
    for key in statuses_raw:
        if statuses_raw[key][0] != "computed":
            continue
        if key in pieces[0].ev.losses:
            losses[key] = (
                cat(lambda p, key=key: np.broadcast_to(p.ev.losses[key], p.pout.shape)) * nan
            )
    statuses = {}
    for key, (kind, note) in statuses_raw.items():
        zr = None
        if kind == "computed" and key in pieces[0].ev.zero:
            zr = cat(lambda p, key=key: np.broadcast_to(p.ev.zero[key], p.pout.shape))
            zr = np.where(bad, "", zr).astype(object)
        statuses[key] = MechanismStatus(kind=kind, note=note, zero_reason=zr)
        if kind == "computed" and key not in losses:
            losses[key] = np.zeros(shape) * nan
    temps = {}
    for j, node in enumerate(ctx.nodes):
        temps[node] = cat(lambda p, j=j: p.temps[:, j]) * nan
    d = ctx.design
    limits = {
        "switch": d.switch.tj_max,
        "rectifier": d.rectifier.tj_max,
        "inductor": d.inductor.t_max,
        **{c.name: c.t_max for c in d.capacitors},
    }
    limits = {k: np.nan if v is None else v for k, v in limits.items()}  # NaN: not given
    stresses = {
        k: cat(lambda p, k=k: np.broadcast_to(p.ev.stresses[k], p.pout.shape)) * nan
        for k in pieces[0].ev.stresses
    }
    st = [p.ev.stage for p in pieces]
    reason = cat(lambda p: p.reason)
    flags["infeasible"] = flags["infeasible"] | bad_vout.reshape(shape)
    reason = np.where(
        bad_vout.reshape(shape) & (reason == ""),
        "output voltage of the wrong sign for this topology",
        reason,
    )
    bad = flags["infeasible"] | flags["runaway"] | flags["not_converged"]
    source_power = cat(lambda p: p.ev.source_power)
    bad, reason = _guard(flags, bad, reason, losses, temps, stresses, source_power, cat)
    nan = np.where(bad, np.nan, 1.0)
    flags["reverse_current"] = cat(lambda p: p.ev.reverse_current) & ~bad
    flags["extrapolated"] = cat(lambda p: p.ev.extrapolated) & ~bad
    notes = cat(lambda p: p.ev.notes)
    reason = np.where(bad, reason, np.where(flags["extrapolated"], notes, ""))
    provenance = _provenance(ctx, corner)
    provenance["ring_q"] = _ring_provenance(ctx, pieces, bad.ravel())
    if provenance["ring_q"]["dcm_points"]:
        provenance["notes"].append(_ring_note(ctx, provenance["ring_q"]))
    budget = Budget(
        design_name=d.name,
        topology=d.topology,
        coords=dict(coords.items()),
        losses={k: v * nan for k, v in losses.items()},
        statuses=statuses,
        temperatures={k: v * nan for k, v in temps.items()},
        temperature_limits=limits,
        stresses={k: v * nan for k, v in stresses.items()},
        output_power=cat(lambda p: p.pout) * nan,
        duty=np.concatenate([s.duty for s in st]).reshape(shape) * nan,
        d2=np.concatenate([s.d2 for s in st]).reshape(shape) * nan,
        dcm=np.concatenate([s.dcm for s in st]).reshape(shape) & ~bad,
        vout_pp=cat(lambda p: p.ev.vout_pp) * nan,
        flags=flags,
        reason=reason,
        provenance=provenance,
        source_input_power=source_power * nan,
        loop_gain=cat(lambda p: p.loop_gain) * nan,
        diverging_temperatures={
            node: cat(lambda p, j=j: p.diverging[:, j]) for j, node in enumerate(ctx.nodes)
        },
    )
    # ratings at every solved point (SPEC §2.10), by the measures the envelope check uses
    over, why = over_rating(budget, part_ratings(d, corner)[0])
    flags["over_rating"] = over
    return replace(budget, over_rating_reason=why)


def _ring_provenance(ctx: _Context, pieces, bad) -> dict:
    """The DCM ring's damping as used: Q and R_ring over the solved DCM points."""
    op = ctx.design.operating
    if op.ring_q is not None:
        source = "operating.ring_q, at the small-signal ring frequency at the settled voltage"
    else:
        source = (
            "winding resistance at the ring frequency (Dowell; DC resistance without winding "
            "data) + core series resistance (Steinmetz at the ring's initial current) + series "
            "resistors in the inductor path"
        )
    out = {"choice": op.dcm_turn_on, "source": source, "dcm_points": 0,
           "q": [], "r_ring_ohm": []}
    rings = [p.ev.ring for p in pieces]
    if any(r is None for r in rings):
        out["source"] = "no node charge: no ring"
        return out
    q = np.concatenate([r[0].ravel() for r in rings])
    r = np.concatenate([r[1].ravel() for r in rings])
    ok = np.isfinite(q) & ~bad
    out["dcm_points"] = int(np.count_nonzero(ok))
    if out["dcm_points"]:
        out["q"] = [float(q[ok].min()), float(q[ok].max())]
        out["r_ring_ohm"] = [float(r[ok].min()), float(r[ok].max())]
    return out


def _ring_note(ctx: _Context, ring: dict) -> str:
    q, r = ring["q"], ring["r_ring_ohm"]
    span_q = f"{q[0]:.3g}" if np.isclose(q[0], q[1], rtol=5e-3) else f"{q[0]:.3g} to {q[1]:.3g}"
    span_r = f"{r[0]:.3g}" if np.isclose(r[0], r[1], rtol=5e-3) else f"{r[0]:.3g} to {r[1]:.3g}"
    return (
        f"DCM turn-on: dcm_turn_on = {ring['choice']}, node ring Q = {span_q} (R_ring = "
        f"{span_r} ohm; {ring['source']}); the ring current left at turn-on is not carried "
        "into the next on-interval"
    )


def _guard(flags, bad, reason, losses, temps, stresses, source_power, cat):
    """Flag the solved points whose numbers cannot be reported as they stand.

    A computed loss that is negative or not finite, a temperature or stress that is not
    finite, and a power balance that does not close (Vin·I_in against Pout + every loss off by
    more than BALANCE_FLAG) each flag the point with the reason, instead of printing a made-up
    number. Returns the updated mask of NaN points and the reasons.
    """
    good = ~bad
    infeasible = np.zeros_like(bad)
    why = np.full(bad.shape, "", dtype=object)
    with np.errstate(invalid="ignore"):
        for (comp, mech), value in losses.items():
            value = np.broadcast_to(value, bad.shape)
            neg = good & np.isfinite(value) & (value < 0) & (why == "")
            why = np.where(neg, f"the model gives a negative {comp} {mech} loss here", why)
            inf = good & ~np.isfinite(value) & (why == "")
            why = np.where(inf, f"the model gives no finite {comp} {mech} loss here", why)
        for name, table in (("temperature", temps), ("stress", stresses)):
            for key, value in table.items():
                value = np.broadcast_to(value, bad.shape)
                inf = good & ~np.isfinite(value) & (why == "")
                label = key if isinstance(key, str) else " ".join(key)
                why = np.where(inf, f"no finite {label} {name} at this point", why)
        infeasible = why != ""
        total = sum(np.broadcast_to(v, bad.shape) for v in losses.values())
        pin = cat(lambda p: p.pout) + total
        rel = np.abs(source_power - pin) / np.abs(pin)
        off = good & ~infeasible & ~(rel <= BALANCE_FLAG)
    flags["infeasible"] = flags["infeasible"] | infeasible
    reason = np.where(infeasible, why, reason)
    if np.any(off):
        idx = np.flatnonzero(off.ravel())
        texts = np.full(bad.size, "", dtype=object)
        src, p_in = source_power.ravel(), pin.ravel()
        # text for the flagged points only
        texts[idx] = [
            f"the power balance does not close: Vin·I_in {src[k]:.4g} W against Pout + every "
            f"loss {p_in[k]:.4g} W (an approximation of the stage model"
            " fails at such extreme values)"
            for k in idx
        ]
        flags["not_converged"] = flags["not_converged"] | off
        reason = np.where(off, texts.reshape(bad.shape), reason)
    return bad | infeasible | off, reason


def _provenance(ctx: _Context, corner: Corner) -> dict:
    from lossbudget import __version__

    d = ctx.design
    laws = [
        "Rds(on)(Tj): power law in kelvin through the datasheet points (x = 2.3 from a single "
        "point, common practice)",
        "Vf0, Rd, Vsd: linear in temperature through the points, clipped at zero",
        "winding copper: IEC 60028, R(T) = R_ref·(234.45 + T)/(234.45 + T_ref)",
        "switching: gate-charge model (Qgs2, Qgd, gate currents; common practice); turn-off "
        "counts only the channel share of the current (derived from the gate-charge model)",
        "node charge: C ∝ v^-1/2 law (Q ∝ V^0.5, E = Q·V/3) from one qoss/eoss/qc figure",
        "reverse recovery: the bus supplies Qrr·V; the diode keeps E_rec (¼·Qrr·V by default, "
        "common practice); Qrr linear in current, +1 %/K above its reference (common practice, "
        "from memory)",
        "leakage: I_R·2^((T − T_ref)/doubling)·(V/V_ref) (common practice)",
        "core: iGSE (Venkatachalam, Sullivan, Abdallah, Tacca, COMPEL 2002); under-estimates "
        "after a flat (DCM idle) segment",
        "copper_ac: Dowell's 1-D layer model with the round-wire equivalent foil, summed over "
        f"{N_HARMONICS} harmonics; poor near an air gap and for single-layer toroid or drum "
        "windings",
        "DCM node ring: damped ring of L with the nonlinear node capacitance (C ∝ v^-1/2 per "
        "device) about the settled voltage, clamped at 0 and at the blocking voltage, tabulated "
        "once and interpolated (Huber, Irving, Jovanović, IEEE TPEL 24(2), 2009; series RLC as "
        "its linear limit); coss from the partial-swing charge balance at the turn-on voltage; "
        "the decay is the inductor's ring loss",
        "turn-off: the channel is relieved of the energy-equivalent node charge 2·E_node/V, so "
        "that turn-off and coss count the node energy once (derived)",
        "capacitors: ESR constant over the harmonics; banks at one position share each harmonic "
        "by impedance",
        "output ripple: the exact peak-to-peak of ESR·i + ∫i dt/C over the piecewise-linear "
        "bank current (closed-form extremes); several banks: the equivalent bank (ΣC, ESRs in "
        "parallel) exactly plus the network's remainder from the harmonics",
        f"thermal: coupled fixed point from the ambient, error within {THERMAL_TOL} K; runaway "
        f"when the loop gain reaches 1 or a node passes {CEILING:g} degC",
    ]
    return {
        "tool": f"lossbudget {__version__}",
        "design": d.name,
        "source": d.source,
        "checksum_sha256": d.checksum,
        "corner": corner,
        "dcm_turn_on": d.operating.dcm_turn_on,
        "laws": laws,
        "defaults": [f"{k} = {v}" for k, v in d.defaults],
        "warnings": list(d.warnings),
        "notes": ([d.calibration.describe()] if d.calibration else []) + list(ctx.notes),
        "calibration": d.calibration.describe() if d.calibration else "none",
    }
