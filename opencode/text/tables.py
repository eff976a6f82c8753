"""Aligned plain-text tables for the command line."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]], align: str | None = None) -> str:
    """Columns padded to their widest cell; align is one letter per column ('l' or 'r')."""
    align = align or "l" * len(headers)
    cells = [[str(h) for h in headers]] + [[str(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = []
    for n, row in enumerate(cells):
        parts = [c.rjust(w) if a == "r" else c.ljust(w) for c, w, a in zip(row, widths, align)]
        lines.append("  ".join(parts).rstrip())
        if n == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)
