"""Make text cells inert in CSV and spreadsheet exports (OWASP "CSV Injection").

A cell that starts with = + - @, a tab or a carriage return could run as a formula when a spreadsheet opens
the file; such a cell gets a leading single quote so it stays plain text.
"""

from __future__ import annotations

from typing import Any, Iterable

FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def guard_cell(value: Any) -> Any:
    """Return text starting with a formula trigger with a leading single quote; other values unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_TRIGGERS):
        return "'" + value
    return value


def guard_row(values: Iterable[Any]) -> list[Any]:
    """Guard every cell of one row."""
    return [guard_cell(value) for value in values]
