"""The engine's output ripple against the exact switched-circuit solution.

tests/reference_circuit.py solves the switched circuit exactly (matrix exponential per
sub-interval, periodic steady state, regulated duty) with a resistive load across the
capacitor branch; its ``vout_pp`` is the peak-to-peak of the load voltage. The engine takes
the load current as pure DC (SPEC §2.5), which the reference's load resistance (≫ ESR) makes
true to a fraction of a per cent here.
"""

from __future__ import annotations

import numpy as np
import pytest

import lossbudget as lb
from tests.reference_circuit import regulate
from tests.test_solver_reference import C_OUT, CASES, DCR, ESR, FSW, R_SW, R_SYNC, RD, VF0, L
from tests.test_solver_reference import _design as _reference_design


def _buck_design(*, l, c, esr, fsw, vin, vout):
    fet = {"vds_rated": "30 V", "rds_on": "0.02 ohm", "v_th": "2 V", "v_plateau": "3 V",
           "qg": "1e-6 nC", "qgs": "4e-7 nC", "qgd": "4e-7 nC", "rg": "1 ohm",
           "tj_max": "150 degC", "thermal": {"rth_ha": "1e-6 K/W"}}
    return lb.load_design({
        "design": {"name": "bench 12 V to 5 V buck", "topology": "buck", "rectifier": "sync"},
        "operating": {"vin": f"{vin} V", "vout": f"{vout} V", "iout_rated": "3 A",
                      "fsw": f"{fsw} Hz", "ambient": "25 degC", "max_duty": 0.95},
        "switch": fet,
        "driver": {"v_drive": "10 V", "r_source": "1 ohm", "r_sink": "1 ohm"},
        "rectifier": {**fet, "rds_on": "0.015 ohm"},
        "inductor": {"l": f"{l} H", "dcr": "0.01 ohm", "t_max": "125 degC",
                     "thermal": {"rth_ha": "1e-6 K/W"}},
        "capacitor": [{"name": "cout", "position": "output", "c": f"{c} F", "esr": f"{esr} ohm",
                       "v_rated": "16 V", "t_max": "105 degC",
                       "thermal": {"rth_ha": "1e-6 K/W"}}],
    })


def test_buck_12v_to_5v_one_100uf_30mohm_part_against_exact_circuit():
    """The issue's case: 12 V → 5 V buck, one 100 µF / 30 mΩ output part (L = 10 µH,
    200 kHz, 3 A chosen here). The exact circuit's load-voltage ripple is the check value;
    the hand sum ΔI·ESR + ΔI/(8fC) (Erickson & Maksimović, 2nd ed., §2.5, plus the ESR
    term, common practice) is only an upper bound, since the two terms peak at different
    instants."""
    l, c, esr, fsw, vin, vout, load = 10e-6, 100e-6, 0.030, 200e3, 12.0, 5.0, 3.0
    ref = regulate(topology="buck", rectifier="sync", vin=vin, vout=vout, fsw=fsw, l=l,
                   dcr=0.01, c=c, esr=esr, r_load=vout / load, r_switch=0.02, r_sync=0.015)
    b = lb.solve(_buck_design(l=l, c=c, esr=esr, fsw=fsw, vin=vin, vout=vout), vin=vin,
                 load=ref.iout_avg)
    got = float(b.vout_pp)
    np.testing.assert_allclose(got, ref.vout_pp, rtol=0.03)
    di = float(b.stress("inductor", "i_pk") - (2 * b.stress("inductor", "i_avg")
                                               - b.stress("inductor", "i_pk")))
    hand_sum = di * esr + di / (8 * fsw * c)
    assert got < hand_sum


PARAMS = [(t, r, w) for t in CASES for r in ("diode", "sync", "sync-emulated")
          for w in ("ccm", "dcm")]


@pytest.mark.parametrize(("topology", "rectifier", "which"), PARAMS)
def test_output_ripple_matches_exact_circuit_in_every_topology(topology, rectifier, which):
    """SPEC §2.5: the exact switched-circuit solution agrees within a few per cent in every
    topology; the 18 cases of the reference suite (CCM and DCM loads) agree within 0.5 %
    (measured), held here at 1 %."""
    vin, vout, load_ccm, load_dcm = CASES[topology]
    load = load_ccm if which == "ccm" else load_dcm
    kw = {"vf0": VF0, "rd": RD} if rectifier == "diode" else {"r_sync": R_SYNC}
    ref = regulate(topology=topology, rectifier=rectifier, vin=vin, vout=abs(vout), fsw=FSW,
                   l=L, dcr=DCR, c=C_OUT, esr=ESR, r_load=abs(vout) / load, r_switch=R_SW, **kw)
    b = lb.solve(_reference_design(topology, rectifier), vin=vin, load=ref.iout_avg)
    assert b.mode[()] == ref.mode
    np.testing.assert_allclose(float(b.vout_pp), ref.vout_pp, rtol=0.01)


@pytest.mark.parametrize("topology", list(CASES))
def test_two_banks_of_equal_time_constant_match_the_one_bank_exact_circuit(topology):
    """Banks with R1·C1 = R2·C2 are exactly one bank of ΣC and the ESRs in parallel (the
    network's impedance (1 + jωτ)/(jωΣC); circuit theory): C_OUT/3 with 3·ESR beside 2·C_OUT/3
    with 1.5·ESR must give the reference circuit's ripple for C_OUT and ESR, through the
    engine's several-bank path."""
    vin, vout, load, _ = CASES[topology]
    ref = regulate(topology=topology, rectifier="diode", vin=vin, vout=abs(vout), fsw=FSW, l=L,
                   dcr=DCR, c=C_OUT, esr=ESR, r_load=abs(vout) / load, r_switch=R_SW, vf0=VF0,
                   rd=RD)
    raw_caps = [
        {"name": "cout_a", "position": "output", "c": f"{C_OUT / 3} F", "esr": f"{3 * ESR} ohm",
         "v_rated": "100 V", "t_max": "105 degC", "thermal": {"rth_ha": "1e-6 K/W"}},
        {"name": "cout_b", "position": "output", "c": f"{2 * C_OUT / 3} F",
         "esr": f"{1.5 * ESR} ohm", "v_rated": "100 V", "t_max": "105 degC",
         "thermal": {"rth_ha": "1e-6 K/W"}},
    ]
    two = lb.load_design({
        "design": {"name": "two equal-time-constant banks", "topology": topology,
                   "rectifier": "diode"},
        "operating": {"vin": f"{vin} V", "vout": f"{vout} V", "iout_rated": "5 A",
                      "fsw": f"{FSW} Hz", "ambient": "25 degC", "max_duty": 0.98},
        "switch": {"vds_rated": "100 V", "rds_on": f"{R_SW} ohm", "v_th": "2 V",
                   "v_plateau": "3 V", "qg": "1e-6 nC", "qgs": "4e-7 nC", "qgd": "4e-7 nC",
                   "rg": "1 ohm", "tj_max": "150 degC", "thermal": {"rth_ha": "1e-6 K/W"}},
        "driver": {"v_drive": "10 V", "r_source": "1 ohm", "r_sink": "1 ohm"},
        "rectifier": {"vr_rated": "100 V", "vf0": f"{VF0} V", "rd": f"{RD} ohm",
                      "tj_max": "150 degC", "thermal": {"rth_ha": "1e-6 K/W"}},
        "inductor": {"l": f"{L} H", "dcr": f"{DCR} ohm", "t_max": "125 degC",
                     "thermal": {"rth_ha": "1e-6 K/W"}},
        "capacitor": raw_caps,
    })
    b = lb.solve(two, vin=vin, load=ref.iout_avg)
    np.testing.assert_allclose(float(b.vout_pp), ref.vout_pp, rtol=0.01)
    # the banks share the ripple current as 1/3 and 2/3 of it at every harmonic
    np.testing.assert_allclose(b.stress("cout_b", "i_rms"), 2 * b.stress("cout_a", "i_rms"),
                               rtol=1e-9)
