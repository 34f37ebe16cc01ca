"""Benchmarks against the speed and size targets of SPEC §9; prints measured vs target.

    .venv/bin/python benchmarks/run.py           # everything (the 1000 × 1000 map takes minutes)
    .venv/bin/python benchmarks/run.py --quick   # skip the 1000 × 1000 map

Each map is solved in a fresh child process (this script run with ``--case``), so its time
excludes start-up and its peak memory (``resource.getrusage`` maximum resident set size) is
its own. The maps use the embedded demo design with the coupled thermal solve, over the
design's input range × 1 % to 100 % of rated load.
"""

from __future__ import annotations

import argparse
import json
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

TARGETS = {
    "map100": 50_000.0,  # operating points a second (100 × 100 in under 0.2 s)
    "map1000_s": 30.0,  # seconds, 1000 × 1000, point table only
    "map1000_gb": 2.0,  # peak memory, GB
    "help_s": 0.5,
    "demo_s": 10.0,
    "stage_s": 0.1,  # 10,000 operating points, steady state and conduction losses
}


def _stage() -> float:
    """Best time of the boost steady state plus its conduction losses at 10,000 points."""
    import numpy as np

    from lossbudget.topologies import STAGES

    n = 10_000
    vin = np.linspace(18.0, 32.0, n)
    load = np.linspace(0.2, 4.0, n)
    best = float("inf")
    for _ in range(5):
        t0 = time.perf_counter()
        s = STAGES["boost"](vin=vin, vc=48.0, i_out=load, fsw=200e3, l=22e-6, r_sw=0.013,
                            r_l=0.012, r_rect=0.018, vf0=0.42, p_edge=0.0, dcm_allowed=True,
                            max_duty=0.9, min_on_time=120e-9)
        _ = (0.013 * s.i_switch.mean_square() + 0.012 * s.i_l.mean_square()
             + 0.42 * s.i_rect.mean() + 0.018 * s.i_rect.mean_square())
        best = min(best, time.perf_counter() - t0)
    return best


def _case(name: str) -> None:
    """Run one map in this process and print its figures as JSON."""
    import importlib.resources

    import numpy as np

    import lossbudget

    n = {"map100": 100, "map1000": 1000}[name]
    design = lossbudget.load_design(importlib.resources.files("lossbudget") / "data"
                                    / "demo.toml")
    op = design.operating
    vin = np.linspace(op.vin.min, op.vin.max, n)
    load = np.linspace(0.01, 1.0, n) * op.iout_rated
    lossbudget.sweep(design, vin=vin[:2], load=load[:2])  # warm the imports and caches
    repeats = 3 if n <= 100 else 1
    best = float("inf")
    rows = 0
    for _ in range(repeats):
        t0 = time.perf_counter()
        budget = lossbudget.sweep(design, vin=vin, load=load)
        table = budget.point_table() if n > 100 else None
        best = min(best, time.perf_counter() - t0)
        rows = len(table) if table is not None else budget.efficiency.size
        del budget, table
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # kilobytes on Linux
    print(json.dumps({"points": n * n, "seconds": best, "rows": rows,
                      "peak_gb": peak_kb * 1024 / 1e9}))


def _variants_case() -> None:
    """100 design variants × a 20 × 20 map, coupled thermal, in this process (JSON out).

    The variants are the demo design with 10 inductances × 10 switch junction-to-case
    resistances, so every variant has its own thermal network; one vectorised solve.
    """
    import importlib.resources

    import numpy as np

    import lossbudget
    from lossbudget.factorial import variants

    design = lossbudget.load_design(importlib.resources.files("lossbudget") / "data"
                                    / "demo.toml")
    op = design.operating
    v = variants(design, vary={"inductor.l": np.linspace(15e-6, 33e-6, 10),
                               "switch.thermal.rth_jc": np.linspace(0.5, 1.4, 10)})
    vin = np.linspace(op.vin.min, op.vin.max, 20)
    load = np.linspace(0.01, 1.0, 20) * op.iout_rated
    lossbudget.sweep(v, vin=vin[:2], load=load[:2])  # warm the imports and caches
    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        budget = lossbudget.sweep(v, vin=vin, load=load)
        best = min(best, time.perf_counter() - t0)
    print(json.dumps({"points": int(budget.efficiency.size), "seconds": best,
                      "variants": len(v)}))


def _child(name: str) -> dict:
    out = subprocess.run([sys.executable, __file__, "--case", name], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def _cli() -> list[str]:
    script = Path(sys.executable).with_name("lossbudget")
    if script.exists():
        return [str(script)]
    found = shutil.which("lossbudget")
    return [found] if found else [sys.executable, "-m", "lossbudget"]


def _wall(cmd: list[str], *, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, check=True)
        best = min(best, time.perf_counter() - t0)
    return best


def _line(what: str, measured: str, target: str, ok: bool) -> str:
    return f"{what:<44} {measured:>16}   target {target:<14} {'PASS' if ok else 'MISS'}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 1000 × 1000 map")
    parser.add_argument("--case", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.case == "variants100":
        _variants_case()
        return
    if args.case:
        _case(args.case)
        return
    lines = [f"lossbudget benchmarks (SPEC §9), Python {sys.version.split()[0]}, one process "
             "per case"]
    t = _stage()
    lines.append(_line("steady state + conduction, 10,000 points", f"{t:.4f} s",
                       f"< {TARGETS['stage_s']:g} s", t < TARGETS["stage_s"]))
    m = _child("map100")
    rate = m["points"] / m["seconds"]
    lines.append(_line("100 × 100 map, coupled thermal (best of 3)",
                       f"{rate:,.0f} pt/s", f">= {TARGETS['map100']:,.0f} pt/s",
                       rate >= TARGETS["map100"]))
    lines.append(f"{'':<44} {m['seconds']:>14.3f} s   (target 0.2 s)")
    single_rate = rate
    m = _child("variants100")
    rate = m["points"] / m["seconds"]
    lines.append(_line("100 variants × 20 × 20, coupled (best of 3)", f"{rate:,.0f} pt/s",
                       f">= {single_rate:,.0f} pt/s", rate >= single_rate))
    lines.append(f"{'':<44} {m['seconds']:>14.3f} s   (target: the 100 × 100 map's rate "
                 "above, no dearer per point)")
    if args.quick:
        lines.append("1000 × 1000 map: skipped (--quick)")
    else:
        m = _child("map1000")
        rate = m["points"] / m["seconds"]
        lines.append(_line("1000 × 1000 map + point table, wall time", f"{m['seconds']:.1f} s",
                           f"< {TARGETS['map1000_s']:g} s", m["seconds"] < TARGETS["map1000_s"]))
        lines.append(f"{'':<44} {rate:>11,.0f} pt/s   ({m['rows']:,} rows)")
        lines.append(_line("1000 × 1000 map, peak memory (max RSS)", f"{m['peak_gb']:.2f} GB",
                           f"< {TARGETS['map1000_gb']:g} GB",
                           m["peak_gb"] < TARGETS["map1000_gb"]))
    cli = _cli()
    t = _wall([*cli, "--help"], repeats=5)
    lines.append(_line("lossbudget --help start-up (best of 5)", f"{t:.3f} s",
                       f"< {TARGETS['help_s']:g} s", t < TARGETS["help_s"]))
    with tempfile.TemporaryDirectory() as tmp:
        t = _wall([*cli, "demo", "--out", str(Path(tmp) / "demo")], repeats=1)
    lines.append(_line("lossbudget demo, end to end", f"{t:.2f} s",
                       f"< {TARGETS['demo_s']:g} s", t < TARGETS["demo_s"]))
    print("\n".join(lines))


if __name__ == "__main__":
    main()
