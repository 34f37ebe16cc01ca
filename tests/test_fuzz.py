"""A short seeded run of the fuzz campaign (the full one: ``benchmarks/fuzz.py``).

Every generated input must end as a one-line ``DesignError`` or as a finite result whose
unsolvable or extrapolated points are flagged with their reason; the energy balance of every
solved point, Vin·I_in = Pout + every loss (conservation of energy, SPEC §2.1), within 1e-3.
"""

from __future__ import annotations

import dataclasses
import importlib.util
from importlib import resources
from pathlib import Path

import numpy as np

from lossbudget import load_design, solve

ROOT = Path(__file__).resolve().parents[1]
_spec = importlib.util.spec_from_file_location("lossbudget_fuzz", ROOT / "benchmarks" / "fuzz.py")
fuzz = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fuzz)


def test_the_seeded_campaign_has_no_crash_and_no_silent_wrong_result():
    counts = fuzz.campaign(seed=2026, mutations=250, numeric=60, cli=30, limits_every=50)
    details = counts.pop("details")
    assert details == []
    total = sum((c for c in counts.values()), start=type(counts["cli"])())
    assert total["crash"] == 0 and total["silent_wrong"] == 0
    # the campaign reached both ends: refused inputs and solved (clean or flagged) ones
    assert total["design_error"] > 0
    assert total["solved"] + total["flagged"] > 0
    assert sum(counts["mutations"].values()) == 250


def _demo_budget():
    design = load_design(resources.files("lossbudget") / "data" / "demo.toml")
    return solve(design, vin=24.0, load_fraction=np.array([0.5, 1.0]))


def test_the_judge_catches_a_negative_unflagged_loss():
    b = _demo_budget()
    assert fuzz.judge_budget(b) == ("solved", "")
    losses = dict(b.losses)
    losses["inductor", "core"] = -np.abs(losses["inductor", "core"])
    outcome, detail = fuzz.judge_budget(dataclasses.replace(b, losses=losses))
    assert outcome == "silent_wrong" and "negative" in detail


def test_the_judge_catches_an_open_energy_balance():
    b = _demo_budget()
    outcome, detail = fuzz.judge_budget(
        dataclasses.replace(b, source_input_power=b.source_input_power * 1.01)
    )
    assert outcome == "silent_wrong" and "energy balance" in detail


def test_the_judge_catches_a_flag_without_its_reason():
    b = _demo_budget()
    flags = dict(b.flags)
    flags["extrapolated"] = np.ones(b.shape, dtype=bool)
    outcome, _ = fuzz.judge_budget(dataclasses.replace(b, flags=flags))
    assert outcome == "silent_wrong"
