"""Turn a file's columns into study variables: infer each column's kind (the user can override) and convert."""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.ingest.readers import RawTable
from opencode.ingest.text_cells import NULL_MARKERS, as_text, clean_text

#: A numeric column with at most this many distinct values (or with value labels) is taken as single choice.
MAX_SINGLE_CODES = 12
#: A text column with at most this many distinct values (and few compared with its rows) is single choice.
MAX_TEXT_CATEGORIES = 30
_MULTI_CELL = re.compile(r"^\s*\d+(\s*[,;|]\s*\d+)*\s*$")
_MULTI_SPLIT = re.compile(r"\s*[,;|]\s*")
@dataclass
class ColumnPlan:
    """One variable to create: its kind, role, labels, missing codes and converted values."""

    name: str
    kind: str
    role: str
    label: str = ""
    value_labels: dict[float, str] = field(default_factory=dict)
    missing_codes: list[float] = field(default_factory=list)
    values: object = None  # np.ndarray (float) or list (text, dates, lists of codes)
    values_json: str | None = None  # verbatims as one JSON array, ready for a bulk insert


def _as_numbers(series: pd.Series) -> pd.Series | None:
    """The column as floats if every non-empty cell is a number, else None."""
    if pd.api.types.is_numeric_dtype(series):
        return series.astype(float)
    text = as_text(series).str.strip()
    blank = text.isin(NULL_MARKERS)
    numbers = pd.to_numeric(text.where(~blank, None), errors="coerce")
    if (numbers.isna() & ~blank).any():
        return None
    return numbers.astype(float)


def _is_multiple(text: pd.Series) -> bool:
    filled = text[~text.isin(NULL_MARKERS)]
    return len(filled) > 0 and filled.str.match(_MULTI_CELL).all() and filled.str.contains(r"[,;|]").any()


def _is_date(text: pd.Series) -> bool:
    filled = text[~text.isin(NULL_MARKERS)]
    if len(filled) == 0 or not filled.str.match(r"^\d{4}-\d{2}-\d{2}").all():
        return False
    return pd.to_datetime(filled, errors="coerce", format="ISO8601").notna().all()


def infer_kind(table: RawTable, name: str) -> str:
    """A column's kind: single, multiple, numeric, date or text."""
    series = table.frame[name]
    if name in table.value_labels and table.value_labels[name]:
        return "single"
    numbers = _as_numbers(series)
    if numbers is not None:
        distinct = numbers.dropna().unique()
        whole = bool(np.all(np.mod(distinct, 1) == 0)) if len(distinct) else True
        return "single" if whole and len(distinct) <= MAX_SINGLE_CODES else "numeric"
    text = as_text(series).str.strip()
    if _is_multiple(text):
        return "multiple"
    if _is_date(text):
        return "date"
    filled = text[~text.isin(NULL_MARKERS)]
    distinct = filled.nunique()
    if distinct <= MAX_TEXT_CATEGORIES and distinct <= max(2, len(filled) // 2):
        return "single"
    return "text"


def _bad_cell(table: RawTable, name: str, mask: pd.Series, what: str) -> OpenCodeError:
    first = int(np.flatnonzero(mask.to_numpy())[0])
    value = table.frame[name].iloc[first]
    value = value.item() if isinstance(value, np.generic) else value
    return OpenCodeError(f"{table.path}: {table.row_name(first)}, column {name}: {value!r} is not {what}")


def convert(table: RawTable, name: str, kind: str) -> ColumnPlan:
    """Convert one column to the given kind, keeping labels and missing codes; bad cells name the row."""
    series = table.frame[name]
    plan = ColumnPlan(name, kind, "other", table.variable_labels.get(name, ""),
                      dict(table.value_labels.get(name, {})), list(table.missing_codes.get(name, [])))
    if kind in ("single", "numeric"):
        numbers = _as_numbers(series)
        if numbers is None:
            if kind == "numeric":
                text = as_text(series).str.strip()
                bad = pd.to_numeric(text.where(~text.isin(NULL_MARKERS), None), errors="coerce").isna() \
                    & ~text.isin(NULL_MARKERS)
                raise _bad_cell(table, name, bad, "a number")
            text = as_text(series).str.strip()
            blank = text.isin(NULL_MARKERS)
            categories = sorted(text[~blank].unique())
            codes = {category: float(i + 1) for i, category in enumerate(categories)}
            plan.values = text.map(codes).astype(float).to_numpy()
            plan.value_labels = {code: category for category, code in codes.items()}
        else:
            plan.values = numbers.to_numpy(dtype=float)
    elif kind == "multiple":
        text = as_text(series).str.strip()
        blank = text.isin(NULL_MARKERS)
        if (blank | text.str.match(_MULTI_CELL)).all():
            plan.values = [[] if empty else _unique([float(c) for c in _MULTI_SPLIT.split(cell)])
                           for cell, empty in zip(text, blank)]
        else:
            plan.values, plan.value_labels = _label_lists(text, blank, plan.value_labels)
    elif kind == "date":
        text = as_text(series).str.strip()
        blank = text.isin(NULL_MARKERS)
        parsed = pd.to_datetime(text.where(~blank, None), errors="coerce", format="ISO8601")
        bad = parsed.isna() & ~blank
        if bad.any():
            raise _bad_cell(table, name, bad, "a date (YYYY-MM-DD)")
        plan.values = [None if pd.isna(d) else d.isoformat() for d in parsed]
    elif kind == "text":
        plan.values = clean_text(series).tolist()
    else:
        raise OpenCodeError(f"{table.path}: column {name}: unknown kind {kind!r}")
    return plan


def _unique(items: list) -> list:
    """Items in first-seen order, each once ("Theft, Theft" is one mention)."""
    return list(dict.fromkeys(items))


def _label_key(label: str) -> str:
    return " ".join(label.split()).casefold()


def _label_lists(text: pd.Series, blank: pd.Series, known: dict[float, str]) -> tuple[list[list[float]], dict[float, str]]:
    """Delimited labels ("Loss, Theft") as lists of codes with value labels built from them.

    A label already in `known` (from the file or a data map) keeps its code, a whole number stays that code, and
    new labels get the next free codes in alphabetical order. Labels match case- and space-insensitively; the
    most frequent spelling (the first seen of equals) becomes the value label.
    """
    cells = [[] if empty else [part for part in _MULTI_SPLIT.split(cell) if part] for cell, empty in zip(text, blank)]
    spellings: dict[str, dict[str, int]] = {}
    numbers: set[float] = set()
    for cell in cells:
        for part in cell:
            if part.isdigit():
                numbers.add(float(part))
                continue
            counts = spellings.setdefault(_label_key(part), {})
            counts[part] = counts.get(part, 0) + 1
    code_of = {_label_key(label): code for code, label in known.items()}
    labels = dict(known)
    next_code = max([0.0, *known, *numbers]) + 1
    for key in sorted(spellings, key=lambda k: (k not in code_of, k)):
        if key not in code_of:
            code_of[key] = next_code
            labels[next_code] = max(spellings[key].items(), key=lambda item: item[1])[0]  # ties: first seen
            next_code += 1
    def code(part: str) -> float:
        return float(part) if part.isdigit() else code_of[_label_key(part)]

    return [_unique([code(part) for part in cell]) for cell in cells], labels


def combine_dichotomies(table: RawTable, name: str, columns: list[str]) -> ColumnPlan:
    """A multiple-response variable from a set of 0/1 columns (code k = the k-th column)."""
    chosen = []
    value_labels = {}
    for code, column in enumerate(columns, start=1):
        numbers = _as_numbers(table.frame[column])
        if numbers is None or not numbers.dropna().isin([0.0, 1.0]).all():
            bad = ~(numbers.isin([0.0, 1.0]) | numbers.isna()) if numbers is not None else table.frame[column].notna()
            raise _bad_cell(table, column, bad, "0 or 1 (a multiple-response dichotomy)")
        chosen.append(numbers.fillna(0).to_numpy() == 1)
        value_labels[float(code)] = table.variable_labels.get(column) or column
    matrix = np.column_stack(chosen)
    values = [[float(c + 1) for c in np.flatnonzero(row)] for row in matrix]
    return ColumnPlan(name, "multiple", "banner", name, value_labels, [], values)
