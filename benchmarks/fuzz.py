"""Seeded fuzz campaign of the loader, the solver, the limit check and the command line.

    .venv/bin/python benchmarks/fuzz.py                     # the full campaign (several minutes)
    .venv/bin/python benchmarks/fuzz.py --mutations 300 --numeric 100 --cli 40   # a short one

Three kinds of case, all from one seed:

- mutations: one to three random edits of the shipped designs (the samples and the demo): a
  value replaced (extreme numbers, subnormal and huge magnitudes, NaN, a number scaled by powers
  of ten with its unit kept, wrong units, long strings, control characters, wrong types), a key
  deleted, an unknown key added; then ``load_design``, ``solve`` over a small grid and, on
  some, ``check_limits``;
- numeric: the demo with its numeric values drawn log-uniformly over wide legal ranges and
  solved at random operating points (the property: every solved point is finite, its losses
  are not negative, its energy balance Vin·I_in = Pout + every loss closes within 1e-3, and a
  flagged point names its reason);
- cli: click's CliRunner on ``validate``, ``point``, ``map`` and ``export`` with random option
  values: exit 0, 1, 2 or 4 (nothing solved, with its reason), never 3, and on exit 2 each
  stderr line is one problem.

Each case ends as one of: ``design_error`` (a DesignError whose problems are one line each),
``solved`` (clean), ``flagged`` (solved with a flagged point, each with its reason), ``crash``
(any other exception or warning, or a multi-line problem) or ``silent_wrong`` (an unflagged
point with a negative or non-finite number or an open energy balance). The counts are printed;
the exit status is 1 when there is any crash or silent-wrong case.
"""

from __future__ import annotations

import argparse
import copy
import math
import random
import tempfile
import time
import tomllib
import traceback
import warnings
from collections import Counter
from importlib import resources
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
BALANCE = 1e-3
OUTCOMES = ("design_error", "solved", "flagged", "crash", "silent_wrong")


def bases() -> dict[str, dict]:
    """The shipped designs the mutations start from: every sample and the demo."""
    out = {}
    for path in sorted((ROOT / "sample_inputs").glob("*.toml")):
        out[path.stem] = tomllib.loads(path.read_text(encoding="utf-8"))
    demo = resources.files("lossbudget") / "data" / "demo.toml"
    out["demo"] = tomllib.loads(demo.read_text(encoding="utf-8"))
    return out


# ---- mutations ------------------------------------------------------------------------------


def _leaves(node, path=()):
    """Every (container, key, path) below a design dict, containers included."""
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for key, value in items:
        yield node, key, (*path, key)
        if isinstance(value, dict | list):
            yield from _leaves(value, (*path, key))


_WRONG_UNITS = ("uF", "mH", "degC", "K/W", "kHz", "V", "A", "mohm", "nC", "cm3", "%", "h")


def _scaled(value, rng: random.Random):
    """The same quantity scaled by a power of ten, its unit kept (an extreme legal value)."""
    k = rng.choice((-30, -12, -6, -3, -1, 1, 2, 3, 6, 12, 30, 300))
    if isinstance(value, bool):
        return not value
    if isinstance(value, int | float):
        return value * 10.0**k
    if isinstance(value, str):
        head, _, tail = value.partition(" ")
        try:
            number = float(head)
        except ValueError:
            return value + "0"
        return f"{number * 10.0**k:g} {tail}".strip()
    return value


def _replacement(value, rng: random.Random):
    pool = [
        0,
        -1,
        1,
        -1e308,
        1e308,
        1e-320,
        math.nan,
        math.inf,
        9223372036854775807,
        -9223372036854775807,
        400,
        "",
        "x" * rng.choice((1, 80, 100_000)),
        "1e-320 ohm",
        "0 K",
        "-273.15 degC",
        "1e308 V",
        "nan",
        "cart\tbus",
        "line\nbreak",
        "\x1b[2J",
        "=2+2",
        "$x^2$",
        True,
        [],
        {},
        [1, 2, 3],
        {"typ": "1 V"},
    ]
    roll = rng.random()
    if roll < 0.45:
        return _scaled(value, rng)
    if roll < 0.55 and isinstance(value, str):
        head = value.split(" ")[0]
        return f"{head} {rng.choice(_WRONG_UNITS)}"
    if roll < 0.62 and isinstance(value, int | float) and not isinstance(value, bool):
        return -value
    return rng.choice(pool)


def mutate(raw: dict, rng: random.Random) -> tuple[dict, list[str]]:
    """One to three random edits of a design; returns the edited copy and what was done."""
    raw = copy.deepcopy(raw)
    done = []
    for _ in range(rng.choice((1, 1, 2, 3))):
        spots = list(_leaves(raw))
        if not spots:
            break
        parent, key, path = rng.choice(spots)
        what = rng.random()
        name = ".".join(str(p) for p in path)
        if what < 0.12 and isinstance(parent, dict):
            del parent[key]
            done.append(f"del {name}")
        elif what < 0.17 and isinstance(parent, dict):
            parent[f"{key}_extra"] = 1
            done.append(f"add {name}_extra")
        elif isinstance(parent[key], dict | list) and parent[key] and what < 0.3:
            continue  # the edit goes below
        else:
            parent[key] = _replacement(parent[key], rng)
            done.append(f"set {name} = {str(parent[key])[:40]!r}")
    return raw, done


# ---- judging one design -----------------------------------------------------------------------


def judge_budget(budget) -> tuple[str, str]:
    """``flagged``, ``solved`` or ``silent_wrong`` (with what is wrong) for a solved budget."""
    flagged = budget.flagged
    marked = flagged | budget.flags["extrapolated"]
    good = ~flagged
    reason = np.asarray(budget.reason).astype(str)
    if np.any(marked & (reason == "")):
        return "silent_wrong", "a flagged point without its reason"
    with np.errstate(invalid="ignore"):
        for key, value in budget.losses.items():
            value = np.broadcast_to(value, budget.shape)
            if np.any(good & ~np.isfinite(value)):
                return "silent_wrong", f"non-finite loss {key} unflagged"
            if np.any(good & (value < 0)):
                return "silent_wrong", f"negative loss {key} unflagged"
        for group in (budget.temperatures, budget.stresses):
            for key, value in group.items():
                if np.any(good & ~np.isfinite(np.broadcast_to(value, budget.shape))):
                    return "silent_wrong", f"non-finite {key} unflagged"
        pin = budget.input_power
        rel = np.abs(budget.source_input_power - pin) / np.abs(pin)
        if np.any(good & ~(rel <= BALANCE)):
            worst = float(np.nanmax(np.where(good, rel, np.nan)))
            return "silent_wrong", f"energy balance off by {worst:.3g}"
        eff = budget.efficiency
        if np.any(good & ~((eff > 0) & (eff <= 1))):
            return "silent_wrong", "efficiency outside (0, 1]"
    return ("flagged" if np.any(marked) else "solved"), ""


def run_design(raw: dict, *, rng: random.Random, limits: bool) -> tuple[str, str]:
    """Load, solve over a small grid (and check limits): the outcome and a detail."""
    from lossbudget import DesignError, load_design, solve
    from lossbudget.limits import check_limits

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            design = load_design(raw)
        except DesignError as exc:
            bad = [p for p in exc.problems if "\n" in p or "\r" in p]
            return ("crash", f"multi-line problem {bad[0][:80]!r}") if bad else ("design_error", "")
        except Exception as exc:  # the campaign counts every other exception
            return "crash", f"load: {type(exc).__name__}: {exc}"[:200]
        try:
            op = design.operating
            vin = np.array([op.vin.min, op.vin.nom, op.vin.max])[:, None]
            frac = np.array(sorted(rng.choice((0.01, 0.02, 0.1, 0.5, 1.0, 1.2)) for _ in range(3)))
            budget = solve(design, vin=vin, load_fraction=frac[None, :])
            outcome = judge_budget(budget)
            if limits and outcome[0] != "silent_wrong":
                report = check_limits(design)
                if report.worst_status not in ("ok", "caution", "fail"):
                    return "silent_wrong", f"limit status {report.worst_status!r}"
            return outcome
        except DesignError as exc:
            bad = [p for p in exc.problems if "\n" in p]
            return ("crash", "multi-line problem") if bad else ("design_error", "late")
        except Exception as exc:
            tb = traceback.extract_tb(exc.__traceback__)[-1]
            where = f"{Path(tb.filename).name}:{tb.lineno}"
            return "crash", f"solve: {type(exc).__name__} at {where}: {exc}"[:200]


# ---- numeric property cases -----------------------------------------------------------------

_NUMERIC = {
    # key path in the demo -> (low, high, unit), drawn log-uniformly
    ("inductor", "l"): (1e-7, 1e-3, "H"),
    ("inductor", "dcr"): (1e-4, 1.0, "ohm"),
    ("operating", "fsw"): (1e4, 5e6, "Hz"),
    ("operating", "iout_rated"): (0.01, 40.0, "A"),
    ("switch", "qg"): (3e-8, 1e-6, "C"),  # the demo has qgs + qgd = 27 nC
    ("switch", "rg"): (1e-2, 20.0, "ohm"),
    ("rectifier", "rd"): (1e-4, 1.0, "ohm"),
    ("inductor", "thermal", "rth_ha"): (0.1, 500.0, "K/W"),
    ("thermal", "sink", 0, "rth_to_ambient"): (0.1, 100.0, "K/W"),
}


def numeric_case(base: dict, rng: random.Random) -> dict:
    """The demo with several numeric values drawn over wide legal ranges."""
    raw = copy.deepcopy(base)
    for path, (lo, hi, unit) in _NUMERIC.items():
        if rng.random() < 0.6:
            node = raw
            for key in path[:-1]:
                node = node[key]
            value = math.exp(rng.uniform(math.log(lo), math.log(hi)))
            node[path[-1]] = f"{value:.6g} {unit}"
    layers = rng.choice((None, 1, 5, 20, 50, 100))
    if layers is not None:
        raw["inductor"]["winding"]["layers"] = layers
    if rng.random() < 0.3:
        raw.setdefault("resistor", []).append(
            {
                "name": "fuse_link",
                "position": rng.choice(("input", "switch", "rectifier", "inductor", "output")),
                "r": f"{math.exp(rng.uniform(math.log(1e-3), math.log(10.0))):.4g} ohm",
            }
        )
    return raw


# ---- command line ---------------------------------------------------------------------------

_OPTION_VALUES = {
    "--vin": ["24", "24 V", "0", "-48", "1e308", "nan", "18 V", "x", "32 V", "40 kV"],
    "--load": ["1 A", "-1 A", "0", "inf", "4", "1e-320", "2 mA"],
    "--load-pct": ["50", "-5", "nan", "inf", "100", "1e6", "0.5"],
    "--fsw": ["200 kHz", "0", "-1 kHz", "1e308", "2 MHz", "1 Hz", "nan"],
    "--ambient": ["25 degC", "0 K", "1e308 degC", "55 degC", "300 K", "25", "-40 degC"],
    "--corner": ["typ", "worst", "bad"],
}
_GRID_VALUES = {
    "--vin": ["18:32:2", "40:1e308:3", "0:24:2", "-48:58:3", "24:18:2", "18 V:32 V:2", "a:b:c"],
    "--load-pct": ["5:100:2", "5:nan:3", "-5:100:2", "50:50:1", "5:100:0"],
    "--load": ["0.2:4:2", "-1:4:3", "1 A:2 A:2"],
    "--ambient": ["25 degC", "0 K", "40 degC"],
}


def cli_case(rng: random.Random, design: str, tmp: Path, n: int) -> tuple[str, str]:
    """One command line; ``crash`` on exit 3 or a traceback, else the judged outcome."""
    from click.testing import CliRunner

    from lossbudget.cli import main

    command = rng.choice(("point", "point", "point", "validate", "map", "export"))
    args = [command, design]
    if command == "point":
        for option, values in _OPTION_VALUES.items():
            if rng.random() < 0.4:
                args += [option, rng.choice(values)]
        # --load with --load-pct is a case too: refused with exit 2
    elif command in ("map", "export"):
        args += (
            ["--out", str(tmp / f"m{n}")] if command == "map" else ["-o", str(tmp / f"e{n}.csv")]
        )
        args += ["--vin", rng.choice(_GRID_VALUES["--vin"])]
        key = rng.choice(("--load-pct", "--load"))
        args += [key, rng.choice(_GRID_VALUES[key])]
        if rng.random() < 0.3:
            args += ["--ambient", rng.choice(_GRID_VALUES["--ambient"])]
        if command == "export":
            args += ["--no-limits"]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        result = CliRunner().invoke(main, args)
    if result.exit_code == 3 or (result.exception and not isinstance(result.exception, SystemExit)):
        return "crash", f"{' '.join(args)[:120]}: {result.stderr.strip()[:160]}"
    if result.exit_code == 2:
        lines = result.stderr.strip().splitlines()
        if not lines:
            return "crash", f"exit 2 without a message: {' '.join(args)[:120]}"
        return "design_error", ""
    text = result.stdout
    if result.exit_code == 4:  # nothing could be solved: honest only with the reason shown
        if "not solved" not in text and "flagged" not in text:
            return "silent_wrong", f"exit 4 without a reason: {' '.join(args)[:120]}"
        return "flagged", ""
    if result.exit_code not in (0, 1):
        return "crash", f"exit {result.exit_code}: {' '.join(args)[:120]}"

    if " inf " in text or " nan " in text.lower():
        return "silent_wrong", f"a non-finite number printed: {' '.join(args)[:120]}"
    return ("flagged" if "not solved" in text or "flagged" in text else "solved"), ""


# ---- the campaign ---------------------------------------------------------------------------


def campaign(
    *, seed: int, mutations: int, numeric: int, cli: int, limits_every: int = 25, log=None
) -> dict[str, Counter]:
    """Run the campaign; per kind of case, the Counter of outcomes (and ``details`` lists)."""
    rng = random.Random(seed)
    raws = bases()
    names = sorted(raws)
    counts: dict[str, Counter] = {k: Counter() for k in ("mutations", "numeric", "cli")}
    details: list[str] = []
    for n in range(mutations):
        name = rng.choice(names)
        raw, done = mutate(raws[name], rng)
        outcome, detail = run_design(raw, rng=rng, limits=n % limits_every == 0)
        counts["mutations"][outcome] += 1
        if outcome in ("crash", "silent_wrong"):
            details.append(f"mutation {n} of {name} ({'; '.join(done)}): {outcome}: {detail}")
    for n in range(numeric):
        raw = numeric_case(raws["demo"], rng)
        outcome, detail = run_design(raw, rng=rng, limits=False)
        counts["numeric"][outcome] += 1
        if outcome in ("crash", "silent_wrong"):
            details.append(f"numeric {n}: {outcome}: {detail}")
    if cli:
        with tempfile.TemporaryDirectory() as tmp:
            tmp_path = Path(tmp)
            for n in range(cli):
                # a shipped design file, with random option values
                name = rng.choice(names)
                if name == "demo":
                    path = str(resources.files("lossbudget") / "data" / "demo.toml")
                else:
                    path = str(ROOT / "sample_inputs" / f"{name}.toml")
                outcome, detail = cli_case(rng, path, tmp_path, n)
                counts["cli"][outcome] += 1
                if outcome in ("crash", "silent_wrong"):
                    details.append(f"cli {n}: {outcome}: {detail}")
    counts["details"] = details  # type: ignore[assignment]
    return counts


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--mutations", type=int, default=5000)
    parser.add_argument("--numeric", type=int, default=2000)
    parser.add_argument("--cli", type=int, default=300)
    args = parser.parse_args()
    start = time.perf_counter()
    counts = campaign(seed=args.seed, mutations=args.mutations, numeric=args.numeric, cli=args.cli)
    elapsed = time.perf_counter() - start
    details = counts.pop("details")
    print(f"fuzz campaign, seed {args.seed}, {elapsed:.0f} s")
    print(f"{'kind':<10} {'cases':>6} " + " ".join(f"{o:>13}" for o in OUTCOMES))
    total = Counter()
    for kind, c in counts.items():
        total.update(c)
        print(f"{kind:<10} {sum(c.values()):>6} " + " ".join(f"{c[o]:>13}" for o in OUTCOMES))
    print(f"{'all':<10} {sum(total.values()):>6} " + " ".join(f"{total[o]:>13}" for o in OUTCOMES))
    for line in details[:40]:
        print("  " + line)
    return 1 if total["crash"] or total["silent_wrong"] else 0


if __name__ == "__main__":
    raise SystemExit(main())
