"""Write the invented bench file of the grow-light sample design (sample_inputs/).

The "measurements" are made by the model itself: the sample design with known scale factors
(switching x 1.25, an added 12 mohm board resistance at the DC input, the spreader's
resistance to ambient x 1.15), solved at 12 points, plus seeded Gaussian noise of the default
reading uncertainties of lossbudget.calibration.Uncertainty (0.1 % of each power reading and
a 5 mW floor on the loss, 1 K on a temperature). They are demo data, not measurements of any
hardware. Run from the repository root: python scripts/make_sample_bench.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

import lossbudget
from lossbudget.calibration import Uncertainty
from lossbudget.design import ScaleFactors, apply_calibration

ROOT = Path(__file__).resolve().parents[1]
DESIGN = ROOT / "sample_inputs" / "grow_light_led_boost.toml"
BENCH = ROOT / "sample_inputs" / "grow_light_led_boost_bench.csv"
TRUE = ScaleFactors(switching=1.25, board=(("input", 0.012),), rth=(("spreader", 1.15),))
SEED = 2026


def main() -> None:
    design = lossbudget.load_design(DESIGN)
    truth = apply_calibration(design, TRUE)
    vin = np.repeat([10.0, 12.0, 14.0], 4)
    load = np.tile([0.3, 0.75, 1.1, 1.5], 3)
    rng = np.random.default_rng(SEED)
    ambient = np.round(24.0 + rng.uniform(-1.0, 1.0, vin.size), 1)
    b = lossbudget.solve(truth, vin=vin, load=load, ambient=ambient)
    unc = Uncertainty()
    pin = b.input_power * (1 + unc.power_rel * rng.standard_normal(vin.size))
    pout = b.output_power * (1 + unc.power_rel * rng.standard_normal(vin.size))
    pin = pin + unc.power_floor * rng.standard_normal(vin.size)
    t_case = b.temperature("switch.case") + unc.temperature * rng.standard_normal(vin.size)
    t_ind = b.temperature("inductor") + unc.temperature * rng.standard_normal(vin.size)
    lines = [
        "# INVENTED bench data for sample_inputs/grow_light_led_boost.toml: made by "
        "scripts/make_sample_bench.py",
        "# from the model with known factors (switching x 1.25, board.input 12 mohm, "
        "rth.spreader x 1.15)",
        "# plus seeded noise (0.1 % per power reading, 5 mW, 1 K). Not a measurement of any "
        "hardware.",
        "vin_v,load_a,ambient_degc,input_power_w,output_power_w,t_switch_case_degc,"
        "t_inductor_degc",
    ]
    for row in zip(vin, load, ambient, pin, pout, t_case, t_ind, strict=True):
        v, a, t, pi, po, tc, ti = row
        lines.append(f"{v:g},{a:g},{t:.1f},{pi:.4f},{po:.4f},{tc:.1f},{ti:.1f}")
    BENCH.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {BENCH}")


if __name__ == "__main__":
    main()
