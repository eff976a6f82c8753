"""Aligned plain-text tables for the command line: the one table formatter every `format_*` function uses."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from opencode.files.terminal_text import one_line


def _cell_text(value: Any) -> str:
    """A cell as text: empty for None, three decimals for a float, str() otherwise; on one line with no
    control characters (a label cannot move the cursor or clear the screen)."""
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.3f}"
    return one_line(str(value))


def _auto_align(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """'r' for columns holding only numbers (or None), 'l' for the rest; all 'l' when there are no rows."""
    return "".join("r" if rows and all(isinstance(row[i], (int, float)) or row[i] is None for row in rows) else "l"
                   for i in range(len(headers)))


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]], align: str | None = None) -> str:
    """A header, a rule, then one line per row, columns padded to their widest cell and two spaces apart.

    `align` is one letter per column ('l' or 'r'); by default numeric columns are right-aligned, the rest left.
    """
    align = align or _auto_align(headers, rows)
    cells = [[one_line(str(h)) for h in headers]] + [[_cell_text(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]

    def line(values: Sequence[str]) -> str:
        return "  ".join(v.rjust(w) if a == "r" else v.ljust(w) for v, w, a in zip(values, widths, align)).rstrip()

    return "\n".join([line(cells[0]), line(["-" * w for w in widths])] + [line(r) for r in cells[1:]])
