"""Coded data out as SPSS .sav and Stata .dta (pyreadstat), with variable labels, value labels and
user-missing codes, plus the code frame as a sibling `<name>-frame.csv`."""

from __future__ import annotations

import contextlib
import os
from pathlib import Path

import numpy as np
import pyreadstat

try:
    from pyreadstat import PyreadstatError, ReadstatError
except ImportError:  # pyreadstat before 1.3 exports them from its parser module only
    from pyreadstat._readstat_parser import PyreadstatError, ReadstatError

from opencode.errors import OpenCodeError
from opencode.export.dataset import CodedDataset, LabelledTable, VerbatimMode
from opencode.files.safe_write import atomic_path
from opencode.export.tabular import checked_table, write_frame_beside

SPSS_LABEL_BYTES = 256  # variable labels; longer ones are cut by the format
SPSS_VALUE_LABEL_BYTES = 120
SPSS_MAX_DISCRETE_MISSING = 3
STATA_LABEL_CHARS = 80


@contextlib.contextmanager
def _format_errors(target: Path):
    """Turn a refusal by the file-format library into an error naming the file."""
    try:
        yield
    except (PyreadstatError, ReadstatError) as exc:
        raise OpenCodeError(f"{target}: could not write: {exc}") from None


def _cut_bytes(text: str, limit: int) -> str:
    """Shorten text to at most `limit` UTF-8 bytes without splitting a character."""
    encoded = text.encode("utf-8")
    return text if len(encoded) <= limit else encoded[:limit].decode("utf-8", "ignore")


def _spss_missing(table: LabelledTable) -> dict[str, list]:
    """SPSS user-missing: up to three discrete codes, or one range when the codes are a run of whole numbers."""
    out: dict[str, list] = {}
    for name, codes in table.missing_codes.items():
        codes = sorted(set(codes))
        if len(codes) <= SPSS_MAX_DISCRETE_MISSING:
            out[name] = codes
        elif all(float(c).is_integer() for c in codes) and codes[-1] - codes[0] == len(codes) - 1:
            out[name] = [{"lo": codes[0], "hi": codes[-1]}]
        else:
            raise OpenCodeError(
                f"variable {name!r}: SPSS allows at most {SPSS_MAX_DISCRETE_MISSING} separate missing codes "
                f"or one range, got {codes}"
            )
    return out


def write_sav(
    dataset: CodedDataset,
    path: str | os.PathLike,
    *,
    mention_columns: bool = False,
    verbatims: VerbatimMode = "omit",
    frame_csv: bool = True,
) -> list[Path]:
    """Write an SPSS .sav (labels, value labels, missing codes) and the sibling frame CSV; return the paths."""
    target, table = checked_table(dataset, path, mention_columns=mention_columns, verbatims=verbatims,
                                  frame_csv=frame_csv)
    numeric = {c for c in table.data.columns if table.data[c].dtype.kind in "iuf"}
    with atomic_path(target, suffix=".sav") as tmp, _format_errors(target):
        pyreadstat.write_sav(
            table.data,
            tmp,
            file_label=_cut_bytes(dataset.title, 64),
            column_labels={k: _cut_bytes(v, SPSS_LABEL_BYTES) for k, v in table.column_labels.items()},
            variable_value_labels={
                name: {k: _cut_bytes(v, SPSS_VALUE_LABEL_BYTES) for k, v in labels.items()}
                for name, labels in table.value_labels.items()
            },
            missing_ranges=_spss_missing(table),
            variable_measure={name: measure for name, measure in table.measures.items() if name in numeric},
        )
    return write_frame_beside(table, target, frame_csv)


def _stata_value_labels(table: LabelledTable) -> dict[str, dict[int, str]]:
    """Stata labels whole numbers only: integer keys, or an error naming the variable and value."""
    out: dict[str, dict[int, str]] = {}
    for name, labels in table.value_labels.items():
        converted = {}
        for key, text in labels.items():
            if not float(key).is_integer():
                raise OpenCodeError(f"variable {name!r}: Stata value labels need whole numbers, got {key!r}")
            converted[int(key)] = text
        out[name] = converted
    return out


def write_dta(
    dataset: CodedDataset,
    path: str | os.PathLike,
    *,
    mention_columns: bool = False,
    verbatims: VerbatimMode = "omit",
    frame_csv: bool = True,
) -> list[Path]:
    """Write a Stata .dta (version 15) with labels and the sibling frame CSV; return the paths.

    Stata has no user-missing codes for ordinary numbers, so missing codes (e.g. 9 = refused) stay as
    labelled values; the frame CSV and the .sav export carry the missing flag.
    """
    target, table = checked_table(dataset, path, mention_columns=mention_columns, verbatims=verbatims,
                                  frame_csv=frame_csv)
    data = table.data
    id_col = data.columns[0]
    if data[id_col].dtype.kind == "i" and data[id_col].abs().max() < np.iinfo(np.int32).max:
        data = data.assign(**{id_col: data[id_col].astype(np.int32)})
    with atomic_path(target, suffix=".dta") as tmp, _format_errors(target):
        pyreadstat.write_dta(
            data,
            tmp,
            file_label=dataset.title[:STATA_LABEL_CHARS],
            column_labels={k: v[:STATA_LABEL_CHARS] for k, v in table.column_labels.items()},
            variable_value_labels=_stata_value_labels(table),
        )
    return write_frame_beside(table, target, frame_csv)
