"""Triple-S XML 2.0 interchange: a metadata XML file beside a fixed-width or CSV data file.

Written from the published standard (Triple-S XML 2.0, December 2006, triple-s.org), as understood here:
- root `<sss version="2.0">` with `<date>`, `<time>`, `<origin>`, then `<survey>` holding `<name>`, `<title>`
  and one `<record ident format>`; `format` is "fixed" (columns) or "csv" (fields).
- each `<variable ident type use>` holds `<name>`, `<label>`, `<position start finish/>`, then for a
  multiple in spread layout `<spread subfields width/>`, then `<values>` with `<value code>label</value>`
  entries (single, multiple) or one `<range from to/>` (quantity). Character variables in CSV format give
  their maximum length in `<size>` (from memory).
- fixed format (UTF-8 text, CRLF records): positions are 1-based character columns, contiguous, `finish`
  inclusive; numbers are right-justified (codes zero-filled, quantities space-filled); blank = no answer.
- csv format: positions are 1-based field numbers; a spread multiple takes one field per subfield.
- a multiple is a bitstring by default: one character per code from 1 to the highest code, "1" = chosen;
  in spread layout each subfield holds one chosen code (unused subfields are zeros).
- missing data is a blank field: spaces in fixed format, an empty field in csv format (from memory). A
  respondent outside a question's base (no verbatim, a non-answer, not yet coded) gets a blank multiple,
  while a respondent in the base with no code gets all zeros, so counts over the non-blank records give
  the base and percentages of `oecode tables`.
The respondent id is the `use="serial"` variable (quantity for whole-number ids, character for text ids).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import os
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.files.cell_guard import guard_cell
from opencode.export.dataset import (
    CodedDataset,
    CodedQuestion,
    VerbatimMode,
    check_verbatim_mode,
    question_base,
    question_codes,
    question_stems,
    safe_name,
    verbatim_texts,
)
from opencode.files.safe_write import atomic_open
from opencode.files.targets import check_targets
from opencode.export.choices import SSS_FORMATS as FORMATS, SSS_MULTIPLE_LAYOUTS as MULTIPLE_LAYOUTS  # noqa: F401

SSS_VERSION = "2.0"
RECORD_IDENT = "A"


@dataclass
class SSSVariable:
    """One Triple-S variable as written to (or read from) the metadata file."""

    ident: str
    name: str
    label: str
    type: str
    start: int
    finish: int
    use: str | None = None
    values: dict[int, str] = field(default_factory=dict)
    range: tuple[str, str] | None = None
    spread: tuple[int, int] | None = None
    size: int | None = None


@dataclass
class TripleS:
    """A parsed Triple-S survey: header fields, variables in record order and the data as a DataFrame.

    Data columns: single -> Int64, quantity -> float (int64 for a whole-number serial), multiple ->
    frozenset of chosen codes (None: missing, outside the base), character -> str.
    """

    header: dict[str, str]
    variables: list[SSSVariable]
    data: pd.DataFrame


@dataclass
class _Field:
    """A variable being written: its metadata and one text cell per respondent (or several for spread csv)."""

    var: SSSVariable
    cells: list[list[str]]  # one list per data field the variable occupies (csv), each one cell per respondent


def _digits(values: np.ndarray) -> int:
    """Characters the widest whole number needs (sign included)."""
    return max(len(str(int(v))) for v in values) if len(values) else 1


def _fixed_cells(values: np.ndarray, width: int, fill: str) -> list[str]:
    """Whole numbers right-justified to `width` (NaN -> blanks)."""
    return [" " * width if np.isnan(v) else str(int(v)).rjust(width, fill) for v in values]


def _serial_field(ds: CodedDataset, taken: set[str]) -> tuple[SSSVariable, list[str]]:
    """The respondent id as the serial variable: quantity for whole numbers, character for text."""
    name = safe_name(ds.id_name, taken=taken)
    ids = ds.respondent_ids
    if isinstance(ids[0], str):
        texts = [_one_line(i) for i in ids]
        width = max(1, max(map(len, texts)))
        return SSSVariable("", name, "Respondent id", "character", 0, 0, use="serial", size=width), texts
    values = np.asarray(ids, dtype=np.int64)
    width = _digits(values)
    var = SSSVariable("", name, "Respondent id", "quantity", 0, 0, use="serial",
                      range=(str(int(values.min())), str(int(values.max()))))
    return var, [str(int(v)).rjust(width) for v in values]


def _closed_field(values: np.ndarray, name: str, label: str, value_labels: dict) -> tuple[SSSVariable, list[str]]:
    """Whole-number variables become single (every code listed), others quantity with a range."""
    finite = values[~np.isnan(values)]
    if np.array_equal(finite, np.round(finite)):
        codes = sorted({int(v) for v in finite} | {int(k) for k in value_labels if float(k).is_integer()})
        labels = {c: value_labels.get(c, value_labels.get(float(c), str(c))) for c in codes}
        width = _digits(np.array(codes)) if codes else 1
        cells = _fixed_cells(values, width, "0" if finite.size == 0 or finite.min() >= 0 else " ")
        return SSSVariable("", name, label, "single", 0, 0, values=labels), cells
    decimals = min(6, max(len(f"{v:.6f}".rstrip("0").split(".")[1]) for v in finite))
    texts = [f"{v:.{decimals}f}" for v in finite]
    width = max(map(len, texts))
    cells = [" " * width if np.isnan(v) else f"{v:.{decimals}f}".rjust(width) for v in values]
    lo, hi = f"{finite.min():.{decimals}f}", f"{finite.max():.{decimals}f}"
    return SSSVariable("", name, label, "quantity", 0, 0, range=(lo, hi)), cells


def _one_line(text: str) -> str:
    """Text fit for one record: cleaned and guarded (the one cell guard), line breaks and tabs as spaces,
    trailing spaces gone."""
    return guard_cell(" ".join(str(text).replace("\t", " ").splitlines()).rstrip())


def _label(text: str) -> str:
    """A label or title for the metadata file: cleaned and guarded like every written cell."""
    return guard_cell(str(text))


def _multiple_fields(
    ds: CodedDataset, q: CodedQuestion, name: str, layout: str, data_format: str
) -> tuple[SSSVariable, list[list[str]]]:
    """A question as one multiple variable over its whole frame (codes and nets): bitstring or spread."""
    qc = question_codes(ds, q)
    outside = ~question_base(ds, q)
    labels = {int(c.code): c.label for c in q.frame}
    chosen = qc.indicators.astype(bool)
    if layout == "bitstring":
        highest = int(qc.frame_codes.max())
        bits = np.full((ds.n_respondents, highest), ord("0"), dtype=np.uint8)
        bits[:, qc.frame_codes - 1] += chosen
        bits[outside] = ord(" ")
        text = bits.tobytes().decode("ascii")
        cells = [text[i:i + highest] for i in range(0, len(text), highest)]
        return SSSVariable("", name, q.label or q.name, "multiple", 0, 0, values=labels), [cells]
    order = np.argsort(qc.frame_codes)
    sorted_codes = qc.frame_codes[order]
    chosen = chosen[:, order]
    subfields = max(1, int(chosen.sum(axis=1).max()))
    width = len(str(int(sorted_codes.max())))
    blank = "" if data_format == "csv" else " " * width
    unused = np.where(outside, blank, "0" * width).tolist()
    columns = [list(unused) for _ in range(subfields)]
    chosen[outside] = False
    rows, cols = np.nonzero(chosen)
    starts = np.searchsorted(rows, np.arange(ds.n_respondents))
    for r, c, k in zip(rows, cols, np.arange(len(rows)) - starts[rows]):
        columns[k][r] = str(int(sorted_codes[c])).rjust(width, "0")
    var = SSSVariable("", name, q.label or q.name, "multiple", 0, 0, values=labels, spread=(subfields, width))
    return var, columns


def _collect_fields(ds: CodedDataset, layout: str, data_format: str, verbatims: VerbatimMode) -> list[_Field]:
    """All variables in record order: serial, closed-ended, then per question its multiple and text."""
    taken: set[str] = set()
    serial, cells = _serial_field(ds, taken)
    fields = [_Field(serial, [cells])]
    for v in ds.closed:
        values = np.array([np.nan if x is None else x for x in v.values], dtype=float)
        var, cells = _closed_field(values, safe_name(v.name, taken=taken), v.label or v.name, dict(v.value_labels))
        fields.append(_Field(var, [cells]))
    for q, stem in zip(ds.questions, question_stems(ds)):
        var, columns = _multiple_fields(ds, q, safe_name(stem, taken=taken), layout, data_format)
        fields.append(_Field(var, columns))
        if verbatims != "omit":
            texts = [_one_line(t) for t in verbatim_texts(q, verbatims)]
            name = safe_name(f"{stem}_text", taken=taken)
            label = f"{q.label or q.name}" + (" (masked)" if verbatims == "masked" else "")
            size = max(1, max(map(len, texts)))
            fields.append(_Field(SSSVariable("", name, label, "character", 0, 0, size=size), [texts]))
    return fields


def _assign_positions(fields: list[_Field], data_format: str) -> None:
    """Contiguous positions from 1: character columns (fixed) or field numbers (csv); pad or guard text."""
    position = 1
    for ident, f in enumerate(fields, start=1):
        var = f.var
        var.ident = str(ident)
        if data_format == "csv":
            span = len(f.cells)
        elif var.type == "multiple" and var.spread:
            span = var.spread[0] * var.spread[1]
        elif var.type == "character":
            span = var.size
        else:
            span = max(len(f.cells[0][0]), 1)
        var.start, var.finish = position, position + span - 1
        position += span
        if var.type == "character" and data_format == "fixed":
            f.cells = [[t.ljust(span) for t in f.cells[0]]]
            var.size = None
        elif var.type == "character":
            continue  # text cells are already cleaned and guarded (_one_line): never stripped after the guard
        elif data_format == "csv":
            f.cells = [[c.strip() for c in column] for column in f.cells]


def _metadata_xml(
    ds: CodedDataset, variables: list[SSSVariable], data_format: str, origin: str, when: dt.datetime
) -> str:
    """The metadata document (Triple-S XML 2.0) as text."""
    root = ET.Element("sss", version=SSS_VERSION)
    ET.SubElement(root, "date").text = when.strftime("%Y-%m-%d")
    ET.SubElement(root, "time").text = when.strftime("%H:%M:%S")
    ET.SubElement(root, "origin").text = origin
    survey = ET.SubElement(root, "survey")
    ET.SubElement(survey, "name").text = safe_name(ds.title or "survey")
    ET.SubElement(survey, "title").text = _label(ds.title or "survey")
    record = ET.SubElement(survey, "record", ident=RECORD_IDENT, format=data_format)
    for var in variables:
        attrs = {"ident": var.ident, "type": var.type}
        if var.use:
            attrs["use"] = var.use
        element = ET.SubElement(record, "variable", attrs)
        ET.SubElement(element, "name").text = var.name
        ET.SubElement(element, "label").text = _label(var.label)
        ET.SubElement(element, "position", start=str(var.start), finish=str(var.finish))
        if var.size is not None:
            ET.SubElement(element, "size").text = str(var.size)
        if var.spread:
            ET.SubElement(element, "spread", subfields=str(var.spread[0]), width=str(var.spread[1]))
        if var.values or var.range:
            values = ET.SubElement(element, "values")
            if var.range:
                ET.SubElement(values, "range", {"from": var.range[0], "to": var.range[1]})
            for code, text in var.values.items():
                ET.SubElement(values, "value", code=str(code)).text = _label(text)
    ET.indent(root, space="  ")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"


def data_path_for(metadata_path: str | os.PathLike, data_format: str = "fixed") -> Path:
    """The data file beside the metadata: `name.asc` for fixed width, `name.csv` for CSV."""
    return Path(metadata_path).with_suffix(".asc" if data_format == "fixed" else ".csv")


def write_triple_s(
    dataset: CodedDataset,
    metadata_path: str | os.PathLike,
    *,
    data_format: Literal["fixed", "csv"] = "fixed",
    multiple: Literal["bitstring", "spread"] = "bitstring",
    verbatims: VerbatimMode = "omit",
    origin: str = "oecode",
    timestamp: dt.datetime | None = None,
) -> list[Path]:
    """Write Triple-S XML 2.0 metadata and its data file (`.asc` fixed width or `.csv`); return both paths."""
    if data_format not in FORMATS:
        raise OpenCodeError(f"triple-s: format must be one of {', '.join(FORMATS)}, got {data_format!r}")
    if multiple not in MULTIPLE_LAYOUTS:
        raise OpenCodeError(f"triple-s: multiple must be one of {', '.join(MULTIPLE_LAYOUTS)}, got {multiple!r}")
    check_verbatim_mode(verbatims)
    if data_path_for(metadata_path, data_format) == Path(metadata_path):
        raise OpenCodeError(f"{metadata_path}: the metadata file needs its own name; use a .sss or .xml ending")
    meta, data_path = check_targets([(metadata_path, None),
                                     (data_path_for(metadata_path, data_format), metadata_path)])
    fields = _collect_fields(dataset, multiple, data_format, verbatims)
    _assign_positions(fields, data_format)
    columns = [cells for f in fields for cells in f.cells]
    xml_text = _metadata_xml(dataset, [f.var for f in fields], data_format, origin, timestamp or dt.datetime.now())
    with atomic_open(data_path, "w", newline="") as handle:
        if data_format == "fixed":
            handle.writelines("".join(row) + "\r\n" for row in zip(*columns))
        else:
            csv.writer(handle, lineterminator="\r\n").writerows(zip(*columns))
    with atomic_open(meta, "w") as handle:
        handle.write(xml_text)
    return [meta, data_path]


def _parse_variable(element: ET.Element, source: Path) -> SSSVariable:
    position = element.find("position")
    if position is None or element.findtext("name") is None:
        raise OpenCodeError(f"{source}: variable {element.get('ident')!r} lacks <name> or <position>")
    start = int(position.get("start"))
    finish = int(position.get("finish", start))
    spread = element.find("spread")
    values_el = element.find("values")
    values: dict[int, str] = {}
    value_range = None
    if values_el is not None:
        values = {int(v.get("code")): v.text or "" for v in values_el.findall("value")}
        r = values_el.find("range")
        if r is not None:
            value_range = (r.get("from"), r.get("to"))
    size = element.findtext("size")
    return SSSVariable(
        ident=element.get("ident", ""), name=element.findtext("name"), label=element.findtext("label", ""),
        type=element.get("type"), start=start, finish=finish, use=element.get("use"), values=values,
        range=value_range,
        spread=(int(spread.get("subfields")), int(spread.get("width"))) if spread is not None else None,
        size=int(size) if size else None,
    )


def _decode(var: SSSVariable, cells: list[str]) -> list:
    """Turn a variable's raw text (one string per record, csv subfields joined by \\x1f) into values."""
    if var.type == "character":
        return cells
    if var.type == "multiple" and var.spread is None:
        return [None if not c.strip() else frozenset(i + 1 for i, ch in enumerate(c) if ch == "1") for c in cells]
    if var.type == "multiple":
        width = var.spread[1]

        def parts(c: str) -> list[str]:
            return c.split("\x1f") if "\x1f" in c else [c[i:i + width] for i in range(0, len(c), width)]

        return [None if not c.replace("\x1f", "").strip() else
                frozenset(int(p) for p in parts(c) if p.strip() and int(p) != 0) for c in cells]
    return [np.nan if not c.strip() else float(c) for c in cells]


def read_triple_s(metadata_path: str | os.PathLike, data_path: str | os.PathLike | None = None) -> TripleS:
    """Parse Triple-S XML 2.0 metadata and its data file (fixed width or CSV) back into a TripleS."""
    meta = Path(metadata_path)
    try:
        root = ET.parse(meta).getroot()
    except (OSError, ET.ParseError) as exc:
        raise OpenCodeError(f"{meta}: cannot read Triple-S metadata ({exc})") from None
    if root.tag != "sss":
        raise OpenCodeError(f"{meta}: root element is <{root.tag}>, expected <sss>")
    record = root.find("survey/record")
    if record is None:
        raise OpenCodeError(f"{meta}: no <survey><record> element")
    data_format = record.get("format", "fixed")
    header = {
        "version": root.get("version", ""), "date": root.findtext("date", ""), "time": root.findtext("time", ""),
        "origin": root.findtext("origin", ""), "name": root.findtext("survey/name", ""),
        "title": root.findtext("survey/title", ""), "record_ident": record.get("ident", ""), "format": data_format,
    }
    variables = [_parse_variable(v, meta) for v in record.findall("variable")]
    source = Path(data_path) if data_path is not None else data_path_for(meta, data_format)
    try:
        text = source.read_text(encoding="utf-8")
    except OSError as exc:
        raise OpenCodeError(f"{source}: cannot read Triple-S data ({exc})") from None
    if data_format == "csv":
        records = list(csv.reader(io.StringIO(text)))
        raw = {v.name: ["\x1f".join(r[v.start - 1:v.finish]) for r in records] for v in variables}
    else:
        lines = text.splitlines()
        raw = {v.name: [line[v.start - 1:v.finish] for line in lines] for v in variables}
    data = {}
    for var in variables:
        decoded = _decode(var, raw[var.name])
        if var.type == "character":
            data[var.name] = [c.rstrip() if data_format == "fixed" else c for c in decoded]
        elif var.type == "single":
            data[var.name] = pd.array(decoded, dtype="Float64").astype("Int64")
        elif var.type == "quantity" and var.use == "serial":
            data[var.name] = np.asarray(decoded, dtype=float).astype(np.int64)
        else:
            data[var.name] = decoded
    return TripleS(header, variables, pd.DataFrame(data))
