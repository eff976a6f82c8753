"""Read a data map (variable labels, value labels, missing codes) that sits beside a CSV export.

Columns: variable, label, code, value_label, missing. A row with an empty code gives the variable label;
a row with a code gives that code's label (rows keep their order as value order); missing = 1 marks a
missing code.
"""

from __future__ import annotations

from pathlib import Path

from opencode.errors import OpenCodeError
from opencode.ingest.readers import RawTable, read_survey_file

REQUIRED = ("variable", "code")


def apply_labels_file(table: RawTable, labels_path: str | Path) -> None:
    """Add the data map's labels and missing codes to `table` (codes must be numbers)."""
    labels = read_survey_file(labels_path).frame
    path = Path(labels_path)
    missing_columns = [c for c in REQUIRED if c not in labels.columns]
    if missing_columns:
        raise OpenCodeError(f"{path}: a labels file needs the columns variable, label, code, value_label, missing "
                            f"(missing: {', '.join(missing_columns)})")
    for index, row in labels.iterrows():
        name = str(row["variable"]).strip()
        where = f"{path}: row {index + 2}"
        if name not in table.frame.columns:
            raise OpenCodeError(f"{where}: variable {name!r} is not a column of {table.path.name}")
        code_text = str(row.get("code", "")).strip()
        if not code_text:
            if str(row.get("label", "")).strip():
                table.variable_labels[name] = str(row["label"]).strip()
            continue
        try:
            code = float(code_text)
        except ValueError as error:
            raise OpenCodeError(f"{where}, column code: {code_text!r} is not a number") from error
        if str(row.get("label", "")).strip() and name not in table.variable_labels:
            table.variable_labels[name] = str(row["label"]).strip()
        value_label = str(row.get("value_label", "")).strip()
        if value_label:
            table.value_labels.setdefault(name, {})[code] = value_label
        if str(row.get("missing", "")).strip() in ("1", "yes", "true", "True"):
            table.missing_codes.setdefault(name, [])
            if code not in table.missing_codes[name]:
                table.missing_codes[name].append(code)
