"""Safe and whole output sets: formula-free text, the size budget, atomic sets, signals.

Through click's CliRunner and through subprocesses; files only under tmp_path. The checks
come from outside the code under test: openpyxl reading the workbook back (a cell's data
type), Python's csv module and pandas reading the CSV files back, the file bytes before and
after a failure, and the operating system's exit status of a signalled child process.
"""

from __future__ import annotations

import csv
import errno
import hashlib
import importlib.resources
import os
import re
import signal
import subprocess
import sys
import threading
import time
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from click.testing import CliRunner

import lossbudget
from lossbudget.cli import main
from lossbudget.output import files as files_module
from lossbudget.output.tablefiles import table_chunks, write_csv

DEMO = Path(str(importlib.resources.files("lossbudget") / "data" / "demo.toml"))
INVERTING = Path(__file__).parents[1] / "sample_inputs" / "frontend_bias_inverting.toml"
SMALL = ["--vin", "18 V:32 V:3", "--load-pct", "10:100:4"]

# Payloads a spreadsheet would run as a formula or read as one. Source: OWASP, "CSV
# Injection" (owasp.org/www-community/attacks/CSV_Injection): fields starting with =, +, -,
# @, a tab or a carriage return.
PAYLOADS = {
    "design": '=HYPERLINK("http://x.invalid","y")',
    "cin": "=2+2",
    "cout": "@SUM(1+1)",
    "rsense": "-1+1",
    "board": "+board",
}


def _injected(tmp_path: Path, source: Path = DEMO) -> Path:
    text = source.read_text(encoding="utf-8")
    design_name = text.split('name = "', 1)[1].split('"', 1)[0]
    text = text.replace(f'name = "{design_name}"', 'name = "=HYPERLINK(\\"http://x.invalid\\",'
                        '\\"y\\")"', 1)
    for old in ("cin", "cout", "rsense", "board"):
        text = text.replace(f'"{old}"', f'"{PAYLOADS[old]}"')
    path = tmp_path / "injected.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _digest(folder: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.iterdir())}


def _invoke(*args: str):
    return CliRunner().invoke(main, list(args))


# --------------------------------------------------------------------------------------------
# item 1: no live formula from a name
# --------------------------------------------------------------------------------------------


def test_workbook_writes_names_as_text_never_as_formulas(tmp_path):
    design = _injected(tmp_path)
    out = tmp_path / "b.xlsx"
    result = _invoke("export", str(design), "-o", str(out), *SMALL, "--no-limits")
    assert result.exit_code == 0, result.output
    wb = openpyxl.load_workbook(out)
    kinds: dict[str, int] = {}
    found = set()
    for ws in wb:
        for row in ws.iter_rows():
            for cell in row:
                kinds[cell.data_type] = kinds.get(cell.data_type, 0) + 1
                if isinstance(cell.value, str):
                    found.update(p for p in PAYLOADS.values() if p in cell.value)
    # the workbook writes no formula of its own, so any formula cell would come from input
    assert kinds.get("f", 0) == 0 and kinds.get("e", 0) == 0, kinds
    assert set(PAYLOADS.values()) <= found  # the names are there, as text
    summary = wb["Summary"]
    cells = [c for row in summary.iter_rows() for c in row if c.value == PAYLOADS["design"]]
    assert cells and all(c.data_type == "s" for c in cells)
    # the charts: a series named after a part carries its name as a literal value (<v>);
    # the only formulas (<f>) are the workbook's own references to its Charts and Map sheets
    with zipfile.ZipFile(out) as archive:
        charts = [archive.read(n).decode() for n in archive.namelist()
                  if n.startswith("xl/charts/chart")]
    assert charts and any("<v>=2+2</v>" in xml for xml in charts)
    refs = [f for xml in charts for f in re.findall(r"<f>([^<]*)</f>", xml)]
    own = re.compile(r"'(Charts|Map)'!\$[A-Z]+\$\d+(:\$[A-Z]+\$\d+)?")
    assert refs and all(own.fullmatch(f) for f in refs), refs


def test_csv_text_fields_are_neutralised_and_negative_numbers_stay_numbers(tmp_path):
    design = _injected(tmp_path, INVERTING)
    out = tmp_path / "b.csv"
    result = _invoke("export", str(design), "-o", str(out), "--vin", "10:14:2",
                     "--load-pct", "20:100:2")
    assert result.exit_code == 0, result.output
    risky = ("=", "+", "-", "@", "\t", "\r")
    seen_prefixed = 0
    for path in sorted(tmp_path.glob("b*.csv")):
        with open(path, newline="", encoding="utf-8") as handle:
            raw = handle.read()
        for row in list(csv.reader(raw.splitlines()))[1:]:
            for value in row:
                if value.startswith(risky):
                    float(value)  # only a number may start so (-15.0); text would raise
                seen_prefixed += value.startswith("'")
        assert "\"'=2+2" in raw or path.name != "b-losses.csv"  # quoted, then prefixed
    assert seen_prefixed > 0  # the payload names reached the tables, prefixed
    points = pd.read_csv(out)
    # the inverting rail's output is negative in the tables, and stays a number
    assert points["vout_v"].dtype.kind == "f" and (points["vout_v"] < 0).all()
    losses = pd.read_csv(tmp_path / "b-losses.csv")
    assert "'=2+2" in set(losses["component"])  # the input capacitor bank, named "=2+2"


def test_write_csv_keeps_every_number_and_prefixes_only_text(tmp_path):
    frame = pd.DataFrame({"point_id": [0, 1, 2], "v": [-1.5, np.nan, 2.0e-12],
                          "flag": [True, False, True],
                          "name": ["=2+2", "plain", "\tTAB"]})
    path = write_csv(tmp_path / "t.csv", [frame.iloc[:2], frame.iloc[2:]])
    back = pd.read_csv(path)
    np.testing.assert_array_equal(back["point_id"], [0, 1, 2])
    np.testing.assert_array_equal(back["v"], frame["v"])  # exact: repr round-trips floats
    assert list(back["name"]) == ["'=2+2", "plain", "'\tTAB"]
    assert list(back["flag"]) == [True, False, True]


# --------------------------------------------------------------------------------------------
# "$" in names: plain text in every figure
# --------------------------------------------------------------------------------------------


def test_dollar_signs_in_names_are_drawn_as_text(tmp_path):
    text = DEMO.read_text(encoding="utf-8").replace(
        'name = "Motor-bus boost for a warehouse cart"', 'name = "cart $\\\\foo{$ rail"')
    text = text.replace('"board"', '"sink $\\\\frac$"').replace('"cout"', '"cout $x$"')
    design = tmp_path / "dollar.toml"
    design.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    result = _invoke("map", str(design), *SMALL, "--out", str(out))
    # before: matplotlib's mathtext failed on "\foo" (exit 3 after three plots)
    assert result.exit_code == 0, result.output
    from lossbudget.commands.mapping import FILE_NAMES

    assert len(list(out.glob("*.png"))) == len(FILE_NAMES)
    svg = tmp_path / "svg"
    result = _invoke("map", str(design), *SMALL, "--out", str(svg), "--format", "svg")
    assert result.exit_code == 0, result.output
    curves = (svg / "efficiency_curves.svg").read_text(encoding="utf-8")
    assert "cart $\\foo{$ rail" in curves  # svg.fonttype "path" keeps the text as a comment


# --------------------------------------------------------------------------------------------
# item 5: the size budget and streamed tables
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("command", ["map", "export-csv", "export-xlsx"])
def test_a_huge_grid_is_refused_before_solving(tmp_path, command, monkeypatch):
    def never(*_args, **_kwargs):
        raise AssertionError("solved a grid above the size budget")

    monkeypatch.setattr(sys.modules["lossbudget.sweep"], "sweep_rows", never)
    grid = ["--vin", "38:58:5000", "--load-pct", "5:100:5000"]
    if command == "map":
        args = ["map", str(DEMO), *grid, "--out", str(tmp_path / "out")]
    else:
        args = ["export", str(DEMO), "-o", str(tmp_path / f"b.{command[7:]}"), *grid]
    result = _invoke(*args)
    assert result.exit_code == 2, result.output
    line = result.stderr.strip()
    assert line.count("\n") == 0
    assert "25,000,000 points" in line and "--max-points 25000000" in line
    assert " GB of memory" in line and "grid_cost.py" in line
    assert list(tmp_path.iterdir()) == []  # nothing created, nothing half-written


def test_max_points_sets_the_budget(tmp_path):
    out = tmp_path / "out"
    refused = _invoke("map", str(DEMO), *SMALL, "--out", str(out), "--max-points", "11")
    assert refused.exit_code == 2 and "12 points" in refused.stderr
    assert not out.exists()
    done = _invoke("map", str(DEMO), *SMALL, "--out", str(out), "--max-points", "12")
    assert done.exit_code == 0, done.output
    assert (out / "points.csv").exists()


@pytest.mark.parametrize("table", ["point_table", "loss_table", "stress_table"])
def test_streamed_blocks_join_into_the_whole_table(table):
    design = lossbudget.load_design(DEMO)
    budget = lossbudget.sweep(design, vin=np.linspace(18, 32, 5), load=np.linspace(0.4, 4, 4))
    whole = getattr(budget, table)()
    blocks = list(table_chunks(budget, table, chunk_points=7))  # 1 row of 4 points a block
    assert len(blocks) == 5
    joined = pd.concat(blocks, ignore_index=True)
    pd.testing.assert_frame_equal(joined, whole)


def test_map_tables_are_streamed_in_blocks(tmp_path, monkeypatch):
    monkeypatch.setattr("lossbudget.output.tablefiles.CHUNK_POINTS", 4)
    out = tmp_path / "out"
    result = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert result.exit_code == 0, result.output
    points = pd.read_csv(out / "points.csv")
    want = lossbudget.sweep(lossbudget.load_design(DEMO), vin=np.linspace(18, 32, 3),
                            load=np.linspace(0.4, 4, 4))
    np.testing.assert_array_equal(points["point_id"], np.arange(12))
    # tolerance: the coupled solve's stopping error between batches (SPEC §2.7)
    np.testing.assert_allclose(points["efficiency"], np.ravel(want.efficiency), rtol=1e-5)
    assert len(pd.read_csv(out / "losses.csv")) == len(want.loss_table())


def test_export_leaves_the_loss_table_out_above_the_threshold_unless_asked(tmp_path,
                                                                          monkeypatch):
    monkeypatch.setattr("lossbudget.commands.exporting.LONG_TABLE_POINTS", 5)
    result = _invoke("export", str(DEMO), "-o", str(tmp_path / "b.csv"), *SMALL,
                     "--long-table")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "b-losses.csv").exists()
    result = _invoke("export", str(DEMO), "-o", str(tmp_path / "b.csv"), *SMALL)
    assert result.exit_code == 0, result.output
    # the earlier run's loss table is not left beside the new set
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b-stresses.csv", "b.csv"]
    assert "--long-table" in result.stdout


def test_a_map_that_leaves_a_file_out_removes_the_earlier_one(tmp_path, monkeypatch):
    out = tmp_path / "out"
    assert _invoke("map", str(DEMO), *SMALL, "--out", str(out)).exit_code == 0
    monkeypatch.setattr("lossbudget.commands.mapping.LONG_TABLE_POINTS", 5)
    result = _invoke("map", str(DEMO), "--vin", "24:24:1", "--load-pct", "10:100:6",
                     "--out", str(out))
    assert result.exit_code == 0, result.output
    names = {p.name for p in out.iterdir()}
    assert "losses.csv" not in names and "efficiency_map.png" not in names
    assert len(pd.read_csv(out / "points.csv")) == 6


# --------------------------------------------------------------------------------------------
# item 6: atomic sets, I/O errors naming the path, exit statuses
# --------------------------------------------------------------------------------------------


def test_full_disk_names_the_path_and_leaves_the_previous_set(tmp_path, monkeypatch):
    out = tmp_path / "out"
    first = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert first.exit_code == 0, first.output
    before = _digest(out)
    real = pd.DataFrame.to_csv

    def full_disk(self, path_or_buf=None, *args, **kwargs):
        if "component" in self.columns:  # the loss table, after the plots and points.csv
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, path_or_buf, *args, **kwargs)

    monkeypatch.setattr(pd.DataFrame, "to_csv", full_disk)
    result = _invoke("map", str(DEMO), "--vin", "20:30:2", "--load-pct", "50:100:2",
                     "--out", str(out))
    assert result.exit_code == 2, result.output
    assert result.stderr.strip() == (f"lossbudget: {out / 'losses.csv'}: cannot write: "
                                     "No space left on device")
    assert _digest(out) == before  # the previous set, byte for byte; no staging folder


def test_a_failed_rename_puts_the_previous_set_back(tmp_path, monkeypatch):
    target = tmp_path / "b.csv"
    assert _invoke("export", str(DEMO), "-o", str(target), *SMALL).exit_code == 0
    before = _digest(tmp_path)
    real = os.replace
    calls = []

    def failing(src, dst, *args, **kwargs):
        calls.append(Path(dst).name)
        if Path(dst).name == "b-stresses.csv":  # the third of the set, after two moved in
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(src))
        return real(src, dst, *args, **kwargs)

    monkeypatch.setattr(files_module.os, "replace", failing)
    result = _invoke("export", str(DEMO), "-o", str(target), "--vin", "20:30:2",
                     "--load-pct", "50:100:2")
    assert result.exit_code == 2, result.output
    assert f"{tmp_path / 'b-stresses.csv'}: cannot write: Permission denied" in result.stderr
    assert {"b.csv", "b-losses.csv", "b-stresses.csv"} <= set(calls)
    assert _digest(tmp_path) == before


def test_two_concurrent_exports_never_mix_their_files(tmp_path, monkeypatch):
    from lossbudget.output.workbook import write_tables

    design = lossbudget.load_design(DEMO)
    budgets = {n: lossbudget.sweep(design, vin=np.linspace(18, 32, n), load=[2.0, 4.0])
               for n in (2, 3)}
    real = os.replace
    first_moved, second_done = threading.Event(), threading.Event()

    def staged(src, dst, *args, **kwargs):
        # run "a" stops after moving its first file in and waits (up to 2 s) for run "b" to
        # write its whole set: without the folder lock "b" would slip in between
        out = real(src, dst, *args, **kwargs)
        if threading.current_thread().name == "a" and Path(dst).name == "b.csv":
            first_moved.set()
            second_done.wait(timeout=2.0)
        return out

    monkeypatch.setattr(files_module.os, "replace", staged)
    target = tmp_path / "b.csv"
    errors = []

    def export(n, wait):
        try:
            if wait:
                first_moved.wait(timeout=10.0)
            write_tables(target, budget=budgets[n])
            if wait:
                second_done.set()
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=export, args=(2, False), name="a"),
               threading.Thread(target=export, args=(3, True), name="b")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    points = pd.read_csv(target)
    losses = pd.read_csv(tmp_path / "b-losses.csv")
    stresses = pd.read_csv(tmp_path / "b-stresses.csv")
    assert len(points) == 6  # run "b" (3 × 2 points) came last, whole
    assert losses["point_id"].max() + 1 == 6 and stresses["point_id"].max() + 1 == 6
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b-losses.csv", "b-stresses.csv",
                                                          "b.csv"]


def test_two_export_processes_at_once_leave_one_whole_set(tmp_path):
    target = tmp_path / "b.csv"
    cmd = [sys.executable, "-m", "lossbudget", "export", str(DEMO), "-o", str(target),
           "--load-pct", "10:100:30"]
    procs = [subprocess.Popen([*cmd, "--vin", f"18:32:{n}"], stdout=subprocess.DEVNULL,
                              stderr=subprocess.PIPE) for n in (20, 30)]
    for p in procs:
        _, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    n = len(pd.read_csv(target))
    assert n in (600, 900)
    assert pd.read_csv(tmp_path / "b-losses.csv")["point_id"].max() + 1 == n
    assert pd.read_csv(tmp_path / "b-stresses.csv")["point_id"].max() + 1 == n
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def _start_map(out: Path) -> subprocess.Popen:
    # 200 × 150 points: long enough (several seconds) to be interrupted part-way
    return subprocess.Popen(
        [sys.executable, "-m", "lossbudget", "map", str(DEMO), "--vin", "18:32:200",
         "--load-pct", "5:100:150", "--out", str(out)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.mark.parametrize("phase", ["solving", "writing"])
@pytest.mark.parametrize(("signum", "status"), [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_an_interrupt_exits_128_plus_the_signal_and_leaves_no_part_files(tmp_path, signum,
                                                                         status, phase):
    out = tmp_path / "out"
    first = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert first.exit_code == 0
    before = _digest(out)
    proc = _start_map(out)
    deadline = time.monotonic() + 120
    # solving: the run has made its staging folder; writing: a file has appeared in it
    pattern = ".lossbudget-*.part" if phase == "solving" else ".lossbudget-*.part/*"
    while not list(out.glob(pattern)):
        assert proc.poll() is None and time.monotonic() < deadline
        time.sleep(0.01)
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == status, err
    assert err.strip().splitlines()[-1] == (
        f"lossbudget: interrupted by {signal.Signals(signum).name}; no partial file is left")
    assert "Traceback" not in err and "Exception ignored" not in err
    assert _digest(out) == before  # no .part file, no staging folder, the old set intact


def test_map_with_every_point_flagged_exits_4_and_still_writes_the_reasons(tmp_path):
    out = tmp_path / "out"
    # a boost cannot step 50-60 V down to 48 V (common practice: a boost needs vout > vin)
    result = _invoke("map", str(DEMO), "--vin", "50:60:3", "--load-pct", "10:100:4",
                     "--out", str(out))
    assert result.exit_code == 4, result.output
    assert "no point could be solved: all 12 flagged" in result.stderr
    points = pd.read_csv(out / "points.csv")
    assert points["reason"].str.contains("below its input").all()


def test_export_with_every_point_flagged_exits_4(tmp_path):
    result = _invoke("export", str(DEMO), "-o", str(tmp_path / "b.json"), "--vin", "50:60:2",
                     "--load-pct", "50:100:2")
    assert result.exit_code == 4, result.output
    assert (tmp_path / "b.json").exists()


def test_export_with_some_points_flagged_exits_0(tmp_path):
    result = _invoke("export", str(DEMO), "-o", str(tmp_path / "b.csv"), "--vin", "40:60:2",
                     "--load-pct", "50:100:2")
    assert result.exit_code == 0, result.output


def test_debug_keeps_the_internal_error_status(tmp_path, monkeypatch):
    def broken(path):
        raise RuntimeError("boom")

    monkeypatch.setattr("lossbudget.commands.point.read_design", broken)
    result = _invoke("--debug", "point", str(DEMO))
    assert result.exit_code == 3
    assert "Traceback" in result.stderr and "RuntimeError: boom" in result.stderr


def test_an_unwritable_output_folder_is_named(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder", encoding="utf-8")
    result = _invoke("map", str(DEMO), *SMALL, "--out", str(blocker / "out"))
    assert result.exit_code == 2
    assert str(blocker / "out") in result.stderr
    assert result.stderr.strip().count("\n") == 0


def test_full_disk_while_saving_the_workbook_names_it(tmp_path, monkeypatch):
    import openpyxl.workbook.workbook as wbmod

    def full_disk(self, filename):
        with open(filename, "wb") as handle:
            handle.write(b"PK")  # part of a file, as a full disk would leave it
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(wbmod.Workbook, "save", full_disk)
    target = tmp_path / "b.xlsx"
    result = _invoke("export", str(DEMO), "-o", str(target), *SMALL, "--no-limits")
    assert result.exit_code == 2, result.output
    assert result.stderr.strip() == f"lossbudget: {target}: cannot write: No space left on device"
    assert list(tmp_path.iterdir()) == []


def test_demo_that_fails_at_its_workbook_leaves_the_previous_folder(tmp_path, monkeypatch):
    import openpyxl.workbook.workbook as wbmod

    out = tmp_path / "demo"
    out.mkdir()
    (out / "points.csv").write_text("previous\n", encoding="utf-8")
    before = _digest(out)

    def full_disk(self, filename):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(wbmod.Workbook, "save", full_disk)
    result = _invoke("demo", "--out", str(out))
    assert result.exit_code == 2, result.output
    assert f"{out / 'budget.xlsx'}: cannot write: No space left on device" in result.stderr
    assert _digest(out) == before  # the plots and tables it had written were not moved in


def test_a_failed_map_into_a_new_folder_leaves_no_folder(tmp_path, monkeypatch):
    def full_disk(self, path_or_buf=None, *args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(pd.DataFrame, "to_csv", full_disk)
    out = tmp_path / "new" / "out"
    result = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert result.exit_code == 2, result.output
    assert f"{out / 'points.csv'}: cannot write: No space left on device" in result.stderr
    assert list(tmp_path.iterdir()) == []  # the folders it made are gone again


@pytest.mark.parametrize("command", sorted(main.commands))
def test_every_command_help_lists_the_exit_statuses(command):
    from lossbudget.commands.common import EXIT_STATUSES

    result = _invoke(command, "-h")
    assert result.exit_code == 0
    text = " ".join(result.stdout.split())
    for code, meaning in EXIT_STATUSES:
        assert f"{code} {' '.join(meaning.split()[:3])}" in text


def test_running_out_of_memory_is_one_line_exit_2_and_writes_nothing(tmp_path, monkeypatch):
    def exhausted(*_args, **_kwargs):
        raise MemoryError

    monkeypatch.setattr(sys.modules["lossbudget.sweep"], "sweep_rows", exhausted)
    out = tmp_path / "out"
    result = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert result.exit_code == 2
    assert result.stderr.strip().startswith("lossbudget: out of memory")
    assert result.stderr.strip().count("\n") == 0
    assert list(tmp_path.iterdir()) == []


def test_a_large_grid_within_the_budget_states_its_estimate_first(tmp_path, monkeypatch):
    monkeypatch.setattr("lossbudget.commands.sizing.ANNOUNCE_POINTS", 12)
    result = _invoke("export", str(DEMO), "-o", str(tmp_path / "b.csv"), *SMALL)
    assert result.exit_code == 0, result.output
    first = result.stderr.strip().splitlines()[0]
    assert first.startswith("3 × 4 = 12 points: estimated ") and "GB of memory" in first


def test_full_disk_at_the_third_plot_names_it_and_writes_nothing(tmp_path, monkeypatch):
    from matplotlib.figure import Figure

    real = Figure.savefig
    calls = []

    def full_disk(self, fname, *args, **kwargs):
        calls.append(fname)
        if len(calls) == 3:  # the loss breakdown, after the map and the curves
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(self, fname, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", full_disk)
    out = tmp_path / "out"
    result = _invoke("map", str(DEMO), *SMALL, "--out", str(out))
    assert result.exit_code == 2, result.output
    assert result.stderr.strip() == (f"lossbudget: {out / 'loss_breakdown.png'}: cannot "
                                     "write: No space left on device")
    assert list(tmp_path.iterdir()) == []  # not 2 of 4 plots: nothing
