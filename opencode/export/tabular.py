"""Coded data out as CSV (plus a sibling code-frame CSV) or as an XLSX workbook (data, frame, variables).

Every text cell passes the formula-injection guard; every file is written atomically.
"""

from __future__ import annotations

import csv
import os
from pathlib import Path

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.files.cell_guard import guard_cell
from opencode.export.dataset import CodedDataset, LabelledTable, VerbatimMode, build_table, sibling_path
from opencode.files.safe_write import atomic_open, atomic_path, private_tempdir
from opencode.files.targets import check_target, check_targets

XLSX_MAX_ROWS = 1_048_576
XLSX_MAX_CELL_CHARS = 32_767


def _whole_numbers_as_int(column: pd.Series) -> pd.Series:
    """Float columns holding only whole numbers (and NaN) print as 3, not 3.0."""
    if column.dtype.kind != "f":
        return column
    values = column.to_numpy()
    finite = values[~np.isnan(values)]
    if finite.size and not np.array_equal(finite, np.round(finite)):
        return column
    return column.astype("Int64")


def guarded_frame(df: pd.DataFrame) -> pd.DataFrame:
    """A copy whose text cells and column names are inert in spreadsheets and whose whole numbers print as such."""
    out = {}
    for name in df.columns:
        column = df[name]
        if column.dtype.kind in "OSUT" or pd.api.types.is_string_dtype(column):
            column = column.map(guard_cell, na_action="ignore")
        else:
            column = _whole_numbers_as_int(column)
        out[guard_cell(name)] = column
    return pd.DataFrame(out)


def variables_table(table: LabelledTable) -> pd.DataFrame:
    """One row per variable: name, label, value labels ("1=..; 2=..") and user-missing codes."""
    def fmt(pairs) -> str:
        return "; ".join(f"{_number_text(k)}={v}" for k, v in pairs)

    return pd.DataFrame({
        "variable": list(table.data.columns),
        "label": [table.column_labels.get(c, "") for c in table.data.columns],
        "value_labels": [fmt(table.value_labels.get(c, {}).items()) for c in table.data.columns],
        "missing_codes": [
            ", ".join(_number_text(m) for m in table.missing_codes.get(c, [])) for c in table.data.columns
        ],
    })


def _number_text(x) -> str:
    """3.0 -> "3", 2.5 -> "2.5"."""
    return str(int(x)) if float(x).is_integer() else str(x)


def write_csv_table(df: pd.DataFrame, path: str | os.PathLike) -> None:
    """Write one table as guarded CSV through a temporary file and an atomic rename."""
    with atomic_open(path, "w", newline="") as handle:
        guarded_frame(df).to_csv(handle, index=False, quoting=csv.QUOTE_MINIMAL, lineterminator="\r\n")


def checked_table(dataset: CodedDataset, path: str | os.PathLike, *, mention_columns: bool,
                  verbatims: VerbatimMode, frame_csv: bool = True) -> tuple[Path, LabelledTable]:
    """The target path and the table to write, checking first that the target (and the frame CSV beside it)
    can be written, so a bad path fails before any work and before any file is written."""
    outputs = [(path, None)] + ([(sibling_path(path), path)] if frame_csv else [])
    target = check_targets(outputs)[0]
    return target, build_table(dataset, mention_columns=mention_columns, verbatims=verbatims)


def write_frame_beside(table: LabelledTable, target: Path, frame_csv: bool = True) -> list[Path]:
    """Write the code frame as `<name>-frame.csv` beside a written data file (unless frame_csv is false); return
    the paths written."""
    if not frame_csv:
        return [target]
    frame_path = sibling_path(target)
    write_csv_table(table.code_frame, frame_path)
    return [target, frame_path]


def write_csv(
    dataset: CodedDataset,
    path: str | os.PathLike,
    *,
    mention_columns: bool = False,
    verbatims: VerbatimMode = "omit",
) -> list[Path]:
    """Write the coded data as CSV and the code frame as `<name>-frame.csv` beside it; return both paths."""
    target, table = checked_table(dataset, path, mention_columns=mention_columns, verbatims=verbatims)
    write_csv_table(table.data, target)
    return write_frame_beside(table, target)


def _xlsx_rows(df: pd.DataFrame):
    """Header then rows as plain Python values: NaN/NA -> empty cell, text cleaned, cut to what an XLSX
    cell holds and guarded (in that order, by the one guard function)."""
    yield [guard_cell(str(c), XLSX_MAX_CELL_CHARS) for c in df.columns]
    cols = []
    for name in df.columns:
        column = _whole_numbers_as_int(df[name]).astype(object)
        cols.append([None if pd.isna(v) else guard_cell(v, XLSX_MAX_CELL_CHARS) for v in column])
    yield from zip(*cols)


def write_xlsx(
    dataset: CodedDataset,
    path: str | os.PathLike,
    *,
    mention_columns: bool = False,
    verbatims: VerbatimMode = "omit",
) -> list[Path]:
    """Write an XLSX workbook with sheets `data`, `frame` (the code frames) and `variables` (labels).

    Returns the one path, as a list like the other writers. Text longer than an XLSX cell holds is cut.
    """
    from openpyxl import Workbook

    target = check_target(path)
    if dataset.n_respondents + 1 > XLSX_MAX_ROWS:
        raise OpenCodeError(
            f"{target}: {dataset.n_respondents} respondents do not fit in one XLSX sheet; export CSV instead"
        )
    table = build_table(dataset, mention_columns=mention_columns, verbatims=verbatims)
    with private_tempdir(target):  # openpyxl spills each sheet to a temporary file: keep it out of /tmp
        workbook = Workbook(write_only=True)
        for title, df in (("data", table.data), ("frame", table.code_frame), ("variables", variables_table(table))):
            sheet = workbook.create_sheet(title)
            for row in _xlsx_rows(df):
                sheet.append(row)
        with atomic_path(target, suffix=".xlsx") as tmp:
            workbook.save(tmp)
    return [target]
