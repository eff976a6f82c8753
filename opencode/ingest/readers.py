"""Read a survey file of any supported format into one table plus the metadata the format carries."""

from __future__ import annotations

import io
import re
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from opencode.errors import OpenCodeError
from opencode.ingest.text_cells import NULL_MARKERS
from opencode.ingest.sniff import decode_text, detect_format, sniff_delimiter


@dataclass
class RawTable:
    """What a reader found: the data (text cells as str, numbers as numbers) and any labels it carried."""

    path: Path
    frame: pd.DataFrame
    format: str
    variable_labels: dict[str, str] = field(default_factory=dict)
    value_labels: dict[str, dict[float, str]] = field(default_factory=dict)
    missing_codes: dict[str, list[float]] = field(default_factory=dict)
    encoding: str | None = None

    def row_name(self, index: int) -> str:
        """How to name data row `index` (0-based) to a user."""
        if self.format in ("csv", "tsv", "xlsx"):
            return f"row {index + 2} (data row {index + 1})"
        return f"case {index + 1}"


def read_survey_file(path: str | Path, *, sheet: str | int | None = None, encoding: str | None = None,
                     delimiter: str | None = None, text_columns: tuple[str, ...] = ()) -> RawTable:
    """Read CSV/TSV, XLSX, SPSS .sav, Stata .dta or Parquet; bad files raise a clear OpenCodeError.

    In delimited text, `text_columns` are read as strings exactly as given; other columns get their types
    inferred, with the usual null markers read as empty. Without `text_columns` every column is read as text.
    """
    path = Path(path)
    kind = detect_format(path)
    reader = {"csv": _read_text, "tsv": _read_text, "xlsx": _read_xlsx, "sav": _read_spss, "dta": _read_stata,
              "parquet": _read_parquet}[kind]
    if kind in ("csv", "tsv"):
        table = reader(path, kind, encoding, delimiter, text_columns)
    elif kind == "xlsx":
        table = reader(path, sheet)
    else:
        table = reader(path)
    if table.frame.columns.duplicated().any():
        dupes = sorted(set(table.frame.columns[table.frame.columns.duplicated()]))
        raise OpenCodeError(f"{path}: column names appear twice: {', '.join(map(str, dupes))}")
    if len(table.frame.columns) == 0:
        raise OpenCodeError(f"{path}: no columns found")
    if len(table.frame) == 0:
        raise OpenCodeError(f"{path}: has a header but no data rows")
    return table


_RAGGED = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")


def _read_text(path: Path, kind: str, encoding: str | None, delimiter: str | None,
               text_columns: tuple[str, ...]) -> RawTable:
    raw = path.read_bytes()
    if not raw or raw.isspace():
        raise OpenCodeError(f"{path}: the file is empty")
    text, used = decode_text(path, raw, encoding, head_only=b"\x00" not in raw)
    if text.startswith("\ufeff"):
        text = text[1:]
    if "\x00" in text:
        text = text.replace("\x00", "")
    sep = delimiter or sniff_delimiter(path, text, kind)
    # UTF-8 files are parsed from their bytes (fast); other encodings from the decoded text.
    utf8 = used in ("utf-8", "utf-8-sig") and b"\x00" not in raw
    source = (lambda: io.BytesIO(raw[3:] if used == "utf-8-sig" else raw)) if utf8 else (lambda: io.StringIO(text))
    try:
        header = pd.read_csv(source(), sep=sep, nrows=0, engine="c").columns
        typed = [c for c in header if str(c).strip() not in text_columns] if text_columns else []
        frame = pd.read_csv(source(), sep=sep, engine="c", skip_blank_lines=True, keep_default_na=False,
                            na_values={c: sorted(NULL_MARKERS) for c in typed})
        as_given = [c for c in header if c not in typed and not pd.api.types.is_string_dtype(frame[c])]
        if as_given:  # ids or answers that looked like numbers: read those columns again exactly as written
            exact = pd.read_csv(source(), sep=sep, engine="c", skip_blank_lines=True, keep_default_na=False,
                                usecols=as_given, dtype=str)
            for column in as_given:
                frame[column] = exact[column]
    except pd.errors.ParserError as error:
        match = _RAGGED.search(str(error))
        if match:
            expected, line, saw = match.groups()
            raise OpenCodeError(f"{path}: line {line}: has {saw} fields but the header has {expected} "
                                f"(delimiter {sep!r}); check quoting or the delimiter") from error
        raise OpenCodeError(f"{path}: cannot be read as delimited text ({error})") from error
    except pd.errors.EmptyDataError as error:
        raise OpenCodeError(f"{path}: the file is empty") from error
    frame.columns = [str(c).strip() for c in frame.columns]
    return RawTable(path, frame, kind, encoding=used)


def _read_xlsx(path: Path, sheet: str | int | None) -> RawTable:
    import openpyxl

    try:
        workbook = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as error:  # openpyxl raises many types for a damaged file
        raise OpenCodeError(f"{path}: cannot be read as an Excel workbook ({error})") from error
    names = workbook.sheetnames
    workbook.close()
    chosen = names[0] if sheet is None else sheet
    if isinstance(chosen, str) and chosen.isdigit() and chosen not in names:
        chosen = int(chosen) - 1
    if isinstance(chosen, int):
        if not 0 <= chosen < len(names):
            raise OpenCodeError(f"{path}: has {len(names)} sheet(s); there is no sheet number {chosen + 1}")
        chosen = names[chosen]
    if chosen not in names:
        raise OpenCodeError(f"{path}: no sheet named {chosen!r} (sheets: {', '.join(names)})")
    frame = pd.read_excel(path, sheet_name=chosen, engine="openpyxl", dtype=object)
    frame = frame.dropna(how="all")
    frame.columns = [str(c).strip() for c in frame.columns]
    return RawTable(path, frame.reset_index(drop=True), "xlsx")


def _read_labelled(path: Path, reader, kind: str) -> RawTable:
    try:
        frame, meta = reader(str(path), user_missing=True)
    except Exception as error:  # pyreadstat raises its own error types
        raise OpenCodeError(f"{path}: cannot be read as {kind} ({error})") from error
    variable_labels = {name: label for name, label in zip(meta.column_names, meta.column_labels) if label}
    value_labels = {name: {float(code): str(label) for code, label in labels.items()
                           if isinstance(code, (int, float))}
                    for name, labels in meta.variable_value_labels.items()}
    missing: dict[str, list[float]] = {}
    for name, values in (getattr(meta, "missing_user_values", None) or {}).items():
        missing.setdefault(name, []).extend(float(v) for v in values if isinstance(v, (int, float)))
    for name, ranges in (getattr(meta, "missing_ranges", None) or {}).items():
        for spec in ranges:
            low, high = spec.get("lo"), spec.get("hi")
            if isinstance(low, (int, float)) and isinstance(high, (int, float)):
                if low == high:
                    missing.setdefault(name, []).append(float(low))
                else:  # a range: keep the labelled codes inside it as missing codes
                    inside = [c for c in value_labels.get(name, {}) if low <= c <= high]
                    present = pd.to_numeric(frame[name], errors="coerce")
                    inside += [float(v) for v in present[(present >= low) & (present <= high)].unique()]
                    missing.setdefault(name, []).extend(sorted(set(inside)))
    return RawTable(path, frame, kind, variable_labels, value_labels,
                    {k: sorted(set(v)) for k, v in missing.items()})


def _read_spss(path: Path) -> RawTable:
    import pyreadstat

    return _read_labelled(path, pyreadstat.read_sav, "sav")


def _read_stata(path: Path) -> RawTable:
    import pyreadstat

    return _read_labelled(path, pyreadstat.read_dta, "dta")


def _read_parquet(path: Path) -> RawTable:
    try:
        frame = pd.read_parquet(path)
    except Exception as error:  # pyarrow raises several error types
        raise OpenCodeError(f"{path}: cannot be read as Parquet ({error})") from error
    frame.columns = [str(c) for c in frame.columns]
    return RawTable(path, frame, "parquet")
