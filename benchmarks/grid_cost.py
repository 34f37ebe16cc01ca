"""Per-point cost of the commands that sweep a grid: the basis of the size budget.

    .venv/bin/python benchmarks/grid_cost.py                 # map, csv and xlsx exports
    .venv/bin/python benchmarks/grid_cost.py --only map --n 1000

Each command runs in a child process on the embedded demo design over an n × n grid
(vin min to max, 1 % to 100 % of rated load) and a small 10 × 10 grid; the figures printed
are the wall time and the peak memory (maximum resident set size of the child) per point
above the small grid's. ``lossbudget/commands/sizing.py`` holds the figures this printed on
the development machine; rerun it after a change that moves the engine's speed or memory.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
from pathlib import Path

DEMO = Path(__file__).parents[1] / "lossbudget" / "data" / "demo.toml"
CASES = {
    "map": lambda out, n: ["map", str(DEMO), "--vin", f"18:32:{n}", "--load-pct", f"1:100:{n}",
                           "--out", str(out / "map"), "--max-points", str(n * n)],
    "csv": lambda out, n: ["export", str(DEMO), "-o", str(out / "b.csv"), "--vin",
                           f"18:32:{n}", "--load-pct", f"1:100:{n}", "--max-points",
                           str(n * n)],
    "json": lambda out, n: ["export", str(DEMO), "-o", str(out / "b.json"), "--vin",
                            f"18:32:{n}", "--load-pct", f"1:100:{n}", "--max-points",
                            str(n * n)],
    "xlsx": lambda out, n: ["export", str(DEMO), "-o", str(out / "b.xlsx"), "--vin",
                            f"18:32:{n}", "--load-pct", f"1:100:{n}", "--no-limits",
                            "--max-points", str(n * n)],
}
DEFAULT_N = {"map": 1000, "csv": 1000, "json": 300, "xlsx": 100}


def _cli() -> list[str]:
    script = Path(sys.executable).with_name("lossbudget")
    return [str(script)] if script.exists() else [sys.executable, "-m", "lossbudget"]


def _run(args: list[str]) -> tuple[float, float]:
    """Wall time [s] and peak memory [bytes] of one command in a fresh child process."""
    code = ("import resource, subprocess, sys, time; t = time.perf_counter(); "
            "subprocess.run(sys.argv[1:], check=True, stdout=subprocess.DEVNULL, "
            "stderr=subprocess.DEVNULL); "
            "print(time.perf_counter() - t, "
            "resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)")
    out = subprocess.run([sys.executable, "-c", code, *_cli(), *args], capture_output=True,
                         text=True, check=True)
    seconds, kb = out.stdout.split()
    return float(seconds), float(kb) * 1024.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", choices=sorted(CASES))
    parser.add_argument("--n", type=int, help="grid side (default per case)")
    args = parser.parse_args()
    print(f"per-point cost, demo design, {os.cpu_count()} CPUs, Python {sys.version.split()[0]}")
    for name, build in CASES.items():
        if args.only and name != args.only:
            continue
        n = args.n or DEFAULT_N[name]
        with tempfile.TemporaryDirectory() as tmp:
            t0, m0 = _run(build(Path(tmp), 10))
            t1, m1 = _run(build(Path(tmp), n))
        points = n * n - 100
        print(f"{name:<5} {n} x {n}: {t1:8.1f} s, peak {m1 / 1e9:6.2f} GB; per point "
              f"{(t1 - t0) / points * 1e6:8.1f} us, {(m1 - m0) / points:8.0f} B "
              f"(10 x 10: {t0:.1f} s, {m0 / 1e9:.2f} GB)")


if __name__ == "__main__":
    main()
