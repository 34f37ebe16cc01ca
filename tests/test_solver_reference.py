"""The analytic engine against the exact switched-circuit solution (tests/reference_circuit.py).

The reference solves the switched circuit with its parasitics (switch resistance, diode drop,
winding resistance, ESR, resistive load) exactly per sub-interval with the matrix exponential,
finds the periodic steady state and the duty that regulates the output, and integrates each
element's loss. The engine is driven through the public API (`load_design`, `solve`) with a
design whose only losses are the conduction losses that the reference also has: gate charges
so small that the switching edges are negligible, no node charge, no recovery, no core, no
winding geometry, no leakage, and thermal paths so short that every part stays at the ambient
(so the resistances are their 25 degC values). Points are at least 2 % away from the CCM/DCM
boundary and the output ripple is under 1 %, as the piecewise-linear model needs.

Tolerances (SPEC §8, issue of the operating point): total conduction loss within 1 %, each
part's conduction loss within 2 %, duty within 0.5 % relative, the same mode.
"""

from __future__ import annotations

import numpy as np
import pytest

import lossbudget as lb
from tests.reference_circuit import regulate

R_SW = 0.020
R_SYNC = 0.015
VF0 = 0.45
RD = 0.030
DCR = 0.025
ESR = 0.010
C_OUT = 470e-6
L = 10e-6
FSW = 100e3

CASES = {
    # topology: (vin, vout, load_ccm, load_dcm)
    "boost": (12.0, 30.0, 3.0, 0.15),
    "buck": (30.0, 12.0, 5.0, 0.25),
    "buck-boost": (12.0, -15.0, 2.5, 0.12),
}


def _fet(r: float) -> dict:
    return {
        "vds_rated": "100 V", "rds_on": f"{r} ohm", "v_th": "2 V", "v_plateau": "3 V",
        "qg": "1e-6 nC", "qgs": "4e-7 nC", "qgd": "4e-7 nC", "rg": "1 ohm",
        "tj_max": "150 degC", "thermal": {"rth_ha": "1e-6 K/W"},
    }


def _design(topology: str, rectifier: str) -> lb.Design:
    vin, vout, _, _ = CASES[topology]
    rect: dict
    if rectifier == "diode":
        rect = {"vr_rated": "100 V", "vf0": f"{VF0} V", "rd": f"{RD} ohm", "tj_max": "150 degC",
                "thermal": {"rth_ha": "1e-6 K/W"}}
    else:
        rect = _fet(R_SYNC)
    design = {
        "design": {"name": "reference check", "topology": topology,
                   "rectifier": "diode" if rectifier == "diode" else "sync"},
        "operating": {"vin": f"{vin} V", "vout": f"{vout} V", "iout_rated": "5 A",
                      "fsw": f"{FSW} Hz", "ambient": "25 degC", "max_duty": 0.98},
        "switch": _fet(R_SW),
        "driver": {"v_drive": "10 V", "r_source": "1 ohm", "r_sink": "1 ohm"},
        "rectifier": rect,
        "inductor": {"l": f"{L} H", "dcr": f"{DCR} ohm", "t_max": "125 degC",
                     "thermal": {"rth_ha": "1e-6 K/W"}},
        "capacitor": [{"name": "cout", "position": "output", "c": f"{C_OUT} F",
                       "esr": f"{ESR} ohm", "v_rated": "100 V", "t_max": "105 degC",
                       "thermal": {"rth_ha": "1e-6 K/W"}}],
    }
    if rectifier == "sync-emulated":
        design["design"]["light_load"] = "diode-emulation"
    return lb.load_design(design)


def _reference(topology: str, rectifier: str, load: float):
    vin, vout, _, _ = CASES[topology]
    kw = {"vf0": VF0, "rd": RD} if rectifier == "diode" else {"r_sync": R_SYNC}
    return regulate(topology=topology, rectifier=rectifier, vin=vin, vout=abs(vout), fsw=FSW,
                    l=L, dcr=DCR, c=C_OUT, esr=ESR, r_load=abs(vout) / load, r_switch=R_SW,
                    **kw)


PARAMS = [(t, r, m) for t in CASES for r in ("diode", "sync", "sync-emulated")
          for m in ("ccm", "dcm")]


@pytest.mark.parametrize(("topology", "rectifier", "which"), PARAMS)
def test_conduction_losses_match_exact_circuit(topology, rectifier, which):
    vin, vout, load_ccm, load_dcm = CASES[topology]
    load = load_ccm if which == "ccm" else load_dcm
    ref = _reference(topology, rectifier, load)
    budget = lb.solve(_design(topology, rectifier), vin=vin, load=ref.iout_avg)
    assert ref.vout_pp / abs(vout) < 0.01  # the piecewise-linear model's premise
    expected_mode = "CCM" if (which == "ccm" or rectifier == "sync") else "DCM"
    assert ref.mode == expected_mode
    assert budget.mode[()] == ref.mode
    np.testing.assert_allclose(budget.duty, ref.duty, rtol=5e-3)
    rect_key = ("rectifier", "forward") if rectifier == "diode" else ("rectifier", "conduction")
    parts = {
        "switch": (budget.loss("switch", "conduction"), ref.loss_switch),
        "rectifier": (budget.loss(*rect_key), ref.loss_rectifier),
        "inductor": (budget.loss("inductor", "copper_dc"), ref.loss_dcr),
        "cout": (budget.loss("cout", "esr"), ref.loss_esr),
    }
    for name, (engine, exact) in parts.items():
        np.testing.assert_allclose(engine, exact, rtol=2e-2, err_msg=name)
    total_engine = sum(v[0] for v in parts.values())
    total_exact = sum(v[1] for v in parts.values())
    np.testing.assert_allclose(total_engine, total_exact, rtol=1e-2)
    # input power: source voltage times average source current of the exact circuit
    np.testing.assert_allclose(budget.input_power, ref.pin, rtol=1e-3)


def test_boundary_margin_of_the_cases():
    """The DCM points sit well below the boundary and the CCM points well above it.

    Source: Erickson & Maksimović, Fundamentals of Power Electronics, 2nd ed., 2001, ch. 5:
    K = 2L/(R·T_s), K_crit = D(1 − D)² (boost), 1 − D (buck), (1 − D)² (buck-boost).
    """
    for topology, (vin, vout, load_ccm, load_dcm) in CASES.items():
        m = abs(vout) / vin
        d = {"boost": 1 - 1 / m, "buck": m, "buck-boost": m / (1 + m)}[topology]
        k_crit = {"boost": d * (1 - d) ** 2, "buck": 1 - d, "buck-boost": (1 - d) ** 2}[topology]
        for load, above in ((load_ccm, True), (load_dcm, False)):
            k = 2 * L * FSW / (abs(vout) / load)
            assert (k > 1.02 * k_crit) if above else (k < 0.98 * k_crit)
