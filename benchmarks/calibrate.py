"""Time one calibration: the grow-light sample design on its invented bench file.

    .venv/bin/python benchmarks/calibrate.py

Prints the wall time of ``lossbudget.calibrate``, the number of model solves it made (one
vectorised solve over all measured points each), and the time per solve. No target in SPEC
§9; the figure says what a fit costs on this machine.
"""

from __future__ import annotations

import time
from pathlib import Path

import lossbudget
from lossbudget.calibration import calibrate

ROOT = Path(__file__).resolve().parents[1]
CASES = (
    ("grow_light_led_boost.toml", "grow_light_led_boost_bench.csv",
     "switching,board,rth.spreader"),
)


def main() -> None:
    for design_name, bench_name, free in CASES:
        design = lossbudget.load_design(ROOT / "sample_inputs" / design_name)
        start = time.perf_counter()
        cal = calibrate(design, ROOT / "sample_inputs" / bench_name, free=free)
        elapsed = time.perf_counter() - start
        print(f"{bench_name}: {cal.bench.size} points, free {free}: {elapsed:.2f} s, "
              f"{cal.evaluations} solves, {elapsed / cal.evaluations * 1e3:.0f} ms a solve")


if __name__ == "__main__":
    main()
