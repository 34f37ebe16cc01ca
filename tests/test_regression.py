"""Regression snapshots of the demo and the sample designs (STYLE §6.6).

They detect change; they do not validate (the physics is checked against published sources in
the other tests). After an intended change, refresh them with
``LOSSBUDGET_UPDATE_SNAPSHOTS=1 python -m pytest -m regression`` and say why in the commit.
"""

from __future__ import annotations

import json
import os
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

import lossbudget as lb

ROOT = Path(__file__).resolve().parents[1]
SNAPSHOTS = Path(__file__).resolve().parent / "snapshots"
DESIGNS = {"demo": resources.files("lossbudget") / "data" / "demo.toml"} | {
    p.stem: p for p in sorted((ROOT / "sample_inputs").glob("*.toml"))
}


def _figures(path) -> dict:
    design = lb.load_design(path)
    op = design.operating
    b = lb.sweep(design, vin=[op.vin.min, op.vin.nom, op.vin.max],
                 load_fraction=[0.1, 0.5, 1.0], ambient=[op.ambient.nom, op.ambient.max])
    out = {
        "efficiency": b.efficiency,
        "total_loss_w": b.total_loss,
        "duty": b.duty,
        **{f"t_{node}_degc": t for node, t in b.temperatures.items()},
        **{f"loss_{c}_{m}_w": v for (c, m), v in b.losses.items()},
    }
    return {k: [None if not np.isfinite(x) else float(x) for x in np.ravel(v)]
            for k, v in out.items()}


@pytest.mark.regression
@pytest.mark.parametrize("name", sorted(DESIGNS))
def test_snapshot(name):
    current = _figures(DESIGNS[name])
    path = SNAPSHOTS / f"{name}.json"
    if os.environ.get("LOSSBUDGET_UPDATE_SNAPSHOTS") == "1":
        path.write_text(json.dumps(current, indent=1, sort_keys=True) + "\n", encoding="utf-8")
        return
    assert path.exists(), f"snapshot {path.name} is missing (LOSSBUDGET_UPDATE_SNAPSHOTS=1)"
    stored = json.loads(path.read_text(encoding="utf-8"))
    assert sorted(stored) == sorted(current), "rows added or removed"
    for key, values in stored.items():
        got = current[key]
        assert [v is None for v in values] == [v is None for v in got], key
        a = np.array([np.nan if v is None else v for v in values])
        b = np.array([np.nan if v is None else v for v in got])
        np.testing.assert_allclose(b, a, rtol=1e-6, atol=1e-9, equal_nan=True, err_msg=key)
