"""Plain aligned text tables for the coding commands (numbers right-aligned, text left-aligned)."""

from __future__ import annotations

from typing import Any, Sequence

from opencode.coding.frames import Frame


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.3f}"
    return str(value)


def text_table(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """An aligned table: a header, a rule, then one line per row."""
    cells = [[_cell(v) for v in row] for row in rows]
    numeric = [all(isinstance(row[i], (int, float)) or row[i] is None for row in rows) if rows else False
               for i in range(len(headers))]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]

    def line(values: Sequence[str]) -> str:
        return "  ".join(v.rjust(w) if numeric[i] else v.ljust(w) for i, (v, w) in enumerate(zip(values, widths))).rstrip()

    return "\n".join([line(list(headers)), line(["-" * w for w in widths])] + [line(r) for r in cells])


def format_frame(frame: Frame, counts: dict[int, int] | None = None) -> str:
    """A frame as a table: number, label (indented under its net), kind, hotkey, special, state, count."""
    depth: dict[int, int] = {}
    by_number = frame.by_number()

    def level(number: int) -> int:
        if number not in depth:
            parent = by_number[number].net
            depth[number] = 0 if parent is None or parent not in by_number else level(parent) + 1
        return depth[number]

    ordered: list = []

    def walk(parent: int | None) -> None:
        for code in sorted((c for c in frame.codes if c.net == parent), key=lambda c: c.number):
            ordered.append(code)
            if code.is_net:
                walk(code.number)

    walk(None)
    rows = []
    for c in ordered:
        count = None if counts is None else (counts.get(c.number, 0) if not c.is_net else None)
        rows.append([c.number, "  " * level(c.number) + c.label, c.kind, c.hotkey or "", c.special or "",
                     "active" if c.active else "retired", "yes" if c.rule else "", count])
    headers = ["code", "label", "kind", "key", "special", "state", "rule", "count"]
    if counts is None:
        headers, rows = headers[:-1], [r[:-1] for r in rows]
    return text_table(headers, rows)
