"""Read a survey file of any supported format into one table plus the metadata the format carries."""

from __future__ import annotations

import csv
import io
import re
import zipfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from opencode.files.interrupts import interrupted

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
    #: the row number in the file of each data row, where it differs from index + 2 (XLSX with empty rows)
    source_rows: list[int] | None = None
    #: a check still running on the second core (the field count of each row), see `verify`
    pending: Callable[[], None] | None = None

    def verify(self) -> None:
        """Finish the checks still running (raises like the reader would); call before keeping the data."""
        if self.pending is not None:
            check, self.pending = self.pending, None
            check()

    def row_name(self, index: int) -> str:
        """How to name data row `index` (0-based) to a user."""
        if self.source_rows is not None:
            return f"row {self.source_rows[index]} (data row {index + 1})"
        if self.format in ("csv", "tsv", "xlsx"):
            return f"row {index + 2} (data row {index + 1})"
        return f"case {index + 1}"


def read_survey_file(path: str | Path, *, sheet: str | int | None = None, encoding: str | None = None,
                     delimiter: str | None = None, text_columns: tuple[str, ...] = (),
                     defer_checks: bool = False) -> RawTable:
    """Read CSV/TSV, XLSX, SPSS .sav, Stata .dta or Parquet; bad files raise a clear OpenCodeError.

    In delimited text, `text_columns` are read as strings exactly as given; other columns get their types
    inferred, with the usual null markers read as empty. Without `text_columns` every column is read as text.
    With `defer_checks` the count of fields in every row may still be running: the caller calls
    `table.verify()` before it keeps anything (the importer does so while SQLite writes, on the other core).
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
        table.verify()
        raise OpenCodeError(f"{path}: has a header but no data rows")
    if not defer_checks:
        table.verify()
    return table


_RAGGED = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
#: How many rows with the wrong number of fields a message names.
SHOWN_ROWS = 3


def _header_names(path: Path, text: str, sep: str) -> list[str]:
    """The header's column names as written (stripped); two columns with one name are an error naming both."""
    try:
        header = next(csv.reader(io.StringIO(text[:1_000_000]), delimiter=sep), [])
    except csv.Error:
        return []
    names = [name.strip() for name in header]
    first: dict[str, int] = {}
    for position, name in enumerate(names, start=1):
        if name in first and name:
            raise OpenCodeError(f"{path}: columns {first[name]} and {position} are both named {name!r}; rename one "
                                "(oecode does not rename columns itself)")
        first.setdefault(name, position)
    return names


def _field_counts_look_even(data: bytes, sep: str, expected: int) -> bool:
    """A fast look (numpy over the bytes): does every non-blank record have `expected` fields? Quotes are
    followed by parity, so delimiters and line breaks inside quoted fields do not count. False means "look
    closer", never "wrong": a stray quote inside a field can fool it."""
    arr = np.frombuffer(data, dtype=np.uint8)
    quotes = np.flatnonzero(arr == ord('"'))
    delims = np.flatnonzero(arr == ord(sep))
    breaks = np.flatnonzero(arr == ord("\n"))
    if len(quotes):
        delims = delims[np.searchsorted(quotes, delims) % 2 == 0]
        breaks = breaks[np.searchsorted(quotes, breaks) % 2 == 0]
    bounds = np.concatenate([[-1], breaks, [len(arr)]])
    fields = np.diff(np.searchsorted(delims, bounds)) + 1
    lengths = np.diff(bounds) - 1
    starts = bounds[:-1] + 1
    blank = (lengths == 0) | ((lengths == 1) & (arr[np.minimum(starts, len(arr) - 1)] == ord("\r")))
    return bool(np.all(fields[~blank] == expected))


def _check_field_counts(path: Path, text: str, sep: str, expected: int) -> None:
    """Every data row has as many fields as the header: a short or long row is an error naming the row
    (a short row is most often a line break or delimiter lost in export; its missing cells would be read
    as blanks without a word, so oecode stops instead)."""
    reader = csv.reader(io.StringIO(text), delimiter=sep)
    wrong, row = [], 1
    try:
        for index, fields in enumerate(reader):
            if not fields or index == 0:
                continue
            row += 1
            if len(fields) != expected:
                wrong.append((row, reader.line_num, len(fields)))
    except csv.Error as error:
        raise OpenCodeError(f"{path}: line {reader.line_num}: cannot be read as delimited text ({error})") from None
    if wrong:
        shown = "; ".join(f"row {r}, line {line}: has {n} fields" for r, line, n in wrong[:SHOWN_ROWS])
        more = f"; and {len(wrong) - SHOWN_ROWS} more rows" if len(wrong) > SHOWN_ROWS else ""
        raise OpenCodeError(f"{path}: {shown} but the header has {expected}{more} (delimiter {sep!r}); check "
                            "quoting, line breaks inside answers or the delimiter")


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
    body = (raw[3:] if used == "utf-8-sig" else raw) if utf8 else None
    source = (lambda: io.BytesIO(body)) if utf8 else (lambda: io.StringIO(text))
    names = _header_names(path, text, sep)
    counts = None
    if names and len(sep) == 1:
        data = body if utf8 else text.encode("utf-8", errors="surrogatepass")
        # numpy releases the GIL: the fast field count runs on the second core while pandas parses
        pool = ThreadPoolExecutor(max_workers=1)
        counts = pool.submit(_field_counts_look_even, data, sep, len(names))
        pool.shutdown(wait=False)

    def check_counts() -> None:
        if counts is not None and not counts.result():
            # the close look, on the whole text (for UTF-8 only the head was decoded so far)
            _check_field_counts(path, body.decode("utf-8") if utf8 else text, sep, len(names))

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
        if interrupted():
            raise KeyboardInterrupt from error  # Ctrl+C while pandas was reading: an interruption, not a bad file
        check_counts()  # names the rows with the wrong number of fields, if that is what it is
        match = _RAGGED.search(str(error))
        if match:
            expected, line, saw = match.groups()
            raise OpenCodeError(f"{path}: line {line}: has {saw} fields but the header has {expected} "
                                f"(delimiter {sep!r}); check quoting or the delimiter") from error
        raise OpenCodeError(f"{path}: cannot be read as delimited text ({error})") from error
    except pd.errors.EmptyDataError as error:
        raise OpenCodeError(f"{path}: the file is empty") from error
    frame.columns = [str(c).strip() for c in frame.columns]
    return RawTable(path, frame, kind, encoding=used, pending=check_counts)


_FORMULA_TAG = re.compile(rb"<(?:\w+:)?f[\s>/]")


def _has_formulas(path: Path) -> bool:
    """A quick look inside the workbook's sheets (zip parts) for any formula element."""
    try:
        with zipfile.ZipFile(path) as archive:
            for name in archive.namelist():
                if not (name.startswith("xl/worksheets/") and name.endswith(".xml")):
                    continue
                with archive.open(name) as handle:
                    tail = b""
                    while chunk := handle.read(1 << 20):
                        if _FORMULA_TAG.search(tail + chunk):
                            return True
                        tail = chunk[-16:]
    except (OSError, zipfile.BadZipFile, RuntimeError):
        return False
    return False


def _uncalculated_formulas(path: Path, sheet: str, rows: list[tuple], header: list[str]) -> None:
    """Formula cells saved without a result (files written by scripts) are refused, naming sheet, row and
    column: oecode does not calculate formulas, and reading them as blank would forge non-answers. A
    formula with a saved result is read as that result."""
    import openpyxl
    from openpyxl.utils import get_column_letter

    workbook = openpyxl.load_workbook(path, read_only=True, data_only=False)
    try:
        found = []
        for r, cells in enumerate(workbook[sheet].iter_rows(), start=1):
            for c, cell in enumerate(cells):
                if getattr(cell, "data_type", None) != "f":
                    continue
                cached = rows[r - 1][c] if r - 1 < len(rows) and c < len(rows[r - 1]) else None
                if cached is None:
                    found.append((r, c, str(cell.value)))
    finally:
        workbook.close()
    if found:
        r, c, formula = found[0]
        name = f" ({header[c]})" if r > 1 and c < len(header) else ""
        more = f"; {len(found) - 1} more formula cells like it" if len(found) > 1 else ""
        raise OpenCodeError(
            f"{path}: sheet {sheet!r}, row {r}, column {get_column_letter(c + 1)}{name}: a formula with no saved "
            f"result ({formula[:60]}){more}. The workbook was saved without calculating (common when a script "
            "writes it) and oecode does not calculate formulas: open and save it in a spreadsheet program, or "
            "export the sheet as CSV")


def _read_xlsx(path: Path, sheet: str | int | None) -> RawTable:
    """The first row is the header; empty rows are skipped (messages still name the row in the sheet); text
    cells are kept exactly as typed ("None", "NA" and "NULL" are answers); an empty cell is missing."""
    import openpyxl

    try:
        workbook = openpyxl.load_workbook(path, read_only=True, data_only=True)
    except Exception as error:  # openpyxl raises many types for a damaged file
        raise OpenCodeError(f"{path}: cannot be read as an Excel workbook ({error})") from error
    try:
        names = workbook.sheetnames
        chosen = names[0] if sheet is None else sheet
        if isinstance(chosen, str) and chosen.isdigit() and chosen not in names:
            chosen = int(chosen) - 1
        if isinstance(chosen, int):
            if not 0 <= chosen < len(names):
                raise OpenCodeError(f"{path}: has {len(names)} sheet(s); there is no sheet number {chosen + 1}")
            chosen = names[chosen]
        if chosen not in names:
            raise OpenCodeError(f"{path}: no sheet named {chosen!r} (sheets: {', '.join(names)})")
        try:
            rows = [tuple(row) for row in workbook[chosen].iter_rows(values_only=True)]
        except Exception as error:  # a damaged sheet part
            raise OpenCodeError(f"{path}: sheet {chosen!r} cannot be read ({error})") from error
    finally:
        workbook.close()
    if not rows:
        raise OpenCodeError(f"{path}: sheet {chosen!r} is empty")
    width = max(len(row) for row in rows)
    header = [f"Unnamed: {i}" if value is None or str(value).strip() == "" else str(value).strip()
              for i, value in enumerate(list(rows[0]) + [None] * (width - len(rows[0])))]
    if _has_formulas(path):
        _uncalculated_formulas(path, chosen, rows, header)
    first: dict[str, int] = {}
    for position, name in enumerate(header):
        if name in first:
            from openpyxl.utils import get_column_letter

            raise OpenCodeError(f"{path}: sheet {chosen!r}: columns {get_column_letter(first[name] + 1)} and "
                                f"{get_column_letter(position + 1)} are both named {name!r}; rename one (oecode "
                                "does not rename columns itself)")
        first[name] = position
    data, source_rows = [], []
    for number, row in enumerate(rows[1:], start=2):
        if all(value is None or (isinstance(value, str) and value == "") for value in row):
            continue
        data.append(list(row) + [None] * (width - len(row)))
        source_rows.append(number)
    frame = pd.DataFrame(data, columns=header, dtype=object) if data else pd.DataFrame(columns=header)
    plain = source_rows == list(range(2, len(source_rows) + 2))
    return RawTable(path, frame, "xlsx", source_rows=None if plain else source_rows)


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
