"""Aligned plain-text tables for the terminal (no third-party imports)."""

from __future__ import annotations

from collections.abc import Sequence


def aligned_table(header: Sequence[str], rows: Sequence[Sequence[object]], *,
                  right: Sequence[bool] | None = None, indent: str = "") -> str:
    """Render rows as an aligned text table with a header and a rule.

    ``right`` says per column whether to right-align (numbers); by default a column is
    right-aligned when every cell in it is a number.
    """
    cells = [[str(c) for c in row] for row in rows]
    ncol = len(header)
    if right is None:
        right = [all(isinstance(row[k], int | float) for row in rows) if rows else False
                 for k in range(ncol)]
    widths = [max([len(header[k])] + [len(r[k]) for r in cells]) for k in range(ncol)]

    def line(items: Sequence[str]) -> str:
        parts = [item.rjust(widths[k]) if right[k] else item.ljust(widths[k])
                 for k, item in enumerate(items)]
        return (indent + "  ".join(parts)).rstrip()

    out = [line(list(header)), indent + "  ".join("-" * w for w in widths)]
    out.extend(line(r) for r in cells)
    return "\n".join(out)
