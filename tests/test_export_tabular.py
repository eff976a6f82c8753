"""CSV and XLSX exports: layout, sibling code frame, and formula-injection strings kept inert.

OWASP "CSV Injection": a cell starting with = + - @ (or tab / carriage return) gets a leading single
quote so no verbatim can run as a formula. Read back with the csv module and with openpyxl.
"""

import csv

import openpyxl
import pytest

from opencode.errors import OpenCodeError
from opencode.export.dataset import CodedDataset, CodedQuestion, FrameCode, build_table
from opencode.export.tabular import XLSX_MAX_ROWS, write_csv, write_xlsx
from helpers import small_dataset

INJECTIONS = ["=1+1", "+SUM(A1)", "-2+3", "@cmd", "\tTAB", "\rCR", "=HYPERLINK(\"http://example.org\")"]
TRIGGERS = ("=", "+", "-", "@", "\t", "\r")


def _injection_dataset() -> CodedDataset:
    frame = [FrameCode(1, "=Waste of money"), FrameCode(2, "+Plus side"), FrameCode(3, "plain")]
    question = CodedQuestion("why", "@Why?", frame, [{1}] * len(INJECTIONS), INJECTIONS)
    return CodedDataset([f"-id{i}" for i in range(len(INJECTIONS))], [question])


def test_csv_layout_and_frame_sibling(tmp_path):
    ds = small_dataset()
    data_path, frame_path = write_csv(ds, tmp_path / "out.csv", mention_columns=True)
    assert frame_path == tmp_path / "out-frame.csv"
    with open(data_path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    table = build_table(ds, mention_columns=True)
    assert rows[0] == list(table.data.columns)
    assert len(rows) == ds.n_respondents + 1
    first = dict(zip(rows[0], rows[1]))
    assert (first["respondent_id"], first["support"], first["why_c20"], first["why_m2"], first["why_m3"]) == ("101", "1", "1", "2", "")
    assert first["weight"] == "1.2"
    with open(frame_path, newline="", encoding="utf-8") as handle:
        frame = list(csv.DictReader(handle))
    assert frame[0]["variable"] == "why_c1" and frame[0]["net"] == "20"
    assert sum(r["kind"] == "net" for r in frame) == 2


def test_csv_injection_strings_are_inert(tmp_path):
    data_path, frame_path = write_csv(_injection_dataset(), tmp_path / "inj.csv", verbatims="raw")
    with open(data_path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    texts = [row[-1] for row in rows[1:]]
    assert texts == ["'" + t for t in INJECTIONS]
    assert all(row[0].startswith("'-id") for row in rows[1:])
    with open(frame_path, newline="", encoding="utf-8") as handle:
        cells = [cell for row in csv.reader(handle) for cell in row]
    assert not any(cell.startswith(TRIGGERS) for cell in cells)
    assert "'=Waste of money" in cells and "'@Why?" in cells


def test_xlsx_sheets_values_and_inert_text(tmp_path):
    [path] = write_xlsx(_injection_dataset(), tmp_path / "inj.xlsx", verbatims="raw")
    book = openpyxl.load_workbook(path)
    assert book.sheetnames == ["data", "frame", "variables"]
    data = book["data"]
    header = [c.value for c in data[1]]
    assert header[-1] == "why_text"
    for row, text in zip(data.iter_rows(min_row=2), INJECTIONS):
        cell = row[-1]
        assert cell.data_type == "s"  # a string, not a formula ("f")
        # Depending on the XML writer (lxml or not) a bare carriage return may read back as a line feed.
        assert cell.value in ("'" + text, "'" + text.replace("\r", "\n"))
        assert row[1].value == 1 and row[1].data_type == "n"
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f"
                if isinstance(cell.value, str):
                    assert not cell.value.startswith(TRIGGERS)
    variables = {r[0].value: r[1].value for r in book["variables"].iter_rows(min_row=2)}
    assert variables["why_c1"] == "why: =Waste of money"


def test_xlsx_numbers_and_missing_cells(tmp_path):
    [path] = write_xlsx(small_dataset(), tmp_path / "w.xlsx", mention_columns=True)
    sheet = openpyxl.load_workbook(path)["data"]
    header = [c.value for c in sheet[1]]
    row = dict(zip(header, [c.value for c in sheet[6]]))  # respondent 105: support missing
    assert row["respondent_id"] == 105 and row["support"] is None and row["weight"] == 0.75
    assert (row["why_m1"], row["why_m2"]) == (5, None)
    variables = {r[0].value: (r[2].value, r[3].value) for r in openpyxl.load_workbook(path)["variables"].iter_rows(min_row=2)}
    assert variables["support"][0].startswith("1=strongly oppose; 2=oppose")
    assert variables["support"][1] == "9"


def test_xlsx_row_limit_is_a_clear_error(tmp_path, monkeypatch):
    monkeypatch.setattr("opencode.export.tabular.XLSX_MAX_ROWS", 5)
    with pytest.raises(OpenCodeError, match="do not fit in one XLSX sheet"):
        write_xlsx(small_dataset(), tmp_path / "big.xlsx")
    assert XLSX_MAX_ROWS == 1_048_576 and list(tmp_path.iterdir()) == []
