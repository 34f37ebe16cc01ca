"""The tables of a budget written to disk chunk by chunk: CSV and JSON.

A large map's tables are never built whole: :func:`table_chunks` cuts the budget into blocks
of input-voltage rows and builds each block's table in turn (the point ids run on across the
blocks), and the writers here append block after block. CSV text fields that a spreadsheet
would read as a formula are neutralised as OWASP's CSV-injection guidance describes: a
leading apostrophe, inside a quoted field. Text fields are quoted, numbers are not, so
negative numbers stay numbers. This module sits at the output edge: pandas is imported
inside the functions.
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Iterable, Iterator
from dataclasses import fields, replace
from pathlib import Path
from typing import Any

import numpy as np

from lossbudget.budget import Budget, MechanismStatus

CHUNK_POINTS = 20_000
"""Operating points per block of a streamed table (the loss table has a row per mechanism)."""

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
"""First characters that make a spreadsheet read a text field as a formula (OWASP)."""

TABLES = ("point_table", "loss_table", "stress_table")


def neutralised(text: str) -> str:
    """``text`` with a leading apostrophe when a spreadsheet would read it as a formula."""
    return "'" + text if text.startswith(FORMULA_STARTS) else text


def budget_rows(budget: Budget, start: int, stop: int) -> Budget:
    """The budget over input-voltage rows ``start:stop`` (axis 0) of its grid."""
    n = budget.shape[0]
    ndim = len(budget.shape)

    def cut(value: Any) -> Any:
        if isinstance(value, np.ndarray) and value.ndim == ndim and value.shape[0] == n:
            return value[start:stop]
        if isinstance(value, MechanismStatus) and value.zero_reason is not None:
            return replace(value, zero_reason=cut(np.asarray(value.zero_reason)))
        return value

    out = {}
    for f in fields(Budget):
        value = getattr(budget, f.name)
        if isinstance(value, dict) and f.name not in ("provenance", "temperature_limits"):
            out[f.name] = {k: cut(v) for k, v in value.items()}
        else:
            out[f.name] = cut(value)
    return Budget(**out)


def table_chunks(budget: Budget, table: str, *, chunk_points: int = CHUNK_POINTS
                 ) -> Iterator[Any]:
    """The rows of one of the budget's tables, block by block (pandas DataFrames).

    ``table`` is ``point_table``, ``loss_table`` or ``stress_table``; joined, the blocks
    equal the table built whole.
    """
    if table not in TABLES:
        raise ValueError(f"expected one of {', '.join(TABLES)}, got {table!r}")
    shape = budget.shape
    per_row = int(np.prod(shape[1:])) if len(shape) > 1 else 1
    if len(shape) == 0:
        yield getattr(budget, table)()
        return
    rows = max(1, chunk_points // max(per_row, 1))
    for start in range(0, shape[0], rows):
        stop = min(start + rows, shape[0])
        part = budget_rows(budget, start, stop) if (start, stop) != (0, shape[0]) else budget
        frame = getattr(part, table)()
        if start:
            frame["point_id"] += start * per_row
        yield frame


def _text_columns(frame) -> list[str]:
    from pandas.api.types import is_bool_dtype, is_numeric_dtype

    return [c for c in frame.columns
            if not (is_numeric_dtype(frame[c].dtype) or is_bool_dtype(frame[c].dtype))]


def write_csv(path: Path, chunks: Iterable[Any]) -> Path:
    """Write table blocks to one CSV file: a header, then each block's rows.

    Text fields are quoted and neutralised (:func:`neutralised`); numbers are written bare
    with full precision; NaN is an empty field.
    """
    with open(path, "w", encoding="utf-8", newline="") as handle:
        first = True
        for frame in chunks:
            text = _text_columns(frame)
            out = frame.copy() if text else frame
            for column in text:
                out[column] = [neutralised("" if v is None else str(v)) for v in out[column]]
            out.columns = [neutralised(str(c)) for c in out.columns]
            out.to_csv(handle, index=False, header=first, na_rep="",
                       quoting=csv.QUOTE_NONNUMERIC, lineterminator="\n")
            first = False
    return path


def write_json(path: Path, *, head: dict[str, Any], tables: dict[str, Iterable[Any] | None]
               ) -> Path:
    """Write one JSON document: ``head``'s items, then each table as a list of records.

    A table given as None is written as null. Records are written block by block; NaN is
    null.
    """
    with open(path, "w", encoding="utf-8") as handle:
        handle.write("{\n")
        items = [f" {json.dumps(k)}: {json.dumps(v, allow_nan=False, default=_json_value)}"
                 for k, v in head.items()]
        handle.write(",\n".join(items))
        for name, chunks in tables.items():
            handle.write(f",\n {json.dumps(name)}: ")
            if chunks is None:
                handle.write("null")
                continue
            handle.write("[")
            sep = "\n  "
            for frame in chunks:
                columns = [str(c) for c in frame.columns]
                for row in frame.itertuples(index=False, name=None):
                    record = {c: plain(v) for c, v in zip(columns, row, strict=True)}
                    handle.write(sep + json.dumps(record, allow_nan=False))
                    sep = ",\n  "
            handle.write("\n ]" if sep != "\n  " else "]")
        handle.write("\n}\n")
    return path


def _json_value(value: Any) -> Any:
    out = plain(value)
    if out is value:
        raise TypeError(f"cannot write {type(value).__name__} to JSON")
    return out


def plain(value: Any) -> Any:
    """A table value as a plain Python value for a file: NaN and None as None."""
    if value is None:
        return None
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.ndarray):
        return [plain(v) for v in value.tolist()]
    if isinstance(value, tuple | list):
        return [plain(v) for v in value]
    return value
