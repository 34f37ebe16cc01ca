"""The loss budget as a spreadsheet (.xlsx) and as plain tables (.csv, .json) for scripts.

:func:`write_workbook` writes one workbook for a design review: a summary (design, provenance,
key figures, weighted efficiencies, limit rows, cautions), the loss table, the efficiency map
with a colour scale, native charts, temperatures with limits and margins, the stress and point
tables, and the resolved inputs. :func:`write_tables` writes the same three tables of SPEC §7
as CSV files or one JSON document. Every writer is atomic: it writes a temporary file in the
target folder and renames it over the target, so a failed export leaves no partial file and
never damages a previous file at the path. This module sits at the output edge: pandas and
openpyxl are imported inside the functions.
"""

from __future__ import annotations

import contextlib
import errno
import math
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from lossbudget.budget import AXIS_COLUMNS, Budget
from lossbudget.cautions import CAUTIONS
from lossbudget.output.files import atomic_paths, output_set
from lossbudget.output.tablefiles import plain as _plain
from lossbudget.output.tablefiles import table_chunks, write_csv, write_json

WORKBOOK_SUFFIXES = (".xlsx",)
TABLE_SUFFIXES = (".csv", ".json")

SHEETS = ("Summary", "Losses", "Map", "Charts", "Thermal", "Stresses", "Points", "Inputs")
"""Sheet names of the workbook, in order."""

MAX_SHEET_ROWS = 1_048_576
MAX_SHEET_COLUMNS = 16_384
MAX_CHART_SERIES = 8

# Okabe & Ito, "Color Universal Design", 2008: a palette told apart under the common forms
# of colour-vision deficiency.
SERIES_COLOURS = ("0072B2", "E69F00", "009E73", "CC79A7", "56B4E9", "D55E00", "F0E442",
                  "000000")
# Colour scale of the map: amber (low efficiency) through near-white to blue (high).
SCALE_LOW, SCALE_MID, SCALE_HIGH = "E8A33D", "F7F4EA", "4C8FC4"
HEADER_FILL = "E4EAF1"
AXIS_UNITS = {"vin": "V", "vout": "V", "load": "A", "ambient": "degC", "fsw": "Hz"}


# --------------------------------------------------------------------------------------------
# targets and atomic writing
# --------------------------------------------------------------------------------------------


def check_target(path: str | os.PathLike, *, suffixes: Sequence[str]) -> Path:
    """Check that a file can be written at ``path`` before any work is done.

    Parameters
    ----------
    path : path-like
        The file to write.
    suffixes : sequence of str
        Accepted suffixes (".xlsx", ...), compared without regard to case.

    Returns
    -------
    Path
        The target path.

    Raises
    ------
    ValueError
        When the suffix is not one of ``suffixes``.
    OSError
        When the folder does not exist, is not writable, or the path is a folder.
    """
    target = Path(path)
    if target.suffix.lower() not in suffixes:
        raise ValueError(
            f"{target}: expected a file name ending in {' or '.join(suffixes)}, "
            f"got {target.suffix or 'no suffix'!r}"
        )
    folder = target.parent
    if not folder.is_dir():
        raise FileNotFoundError(
            errno.ENOENT, f"cannot write: the folder {folder} does not exist", str(target)
        )
    if target.is_dir():
        raise IsADirectoryError(errno.EISDIR, "cannot write: this is a folder", str(target))
    if not os.access(folder, os.W_OK | os.X_OK):
        raise PermissionError(
            errno.EACCES, f"cannot write: the folder {folder} is not writable", str(target)
        )
    return target


# --------------------------------------------------------------------------------------------
# plain tables: CSV and JSON
# --------------------------------------------------------------------------------------------


def write_tables(path: str | os.PathLike, *, budget: Budget,
                 long_table: bool = True) -> tuple[Path, ...]:
    """Write the point, loss and stress tables as CSV files or as one JSON document.

    Parameters
    ----------
    path : path-like
        ``<stem>.csv``: the point table there, the loss and stress tables beside it as
        ``<stem>-losses.csv`` and ``<stem>-stresses.csv`` (empty fields where a number is
        NaN; text fields quoted, and those a spreadsheet would read as a formula given a
        leading apostrophe). ``<stem>.json``: one document with ``provenance``,
        ``cautions``, ``point_table``, ``loss_table`` and ``stress_table`` (each table a
        list of records; NaN as null).
    budget : Budget
        The budget to write.
    long_table : bool
        Write the loss table (a row per point and mechanism); when false the CSV set has no
        ``<stem>-losses.csv`` and the JSON document's ``loss_table`` is null.

    Returns
    -------
    tuple of Path
        The files written.

    Raises
    ------
    ValueError
        When the suffix is neither .csv nor .json.
    OSError
        When the target cannot be written, naming the path; the set is written whole or not
        at all (the tables are streamed block by block into a staging folder and moved in
        together), and previous files are left as they were on a failure.
    """
    target = check_target(path, suffixes=TABLE_SUFFIXES)
    names = ("point_table", "loss_table", "stress_table")
    wanted = [n for n in names if long_table or n != "loss_table"]
    with output_set(target.parent) as files:
        if target.suffix.lower() == ".csv":
            suffixes = {"point_table": "", "loss_table": "-losses", "stress_table": "-stresses"}
            written = []
            for name in names:
                member = f"{target.stem}{suffixes[name]}{target.suffix}"
                if name not in wanted:
                    files.drop(member)  # no loss table of an earlier run beside this set
                    continue
                staged = files.stage(member)
                written.append(files.final(write_csv(staged, table_chunks(budget, name))))
            return tuple(written)
        head = {"provenance": budget.provenance, "cautions": list(CAUTIONS)}
        staged = files.stage(target.name)
        write_json(staged, head=head, tables={
            n: table_chunks(budget, n) if n in wanted else None for n in names})
    return (target,)


# --------------------------------------------------------------------------------------------
# the workbook
# --------------------------------------------------------------------------------------------


def write_workbook(path: str | os.PathLike, *, budget: Budget, report: Any = None,
                   weighted: Sequence[Any] | None = None, design: Any = None) -> Path:
    """Write the loss budget as a workbook for a design review.

    Parameters
    ----------
    path : path-like
        The .xlsx file to write (atomically: a previous file there is replaced only when the
        new one is complete).
    budget : Budget
        A budget, typically from :func:`lossbudget.sweep` over input voltage and load.
    report : LimitReport, optional
        A limit check (:func:`lossbudget.check_limits`); the summary lists its rows, worst
        corners and statuses.
    weighted : sequence of WeightedFigure, optional
        Weighted efficiencies (:func:`lossbudget.sweep.weighted_efficiency`) for the summary.
    design : Design, optional
        The design the budget was solved for: the inputs sheet lists every resolved
        parameter, the summary the nominal point and the charts the nominal input voltage's
        loss breakdown (both solved at exactly the nominal input voltage), and the thermal
        sheet the design limits after derating and the thermal network. Without it the
        inputs sheet holds the defaults the provenance names.

    Returns
    -------
    Path
        The workbook written.

    Raises
    ------
    ValueError
        When the suffix is not .xlsx.
    OSError
        When the target cannot be written; nothing is left half-written.

    Notes
    -----
    Sheets: ``Summary``, ``Losses`` (the loss table, auto-filter), ``Map`` (efficiency and
    total loss over input voltage down and load across, colour scales), ``Charts`` (efficiency
    versus load at the design's min, nominal and max input voltage, solved exactly (the map's
    rows without a design); loss by component at one input voltage, stacked), ``Thermal``
    (every node's temperature per point, its design limit after derating and its rated
    maximum with both margins; the thermal network beside), ``Stresses`` (with the operating
    axes), ``Points`` and ``Inputs``. Numbers keep full precision (the map's axis labels: 4
    significant digits, as the tables print them); number formats only set what is shown.
    Flagged points are blank cells with their reason in the ``reason`` column.
    """
    from openpyxl import Workbook

    target = check_target(path, suffixes=WORKBOOK_SUFFIXES)
    view = _View(budget, design)
    wb = Workbook(write_only=True)
    wb.creator = str(budget.provenance.get("tool", "lossbudget"))
    sheets = {name: _new_sheet(wb, name) for name in SHEETS}
    _summary_sheet(sheets["Summary"], view, report=report, weighted=weighted)
    _table_sheet(sheets["Losses"], _with_reason(view.losses, view), what="loss table")
    grid = _map_sheet(sheets["Map"], view)
    _charts_sheet(sheets["Charts"], view, map_ws=sheets["Map"], grid=grid)
    _table_sheet(sheets["Thermal"], _thermal_frame(view), what="thermal table",
                 beside=_network_rows(view))
    _table_sheet(sheets["Stresses"], _with_axes(_with_reason(view.stresses, view), view),
                 what="stress table")
    _table_sheet(sheets["Points"], view.points, what="point table")
    _inputs_sheet(sheets["Inputs"], view)
    try:
        with atomic_paths([target]) as temps:
            wb.save(temps[0])
    finally:
        _discard_unsaved(wb)
    return target


def _discard_unsaved(wb) -> None:
    """After a failed save, end the write-only sheets' row streams and remove their buffers.

    openpyxl buffers each write-only sheet in a temporary file of its own and removes it when
    the sheet is saved (or at exit); this removes the buffers of sheets a failure left open,
    so none outlives the export. It reaches into openpyxl's write-only sheet (``_rows``,
    ``_writer``); should those change, the buffers are still removed at exit.
    """
    for ws in wb.worksheets:
        if getattr(ws, "closed", True):
            continue
        with contextlib.suppress(Exception):
            rows = getattr(ws, "_rows", None)
            if rows is not None:
                rows.close()
        writer = getattr(ws, "_writer", None)
        if writer is not None:
            with contextlib.suppress(Exception):
                writer.close()
            with contextlib.suppress(Exception):
                writer.cleanup()


class _View:
    """The tables and figures of one budget, computed once for every sheet."""

    def __init__(self, budget: Budget, design: Any):
        self.budget = budget
        self.design = design
        self.points = budget.point_table()
        self.losses = budget.loss_table()
        self.stresses = budget.stress_table()
        self.reason_by_point = self.points["reason"].to_numpy()
        self.vin = np.ravel(np.broadcast_to(budget.coords["vin"], budget.shape))
        self.load = np.ravel(np.broadcast_to(budget.coords["load"], budget.shape))
        self.efficiency = np.ravel(budget.efficiency)
        self.total_loss = np.ravel(budget.total_loss)
        pairs = self.points[["vin_v", "load_a"]]
        self.is_map = not pairs.duplicated().any()
        self.vins = np.unique(self.vin)
        self.loads = np.unique(self.load)
        self.nominal, self.exact_vins, self.exact_rows = self._nominal_solves()

    def _nominal_solves(self):
        """The nominal point and the design's input voltages' rows, solved exactly.

        The nominal point is the design's nominal input voltage at the rated load; the rows
        the minimum, nominal and maximum input voltage over the budget's loads (axis 0 input
        voltage, axis 1 load); all at the budget's ambient (the design's nominal where the
        budget spans several) and corner. None without a design.
        """
        if self.design is None:
            return None, None, None
        from lossbudget.solver import solve

        op = self.design.operating
        ambient = np.unique(np.ravel(self.budget.coords["ambient"]))
        amb = float(ambient[0]) if ambient.size == 1 else op.ambient.nom
        corner = self.budget.provenance.get("corner", "typ")
        point = solve(self.design, vin=op.vin.nom, load=op.iout_rated, ambient=amb,
                      corner=corner)
        vins = np.unique([op.vin.min, op.vin.nom, op.vin.max])
        rows = solve(self.design, vin=vins[:, np.newaxis], load=self.loads[np.newaxis, :],
                     ambient=amb, corner=corner)
        return point, vins, rows

    @property
    def chart_vin(self) -> float:
        """The input voltage of the loss-breakdown chart: the nominal, else the middle one."""
        if self.nominal is not None:
            return float(self.design.operating.vin.nom)
        return float(self.vins[(len(self.vins) - 1) // 2])


def _with_reason(frame, view: _View):
    """A table keyed by ``point_id`` with the point's reason appended (blank where none)."""
    out = frame.copy()
    out["reason"] = view.reason_by_point[out["point_id"].to_numpy()]
    return out


def _design_limits(view: _View) -> dict[str, float]:
    """Each part's temperature design limit after the design's derating [degC] (or none)."""
    if view.design is None:
        return {}
    from lossbudget.limits import temperature_design_limits

    return {p: v for p, (v, _) in temperature_design_limits(view.design).items()}


def _with_axes(frame, view: _View):
    """A table keyed by ``point_id`` with the point's operating axes after it."""
    axes = view.points[["point_id", *AXIS_COLUMNS.values()]]
    out = frame.merge(axes, on="point_id", how="left", sort=False)
    columns = ["point_id", *AXIS_COLUMNS.values()]
    return out[columns + [c for c in out.columns if c not in columns]]


def _network_rows(view: _View) -> list[list[Any]]:
    """The thermal network beside the thermal table: every path and link, and the node each
    part's loss heats with what it is mounted on."""
    if view.design is None:
        return [["thermal network: not known (the workbook was written without the design)"]]
    from lossbudget.solver import thermal_paths

    d = view.design
    rows: list[list[Any]] = [["thermal network (every path and link)"],
                             ["from_node", "to_node", "rth_k_per_w", "design key"]]
    for a, b, r, key in thermal_paths(d):
        rows.append([a, b, float(f"{r:.6g}"), key])
    rows.append([])
    rows.append(["where each part sits"])
    rows.append(["part", "node (its loss heats)", "mounted on", ""])
    parts = [("switch", d.switch.thermal), ("rectifier", d.rectifier.thermal),
             ("inductor", d.inductor.thermal), *((c.name, c.thermal) for c in d.capacitors)]
    for name, th in parts:
        rows.append([name, name, th.sink or "ambient (its own path)", ""])
    return rows


def _thermal_frame(view: _View):
    """Every node's temperature per point, against its design limit after derating (as the
    limit check uses) and its rated maximum, with both margins."""
    import pandas as pd

    budget = view.budget
    axes = view.points[["point_id", *AXIS_COLUMNS.values()]]
    derated = _design_limits(view)
    frames = []
    for node, temp in budget.temperatures.items():
        t = np.ravel(temp)
        limit = budget.temperature_limits.get(node, math.nan)
        design_limit = derated.get(node, math.nan)
        frame = axes.copy()
        frame["node"] = node
        frame["t_degc"] = t
        frame["t_design_limit_degc"] = design_limit
        frame["margin_design_k"] = design_limit - t
        frame["t_max_degc"] = limit
        frame["margin_k"] = limit - t
        frame["reason"] = view.reason_by_point
        frames.append(frame)
    out = pd.concat(frames, ignore_index=True)
    return out.sort_values(["point_id"], kind="stable").reset_index(drop=True)


# -- cells ------------------------------------------------------------------------------------


def _number_format(column: str) -> str | None:
    """Display format of a column, from its name (the unit suffix)."""
    if column in ("efficiency", "share"):
        return "0.00%"
    if column in ("duty", "d2"):
        return "0.0000"
    if column == "vout_pp_v":
        return "0.0000"
    if column.endswith(("_degc", "_k")):
        return "0.0"
    if column.endswith("_hz"):
        return "#,##0"
    if column.endswith(("_b_t", "_t")):
        return "0.0000"
    if column.endswith(("_w", "_v", "_a")):
        return "0.000"
    return None


class _Cells:
    """Cell factory of a write-only sheet: plain values, formats, header and section styles."""

    def __init__(self, ws):
        from openpyxl.cell import WriteOnlyCell
        from openpyxl.styles import Alignment, Font, PatternFill

        self.ws = ws
        self._cell = WriteOnlyCell
        self._bold = Font(bold=True)
        self._title = Font(bold=True, size=14)
        self._fill = PatternFill("solid", start_color=HEADER_FILL, end_color=HEADER_FILL)
        self._right = Alignment(horizontal="right")

    def value(self, value: Any, fmt: str | None = None):
        plain = _plain(value)
        if plain == "":
            plain = None
        if fmt is None or not isinstance(plain, int | float) or isinstance(plain, bool):
            return plain
        cell = self._cell(self.ws, value=plain)
        cell.number_format = fmt
        return cell

    def header(self, text: Any, *, right: bool = False, fmt: str | None = None):
        cell = self._cell(self.ws, value=_plain(text))
        if fmt is not None:
            cell.number_format = fmt
        cell.font = self._bold
        cell.fill = self._fill
        if right:
            cell.alignment = self._right
        return cell

    def section(self, text: str):
        cell = self._cell(self.ws, value=text)
        cell.font = self._bold
        return cell

    def title(self, text: str):
        cell = self._cell(self.ws, value=text)
        cell.font = self._title
        return cell


def _new_sheet(wb, name: str):
    """A write-only sheet that prints landscape, one page wide (set before any row).

    Every text value appended to the sheet is written as a string cell: openpyxl reads a
    str starting with "=" as a formula and one such as "#REF!" as an error, and names come
    from the design file. The workbook writes no formula of its own.
    """
    ws = wb.create_sheet(name)
    append = ws.append

    def append_text_as_text(row):
        append([_text_cell(ws, v) for v in row])

    ws.append = append_text_as_text
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    return ws


def _text_cell(ws, value: Any):
    """A value for a write-only row, any text in it bound as a string cell (never a formula)."""
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.cell.cell import Cell

    if isinstance(value, str):
        value = WriteOnlyCell(ws, value=value)
    if isinstance(value, Cell) and isinstance(value.value, str):
        value.data_type = "s"
    return value


def _freeze(ws, cell: str) -> None:
    """Freeze the rows above and the columns left of ``cell``; repeat those rows in print."""
    ws.freeze_panes = cell
    row = int("".join(ch for ch in cell if ch.isdigit()))
    if row > 1:
        ws.print_title_rows = f"1:{row - 1}"


def _set_widths(ws, widths: Sequence[float]) -> None:
    from openpyxl.utils import get_column_letter

    for k, width in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(k)].width = width


def _is_number_column(series) -> bool:
    """True for a column of numbers (not text, not true/false)."""
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    return is_numeric_dtype(series.dtype) and not is_bool_dtype(series.dtype)


def _fit_widths(frame) -> list[float]:
    """Column widths that fit the header and the values (capped for long text)."""
    widths = []
    for column in frame.columns:
        series = frame[column]
        if not _is_number_column(series):
            longest = int(series.astype(str).str.len().max()) if len(series) else 0
        else:
            longest = 9
        widths.append(float(min(max(len(str(column)), longest) + 2, 60)))
    return widths


def _table_sheet(ws, frame, *, what: str, beside: list[list[Any]] | None = None) -> None:
    """A table with a bold header row, frozen, auto-filtered, columns formatted by unit.

    ``beside``: rows of a small second table written to the right of the first (one blank
    column between), from the header row down.
    """
    from openpyxl.utils import get_column_letter

    cells = _Cells(ws)
    if len(frame) + 1 > MAX_SHEET_ROWS:
        _set_widths(ws, [100])
        ws.append([cells.section(
            f"The {what} has {len(frame):,} rows, more than a sheet holds "
            f"({MAX_SHEET_ROWS - 1:,}); export it as .csv or .json, or use a smaller grid."
        )])
        return
    columns = [str(c) for c in frame.columns]
    formats = [_number_format(c) for c in columns]
    extra = [list(r) for r in (beside or [])]
    widths = _fit_widths(frame)
    if extra:
        spans = [max((len(str(r[k])) for r in extra if len(r) > k and r[k] is not None),
                     default=8) for k in range(max(len(r) for r in extra))]
        widths += [3.0] + [float(min(w + 2, 40)) for w in spans]
    _set_widths(ws, widths)
    _freeze(ws, "A2")
    numeric = [_is_number_column(frame[c]) for c in frame.columns]

    def side(k: int) -> list[Any]:
        if k >= len(extra) or not extra[k]:
            return []
        row = extra[k]
        if len(row) == 1:
            return [None, cells.section(row[0])]
        if k > 0 and len(extra[k - 1]) == 1:
            return [None, *(cells.header(v) for v in row)]
        return [None, *(cells.value(v) for v in row)]

    ws.append([cells.header(c, right=r) for c, r in zip(columns, numeric, strict=True)]
              + side(0))
    for k, row in enumerate(frame.itertuples(index=False, name=None), start=1):
        ws.append([cells.value(v, f) for v, f in zip(row, formats, strict=True)] + side(k))
    for k in range(len(frame) + 1, len(extra)):
        ws.append([None] * len(columns) + side(k))
    ws.auto_filter.ref = f"A1:{get_column_letter(len(columns))}{len(frame) + 1}"


# -- map --------------------------------------------------------------------------------------


def _shown(x: float) -> float:
    """An axis value as the tables print it (4 significant digits), not 16."""
    return float(f"{float(x):.4g}")


class _Grid:
    """Where the efficiency grid sits on the map sheet (rows and columns, 1-based)."""

    def __init__(self, vins: np.ndarray, loads: np.ndarray):
        self.vins = vins
        self.loads = loads
        self.header_row = 1
        self.first_row = 2
        self.last_row = 1 + len(vins)
        self.first_col = 2
        self.last_col = 1 + len(loads)


def _pivot(view: _View, values: np.ndarray) -> np.ndarray:
    """Values over the grid: rows the sorted input voltages, columns the sorted loads."""
    out = np.full((len(view.vins), len(view.loads)), np.nan)
    rows = np.searchsorted(view.vins, view.vin)
    cols = np.searchsorted(view.loads, view.load)
    out[rows, cols] = values
    return out


def _map_sheet(ws, view: _View) -> _Grid | None:
    """Efficiency and total loss over input voltage (down) and load (across)."""
    from openpyxl.formatting.rule import ColorScaleRule
    from openpyxl.utils import get_column_letter

    cells = _Cells(ws)
    if not view.is_map or len(view.loads) + 1 > MAX_SHEET_COLUMNS:
        _set_widths(ws, [100])
        reason = ("the budget repeats input-voltage and load pairs (it varies over further "
                  "axes)" if not view.is_map else "there are more loads than a sheet has columns")
        ws.append([cells.section(f"No map: {reason}. The Points sheet holds every point.")])
        return None
    grid = _Grid(view.vins, view.loads)
    _set_widths(ws, [22] + [10] * len(view.loads))
    _freeze(ws, "B2")
    blocks = (
        ("efficiency", "efficiency: vin_v \\ load_a", _pivot(view, view.efficiency)),
        ("loss_w", "loss_w: vin_v \\ load_a", _pivot(view, view.total_loss)),
    )
    row = 1
    for column, label, values in blocks:
        fmt = _number_format(column)
        ws.append([cells.header(label),
                   *(cells.header(_shown(x), right=True) for x in view.loads)])
        for vin, line in zip(view.vins, values, strict=True):
            ws.append([cells.value(_shown(vin)), *(cells.value(v, fmt) for v in line)])
        ref = (f"B{row + 1}:{get_column_letter(grid.last_col)}{row + len(view.vins)}")
        low, high = (SCALE_LOW, SCALE_HIGH) if column == "efficiency" else (SCALE_HIGH, SCALE_LOW)
        ws.conditional_formatting.add(ref, ColorScaleRule(
            start_type="min", start_color=low, mid_type="percentile", mid_value=50,
            mid_color=SCALE_MID, end_type="max", end_color=high))
        ws.append([])
        row += len(view.vins) + 2
    flagged = int(np.count_nonzero(view.budget.flagged))
    ws.append([cells.value(
        "Blank cells are flagged points; the Points sheet gives each one's reason."
        if flagged else "No point is flagged.")])
    return grid


# -- charts -----------------------------------------------------------------------------------


def _chart_rows(n: int, keep: int | None) -> list[int]:
    """At most MAX_CHART_SERIES row indices spread over n rows, first, last and keep included."""
    if n <= MAX_CHART_SERIES:
        return list(range(n))
    picks = set(np.round(np.linspace(0, n - 1, MAX_CHART_SERIES - 1)).astype(int).tolist())
    if keep is not None:
        picks.add(keep)
    return sorted(picks)


def _charts_sheet(ws, view: _View, *, map_ws, grid: _Grid | None) -> None:
    """Efficiency versus load per input voltage, and the loss breakdown at one input voltage."""
    from openpyxl.chart import BarChart, Reference, ScatterChart, Series

    cells = _Cells(ws)
    if grid is None:
        _set_widths(ws, [100])
        ws.append([cells.section("No charts: the budget is not a map over input voltage and "
                                 "load (see the Map sheet).")])
        return
    from lossbudget.units import format_quantity

    components = view.budget.components
    vin = view.chart_vin
    vin_text = format_quantity(vin, "voltage")
    exact = view.exact_rows
    if exact is not None:  # the nominal input voltage, solved exactly
        loads = np.asarray(view.loads, dtype=float)
        k_nom = int(np.flatnonzero(view.exact_vins == view.design.operating.vin.nom)[0])
        per = {c: np.reshape(exact.loss(c), exact.shape)[k_nom] for c in components}
    else:
        at = np.flatnonzero(view.vin == vin)
        at = at[np.argsort(view.load[at], kind="stable")]
        loads = view.load[at]
        per = {c: np.ravel(view.budget.loss(c))[at] for c in components}
    columns = ["load_a", *(f"{c}_w" for c in components)]
    _set_widths(ws, [max(len(c) + 2, 10) for c in columns])
    _freeze(ws, "A3")
    ws.append([cells.section(f"Loss by component at vin = {vin_text} (W)")])
    ws.append([cells.header(c) for c in columns])
    for k in range(loads.size):
        ws.append([cells.value(float(loads[k]), "0.000"),
                   *(cells.value(float(per[c][k]), "0.000") for c in components)])
    eff_first = 3 + loads.size + 3  # the efficiency table: after a blank, a title, a header
    if exact is not None:
        ws.append([])
        ws.append([cells.section("Efficiency at the design's input voltages (solved exactly)")])
        ws.append([cells.header("load_a"),
                   *(cells.header(f"efficiency at vin {format_quantity(v, 'voltage')}")
                     for v in view.exact_vins)])
        eff_exact = np.reshape(exact.efficiency, exact.shape)
        for k in range(loads.size):
            ws.append([cells.value(float(loads[k]), "0.000"),
                       *(cells.value(float(e), "0.00%") for e in eff_exact[:, k])])

    anchor_col = _column_letter(len(columns) + 2)
    eff = ScatterChart()
    eff.title = "Efficiency versus load"
    eff.style = 2
    eff.x_axis.title = "load (A)"
    eff.y_axis.title = "efficiency"
    eff.y_axis.number_format = "0%"
    eff.x_axis.number_format = "0.0"
    eff.x_axis.delete = False
    eff.y_axis.delete = False
    eff.height, eff.width = 9.5, 17.0
    if exact is not None:  # the exact rows of the table above
        last = eff_first + loads.size - 1
        x = Reference(ws, min_col=1, min_row=eff_first, max_row=last)
        refs = [(Reference(ws, min_col=2 + i, min_row=eff_first, max_row=last), v)
                for i, v in enumerate(view.exact_vins)]
        shown = np.reshape(exact.efficiency, exact.shape)
    else:  # the map's rows
        x = Reference(map_ws, min_col=grid.first_col, max_col=grid.last_col,
                      min_row=grid.header_row)
        rows = _chart_rows(len(view.vins), None)
        refs = [(Reference(map_ws, min_col=grid.first_col, max_col=grid.last_col,
                           min_row=grid.first_row + i), view.vins[i]) for i in rows]
        shown = _pivot(view, view.efficiency)[rows]
    eff.y_axis.scaling.min, eff.y_axis.scaling.max = _efficiency_span(shown)
    for n, (y, v) in enumerate(refs):
        series = Series(y, x, title=f"vin {format_quantity(v, 'voltage')}")
        colour = SERIES_COLOURS[n % len(SERIES_COLOURS)]
        series.graphicalProperties.line.solidFill = colour
        series.graphicalProperties.line.width = 22000
        series.marker.symbol = "circle"
        series.marker.size = 4
        series.marker.graphicalProperties.solidFill = colour
        series.marker.graphicalProperties.line.solidFill = colour
        series.smooth = False
        eff.series.append(series)
    ws.add_chart(eff, f"{anchor_col}1")

    bars = BarChart()
    bars.type = "col"
    bars.grouping = "stacked"
    bars.overlap = 100
    bars.gapWidth = 40
    bars.title = f"Loss by component at vin = {vin_text}"
    bars.x_axis.title = "load (A)"
    bars.y_axis.title = "loss (W)"
    bars.y_axis.number_format = "0.0"
    bars.x_axis.number_format = "0.00"
    bars.x_axis.delete = False
    bars.y_axis.delete = False
    bars.height, bars.width = 9.5, 17.0
    first, last = 3, 2 + loads.size
    categories = Reference(ws, min_col=1, min_row=first, max_row=last)
    for k, component in enumerate(components):
        values = Reference(ws, min_col=2 + k, min_row=first, max_row=last)
        series = Series(values, title=component)
        series.graphicalProperties.solidFill = SERIES_COLOURS[k % len(SERIES_COLOURS)]
        series.graphicalProperties.line.solidFill = SERIES_COLOURS[k % len(SERIES_COLOURS)]
        bars.series.append(series)
    bars.set_categories(categories)
    ws.add_chart(bars, f"{anchor_col}21")


def _efficiency_span(eff: np.ndarray) -> tuple[float, float]:
    """The efficiency chart's axis: the data's span, widened to whole percent (at most 100 %)."""
    finite = eff[np.isfinite(eff)]
    if not finite.size:
        return 0.0, 1.0
    lo = math.floor(float(finite.min()) * 100.0 - 0.5) / 100.0
    hi = min(1.0, math.ceil(float(finite.max()) * 100.0 + 0.2) / 100.0)
    return max(0.0, lo), hi


def _column_letter(k: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(k)


# -- summary ----------------------------------------------------------------------------------


def _span(values: np.ndarray) -> str:
    """A readable span of axis values: one value, or first to last and the count."""
    u = np.unique(np.ravel(values))
    if u.size == 1:
        return f"{u[0]:g}"
    return f"{u[0]:g} to {u[-1]:g} ({u.size} values)"


def _where_text(where: Any) -> str:
    """An operating point as text: "vin 18 V, load 4 A, ambient 55 degC"."""
    if isinstance(where, dict):
        parts = []
        for key, value in where.items():
            plain = _plain(value)
            unit = AXIS_UNITS.get(key, "")
            text = f"{plain:.4g}" if isinstance(plain, float) else str(plain)
            parts.append(f"{key} {text} {unit}".rstrip())
        return ", ".join(parts)
    return "" if where is None else str(where)


SUMMARY_WIDTHS = (30, 22, 8, 11, 12, 14, 10, 12, 11, 50, 60)
"""Column widths of the summary (A: labels; B to K: values, tables and wrapped text)."""
STATUS_FILLS = {"fail": "F2B8B5", "caution": "FBE3A6"}


class _Rows:
    """Rows of the summary, counted, so that wrapped text gets its merged span and height."""

    def __init__(self, ws):
        from openpyxl.styles import Alignment
        from openpyxl.utils import get_column_letter

        self.ws = ws
        self.cells = _Cells(ws)
        self.row = 0
        from openpyxl.styles import PatternFill

        self._wrap = Alignment(wrap_text=True, vertical="top")
        self._fills = {k: PatternFill("solid", start_color=v, end_color=v)
                       for k, v in STATUS_FILLS.items()}
        self._top = Alignment(vertical="top")
        self._last = get_column_letter(len(SUMMARY_WIDTHS))
        self._chars = sum(SUMMARY_WIDTHS[1:])

    def add(self, values: Sequence[Any]) -> None:
        self.ws.append(list(values))
        self.row += 1

    def blank(self) -> None:
        self.add([])

    def section(self, name: str, *headers: str) -> None:
        self.blank()
        self.add([self.cells.section(name)])
        if headers:
            self.add([self.cells.header(h) for h in headers])

    def text(self, label: str, text: str) -> None:
        """A label and a line of text across columns B to J, wrapped to fit."""
        from openpyxl.cell import WriteOnlyCell

        row = self.row + 1
        lines = max(1, math.ceil(len(text) * 1.1 / self._chars))
        if lines > 1:
            self.ws.row_dimensions[row].height = 15.0 * lines
        label_cell = WriteOnlyCell(self.ws, value=label)
        label_cell.alignment = self._top
        cell = WriteOnlyCell(self.ws, value=text)
        cell.alignment = self._wrap
        self.ws.merged_cells.add(f"B{row}:{self._last}{row}")
        self.add([label_cell, cell])

    def status(self, status: str):
        """A status cell, shaded when it is a caution or a failure."""
        from openpyxl.cell import WriteOnlyCell

        cell = WriteOnlyCell(self.ws, value=status)
        if status in self._fills:
            cell.fill = self._fills[status]
            cell.font = self.cells._bold
        return cell

    def wrapped_last(self, values: Sequence[Any], text: str) -> None:
        """A table row whose last cell (column K) holds text wrapped to its width."""
        from openpyxl.cell import WriteOnlyCell

        lines = max(1, math.ceil(len(text) * 1.1 / SUMMARY_WIDTHS[-1]))
        if lines > 1:
            self.ws.row_dimensions[self.row + 1].height = 15.0 * lines
        from openpyxl.cell.cell import Cell

        cells = []
        for value in values:
            cell = value if isinstance(value, Cell) else WriteOnlyCell(self.ws, value)
            cell.alignment = self._top
            cells.append(cell)
        cell = WriteOnlyCell(self.ws, value=text or None)
        cell.alignment = self._wrap
        self.add([*cells, cell])


def _limit_rows(out: _Rows, report: Any) -> None:
    """The limit check: its status, profile, corner and grid, then a row per part and limit."""
    c = out.cells
    out.add(["worst status", out.status(str(report.worst_status))])
    out.add(["derating", str(report.derating)])
    out.add(["corner", str(report.corner)])
    if getattr(report, "grid", ""):
        out.text("envelope", report.grid)
    out.add([c.header(h) for h in ("part", "quantity", "unit", "worst", "design_limit",
                                   "absolute_limit", "margin", "margin_unit", "status",
                                   "where (worst corner)", "basis and note")])
    for r in report.rows:
        unit = getattr(r, "margin_unit", "")
        margin_format = "0.0%" if unit == "fraction" else "0.0"
        basis = "; ".join(t for t in (r.basis, getattr(r, "note", "")) if t)
        out.wrapped_last([r.part, r.quantity, r.unit, c.value(r.worst, "0.000"),
                          c.value(r.design_limit, "0.000"), c.value(r.absolute_limit, "0.000"),
                          c.value(r.margin, margin_format), unit, out.status(str(r.status)),
                          _where_text(r.where)], basis)
    for part, what, key in getattr(report, "not_checked", ()) or ():
        out.add([part, what, None, None, None, None, None, None, "not checked", None,
                 f"not checked: {key} would enable it" if key else "not checked"])


def _summary_sheet(ws, view: _View, *, report: Any, weighted: Sequence[Any] | None) -> None:
    """Design, provenance, key figures, weighted efficiency, limits, not modelled, cautions."""
    from lossbudget.sweep import map_summary

    budget = view.budget
    prov = budget.provenance
    out = _Rows(ws)
    c = out.cells
    _set_widths(ws, SUMMARY_WIDTHS)
    _freeze(ws, "A2")
    pct, watt = "0.00%", "0.000"

    out.add([c.title(f"Loss budget: {prov.get('design', budget.design_name)}")])
    out.section("Cautions")
    cautions = list(CAUTIONS)
    for extra in getattr(report, "cautions", ()) or ():
        if extra not in cautions:
            cautions.append(extra)
    for text in cautions:
        out.text("caution", text)

    out.section("Design and provenance", "item", "value", "unit")
    rows: list[tuple[str, Any, str]] = [
        ("design", prov.get("design", budget.design_name), ""),
        ("topology", budget.topology, ""),
        ("source file", prov.get("source", ""), ""),
        ("checksum_sha256", prov.get("checksum_sha256", ""), ""),
        ("tool", prov.get("tool", ""), ""),
        ("corner", prov.get("corner", ""), ""),
        ("dcm_turn_on", prov.get("dcm_turn_on", ""), ""),
        ("ring_q (min, max over the DCM points)",
         ", ".join(f"{x:.4g}" for x in prov.get("ring_q", {}).get("q", [])) or "no DCM point", ""),
        ("R_ring (min, max over the DCM points)",
         ", ".join(f"{x:.4g}" for x in prov.get("ring_q", {}).get("r_ring_ohm", [])) or "",
         "ohm"),
        ("operating points", int(np.prod(budget.shape)), ""),
    ]
    for axis in AXIS_COLUMNS:
        rows.append((axis, _span(budget.coords[axis]), AXIS_UNITS[axis]))
    flagged = int(np.count_nonzero(budget.flagged))
    rows.append(("flagged points", flagged, ""))
    for name, value, unit in rows:
        out.add([name, c.value(value), unit])
    if flagged:
        reasons, counts = np.unique(np.ravel(budget.reason)[np.ravel(budget.flagged)],
                                    return_counts=True)
        for reason, count in zip(reasons.tolist(), counts.tolist(), strict=True):
            out.text("flagged because", f"{count} point(s): {reason}")

    out.section("Laws used")
    for law in prov.get("laws", ()):
        out.text("law", law)
    out.section("Defaults applied")
    for default in prov.get("defaults", ()) or ("none",):
        out.text("default", default)
    for key, label in (("warnings", "warning"), ("notes", "note")):
        if prov.get(key):
            out.section(key.capitalize())
            for text in prov[key]:
                out.text(label, text)

    out.section("Key figures", "figure", "value", "unit", "vin_v", "load_a")
    summary = map_summary(budget)
    out.add(["peak efficiency", c.value(summary.peak_efficiency, pct), "",
             c.value(_shown(summary.peak_vin)), c.value(_shown(summary.peak_load))])
    if view.nominal is not None:
        nom = view.nominal
        op = view.design.operating
        where = [c.value(_shown(op.vin.nom)), c.value(_shown(op.iout_rated))]
        out.add(["efficiency at the nominal point",
                 c.value(float(np.ravel(nom.efficiency)[0]), pct), "", *where])
        out.add(["total loss at the nominal point",
                 c.value(float(np.ravel(nom.total_loss)[0]), watt), "W", *where])
        reason = str(np.ravel(nom.reason)[0])
        if reason:
            out.text("nominal point flagged", reason)
        out.text("nominal point", "solved at exactly the nominal input voltage and the rated "
                 "load (at the map's ambient and part values), whatever the grid")
    else:
        out.text("nominal point", "not known: the workbook was written without the design")

    out.section("Weighted efficiency")
    if weighted:
        out.add([c.header(h) for h in ("figure", "efficiency", "vin_v", "reason")])
        sources: dict[str, str] = {}
        for fig in weighted:
            out.add([fig.name, c.value(fig.value, pct), c.value(fig.vin, "0.00"),
                     fig.reason or None])
            sources.setdefault(fig.name, fig.source)
        for name, source in sources.items():
            out.text(f"source of {name}", source)
    else:
        out.text("weighted efficiency", "not given")

    out.section("Limits")
    if report is not None:
        _limit_rows(out, report)
    else:
        out.text("limit check", "not run")

    out.section("Not modelled", "component", "mechanism", "enabled by")
    for component, mechanism, key in budget.not_modelled or [("none", "", "")]:
        out.add([component, mechanism, key or None])


# -- inputs -----------------------------------------------------------------------------------


def _inputs_sheet(ws, view: _View) -> None:
    """Every resolved parameter with its unit, then the defaults applied."""
    c = _Cells(ws)
    design = view.design
    resolved = design.resolved if design is not None else ()
    defaults = (design.defaults if design is not None else
                tuple(tuple(d.split(" = ", 1)) if " = " in d else (d, "")
                      for d in view.budget.provenance.get("defaults", ())))
    longest = max([len(k) for k, _ in (*resolved, *defaults)] + [20])
    _set_widths(ws, [min(longest + 2, 60), 44])
    _freeze(ws, "A2")
    ws.append([c.header("parameter"), c.header("value (with unit)")])
    if design is None:
        ws.append(["(resolved parameters)", "not listed: the workbook was written without the "
                   "design"])
    for key, value in resolved:
        ws.append([key, value])
    ws.append([])
    ws.append([c.header("default applied"), c.header("value (with unit)")])
    for key, value in defaults or (("none", ""),):
        ws.append([key, value or None])
