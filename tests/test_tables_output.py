"""Rendering of frequency and banner tables: terminal text, CSV, XLSX and HTML; formula injection stays inert."""

import csv

import numpy as np
import openpyxl
import pytest

from opencode.analysis.tables.output import TABLE_CSS, format_table, layout_table, to_html, write_csv, write_xlsx
from opencode.analysis.tables.crosstab import BannerVariable, Code, CodedQuestion, Net, SurveyWeight, banner_table, code_frequencies
from opencode.errors import OpenCodeError

# OWASP "CSV Injection": text starting with = + - @ tab or carriage return must not run as a formula.
INJECTIONS = ["=HYPERLINK(\"http://x\",\"go\")", "+1+1", "-2+3", "@SUM(A1:A2)", "\tcmd", "\rcmd"]


def make_tables(weighted=False):
    n = 400
    rng = np.random.default_rng(21)
    area = rng.integers(1, 4, n).astype(float)
    area[:12] = 4.0  # a small column
    indicators = np.column_stack([rng.random(n) < np.where(area == 1, 0.7, 0.2)] + [rng.random(n) < 0.3 for _ in INJECTIONS])
    codes = [Code(1, "opening hours")] + [Code(i + 2, text) for i, text in enumerate(INJECTIONS)]
    answered = rng.random(n) < 0.95
    q = CodedQuestion("why", indicators, codes, answered, ~answered, nets=[Net(50, "=NET()", (1, 2))], label="Why <b>so</b>?")
    banner = [BannerVariable("area", area, [(1, "Ashmoor"), (2, "=cmd|' /C calc'!A0"), (3, "Coldwell"), (4, "Dunmere"), (5, "empty")],
                             label="Neighbourhood")]
    weight = SurveyWeight("wt", rng.uniform(0.5, 2.0, n)) if weighted else None
    return code_frequencies(q, weight), banner_table(q, banner, weight, lower_confidence=0.9)


def test_terminal_text_shows_letters_bases_and_marks():
    freq, table = make_tables()
    text = format_table(table, width=200)  # one block: every banner column on the row's line
    lines = text.splitlines()
    assert lines[0] == "Why <b>so</b>?: column % by banner"
    assert any(line.lstrip().startswith("Base: answered") for line in lines)
    row = next(line for line in lines if "opening hours" in line)
    assert " BC" in row or "BC " in row  # Ashmoor (A) higher than B and C
    assert "!" in row and " - " in row + " "
    assert "Row test q" in text and "exact test only, left out of the row test" in text
    assert "compared by Fisher's exact test (two-sided, 2 x 2 counts)" in text
    widths = {len(line) for line in lines[3:3 + len(table.rows) + 1]}
    assert len(widths) <= 2  # aligned columns
    ftext = format_table(freq)
    assert "% of mentions" in ftext and "Non-answers" in ftext and "  opening hours" in ftext


def test_weighted_text_shows_all_bases():
    freq, table = make_tables(weighted=True)
    for text in (format_table(freq), format_table(table)):
        assert "Effective base (Kish)" in text and "'wt'" in text
    assert "Weighted base" in format_table(table)


def test_csv_cells_are_inert(tmp_path):
    freq, table = make_tables()
    for t, name in ((freq, "freq.csv"), (table, "banner.csv")):
        path = write_csv(t, tmp_path / name)
        with open(path, newline="", encoding="utf-8") as handle:
            cells = [cell for row in csv.reader(handle) for cell in row]
        for text in INJECTIONS + ["=NET()"]:
            assert "'" + text in cells
            assert text not in cells
        assert all(not c.startswith(("=", "+", "@", "\t", "\r")) for c in cells)
        assert all(not c.startswith("-") or c == "-" or c.lstrip("-").replace(".", "").isdigit() for c in cells)
    with open(tmp_path / "banner.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    header = rows[2]
    assert header[:4] == ["Code", "Label", "Total", ""] and "'=cmd|' /C calc'!A0" in header
    hours = next(r for r in rows if len(r) > 1 and r[1] == "opening hours")
    assert float(hours[4]) == pytest.approx(round(100 * table.column_share[1, 1], 1))
    assert hours[5] == "BCD"  # D (Dunmere, 12 respondents) is compared by Fisher's exact test


def test_xlsx_cells_are_inert_and_formatted(tmp_path):
    freq, table = make_tables(weighted=True)
    path = write_xlsx([freq, table], tmp_path / "tables.xlsx")
    book = openpyxl.load_workbook(path)
    assert book.sheetnames == ["why codes", "why banner"]
    for sheet in book.worksheets:
        texts = [c for row in sheet.iter_rows() for c in row if isinstance(c.value, str)]
        assert all(c.data_type != "f" for c in texts)
        values = {c.value for c in texts}
        for text in INJECTIONS + ["=NET()"]:
            # Depending on the XML writer (with or without lxml) a stored carriage return may read back as a
            # line feed; either way the quote still leads.
            assert "'" + text in values or ("'" + text).replace("\r", "\n") in values
        assert all(not v.startswith(("=", "+", "@", "\t", "\r", "\n")) for v in values)
        assert sheet.freeze_panes is not None
    banner = book["why banner"]
    assert banner.freeze_panes == "C4"
    assert banner["A3"].value == "Code" and banner["A3"].font.bold
    hours = next(row for row in banner.iter_rows(min_row=4) if row[1].value == "opening hours")
    assert hours[4].number_format == "0.0%"
    assert hours[4].value == pytest.approx(table.column_share[1, 1])
    assert hours[5].value == "BCD"  # D compared by Fisher's exact test
    cells = [c.value for c in hours]
    assert "-" in cells and "!" in cells


def test_html_fragment_is_escaped():
    freq, table = make_tables()
    for t in (freq, table):
        fragment = to_html(t)
        assert fragment.startswith('<section class="oc-table-block">') and fragment.rstrip().endswith("</section>")
        assert fragment.count("<table") == 1 and "<b>" not in fragment and "Why &lt;b&gt;so&lt;/b&gt;?" in fragment
        assert 'class="oc-net"' in fragment and 'class="oc-base"' in fragment
    assert 'colspan="' in to_html(table) and "oc-small" in to_html(table)
    assert "oc-table" in TABLE_CSS


def test_layout_rows_follow_the_table():
    freq, table = make_tables()
    layout = layout_table(table)
    assert layout.header_rows == 2 and layout.row_kinds.count("net") == 1
    assert len(layout.rows) == 2 + 1 + len(table.rows)
    with pytest.raises(TypeError):
        layout_table("not a table")


def test_writing_into_a_missing_folder_is_a_clear_error(tmp_path):
    freq, table = make_tables()
    with pytest.raises(OpenCodeError, match="does not exist"):
        write_csv(freq, tmp_path / "nope" / "f.csv")
    with pytest.raises(OpenCodeError, match="does not exist"):
        write_xlsx(table, tmp_path / "nope" / "f.xlsx")
    with pytest.raises(OpenCodeError, match="no tables"):
        write_xlsx([], tmp_path / "f.xlsx")
