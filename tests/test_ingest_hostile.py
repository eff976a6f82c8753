"""Hostile and broken survey files, built here byte by byte: each gets one clear line naming the file (and
the row, column, line or byte), a non-zero exit, and leaves an existing study byte-identical and no new
study or temporary file behind. Then the cases where the file is fine but used to be read wrongly: answers
kept exactly as typed, line breaks kept, cp1252 and UTF-16 read right.

Byte sequences for the encodings are the published code charts: Windows-1252 (£ A3, € 80, ½ BD, ñ F1,
é E9, curly quotes 91-94), ISO 8859-15 (½ position holds œ), UTF-8 and UTF-16 (Unicode standard).
"""

from __future__ import annotations

import io
from pathlib import Path

import pandas as pd
import pyreadstat
import pytest

from opencode.cli import main
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study
from helpers import file_digest


def _xlsx(rows, *, formulas=None, sheet="answers", extra_sheets=()) -> bytes:
    """A workbook written with openpyxl (the reference writer); `formulas` maps cell -> formula text, saved
    without a result, as a script writes it."""
    from openpyxl import Workbook

    book = Workbook()
    ws = book.active
    ws.title = sheet
    for row in rows:
        ws.append(row)
    for cell, formula in (formulas or {}).items():
        ws[cell] = formula
    for name in extra_sheets:
        book.create_sheet(name)
    buffer = io.BytesIO()
    book.save(buffer)
    return buffer.getvalue()


def _sav(frame: pd.DataFrame, tmp: Path) -> bytes:
    path = tmp / "ref.sav"
    pyreadstat.write_sav(frame, str(path))
    return path.read_bytes()


GOOD = [["rid", "why", "support"], ["A1", "fine", 1], ["A2", "ok", 2]]

# name -> (file name, content (bytes or a builder taking the temp folder), import options, expected message)
CASES: dict[str, tuple] = {
    # -- empty, truncated and mislabelled files --------------------------------------------------------------
    "empty": ("s.csv", b"", {}, "the file is empty"),
    "only spaces": ("s.csv", b"   \n\n  ", {}, "the file is empty"),
    "header only": ("s.csv", b"rid,why\n", {}, "has a header but no data rows"),
    "xlsx that is text": ("s.xlsx", b"rid,why\nA1,x\n", {}, "the name says an Excel .xlsx workbook"),
    "csv that is a zip": ("s.csv", b"PK\x03\x04" + b"\x00" * 60, {}, "the name says a CSV text file but the content"),
    "old xls": ("s.xls", b"\xd0\xcf\x11\xe0" + b"\x00" * 60, {}, "old binary Excel (.xls)"),
    "old xls named csv": ("s.csv", b"\xd0\xcf\x11\xe0" + b"\x00" * 60, {}, "old binary Excel (.xls)"),
    "sav that is text": ("s.sav", b"rid,why\nA1,x\n", {}, "the name says an SPSS .sav file"),
    "dta that is text": ("s.dta", b"rid,why\nA1,x\n", {}, "the name says a Stata .dta file"),
    "parquet that is text": ("s.parquet", b"hello there", {}, "the name says a Parquet file"),
    "unknown extension": ("s.pdf", b"%PDF-1.4 hello", {}, "unknown file type .pdf"),
    "truncated sav": ("s.sav", lambda tmp: _sav(pd.DataFrame({"rid": ["A1"], "why": ["x"]}), tmp)[:90], {},
                      "cannot be read as sav"),
    "truncated parquet": ("s.parquet", b"PAR1" + b"\x00" * 20, {}, "cannot be read as Parquet"),
    "zip that is no workbook": ("s.xlsx", b"PK\x03\x04" + b"\x00" * 100, {}, "cannot be read as an Excel workbook"),
    "truncated xlsx": ("s.xlsx", lambda tmp: _xlsx(GOOD)[:400], {}, "cannot be read as an Excel workbook"),
    "missing file": ("absent.csv", None, {}, "no such file"),
    # -- encodings --------------------------------------------------------------------------------------------
    "utf-8 with one bad byte": ("s.csv", "rid,why\nA1,café crème\nA2,naïve\n".encode() + b"A3,bad \xe9 here\n", {},
                                "line 4 (byte offset"),
    "utf-8 with bad bytes in two rows": (
        "s.csv", "rid,why\nA1,café\n".encode() + b"A2,\xff\nA3,ok\nA4,\xfe\n", {}, "2 byte(s) that are not UTF-8"),
    "utf-8 cut inside a character": ("s.csv", "rid,why\nA1,crème\nA2,é".encode()[:-1], {}, "not UTF-8"),
    "forced utf-8 on cp1252": ("s.csv", "rid,why\nA1,ok\nA2,caf\u00e9\n".encode("cp1252"), {"encoding": "utf-8"},
                               "line 3: byte 0xe9 cannot be read as utf-8"),
    "unknown encoding": ("s.csv", b"rid,why\nA1,x\n", {"encoding": "klingon-8"}, "unknown encoding 'klingon-8'"),
    "utf-16 without bom, odd length": ("s.csv", "rid,why\nA1,hello\n".encode("utf-16-le") + b"\x00\xd8\x41",
                                       {}, "looks like UTF-16 text"),
    "utf-16 with lone surrogate": ("s.csv", "rid,why\nA1,hi\n".encode("utf-16-le") + b"\x00\xdc\x41\x00",
                                   {}, "looks like UTF-16 text"),
    # -- headers and rows -------------------------------------------------------------------------------------
    "duplicate header": ("s.csv", b"rid,why,why\nA1,a,b\n", {}, "columns 2 and 3 are both named 'why'"),
    "duplicate header after spaces": ("s.csv", b"rid,why ,why\nA1,a,b\n", {}, "columns 2 and 3 are both named 'why'"),
    "duplicate id header": ("s.csv", b"rid,rid,why\nA1,A2,b\n", {}, "columns 1 and 2 are both named 'rid'"),
    "short row": ("s.csv", b"rid,why,support\nA1,fine,1\nA2,short\nA3,ok,2\n", {},
                  "row 3, line 3: has 2 fields but the header has 3"),
    "short rows counted": ("s.csv", b"rid,why,s\n" + b"".join(b"A%d,x\n" % i for i in range(6)), {},
                           "and 3 more rows"),
    "long row": ("s.csv", b"rid,why\nA1,fine\nA2,too,many,fields\n", {}, "line 3: has 4 fields but the header has 2"),
    "long first row shifts columns": ("s.csv", b"rid,why\nA1,x,extra\nA2,y,extra\n", {}, "row 2, line 2: has 3"),
    "unbalanced quote": ("s.csv", b'rid,why\nA1,"never closed\nA2,x\n', {}, "s.csv"),
    "line break lost in export": ("s.csv", b"rid,why,support\nA1,first half\nsecond half,1\nA2,ok,2\n", {},
                                  "row 2, line 2: has 2 fields"),
    "semicolon file read with comma": ("s.csv", b"rid;why;support\nA1;a,b;1\nA2;c;2\n", {"delimiter": ","},
                                       "no column named 'rid' for --id (columns: rid;why;support)"),
    # -- ids --------------------------------------------------------------------------------------------------
    "missing id": ("s.csv", b"rid,why\nA1,fine\n,no id\n", {}, "missing respondent id in row 3"),
    "duplicate id": ("s.csv", b"rid,why\nA1,fine\nA2,ok\nA1,again\n", {}, "'A1' appears more than once (row 2"),
    "ids 1 and 1.0": ("s.csv", b"rid,why\n1,fine\n2,ok\n1.0,again\n", {},
                      "respondent id '1' appears more than once (row 2 (data row 1), row 4 (data row 3)) "
                      "(written '1', '1.0': one number)"),
    "ids 7.00 and 7": ("s.csv", b"rid,why\n7.00,a\n7,b\n", {}, "(written '7.00', '7': one number)"),
    "id NULL": ("s.csv", b"rid,why\nA1,a\nNULL,b\n", {}, "missing respondent id in row 3"),
    "id column unknown": ("s.csv", b"respondent,why\nA1,a\n", {}, "no column named 'rid' for --id"),
    "question column unknown": ("s.csv", b"rid,whyy\nA1,a\n", {}, "(did you mean whyy?)"),
    "id is the question": ("s.csv", b"rid,why\nA1,a\n", {"questions": ["rid"]}, "cannot be both the id and a question"),
    # -- cells ------------------------------------------------------------------------------------------------
    "text in a numeric column": ("s.csv", b"rid,why,visits\nA1,a,3\nA2,b,lots\n", {"kinds": {"visits": "numeric"}},
                                 "row 3 (data row 2), column visits: 'lots' is not a number"),
    "text in the weight": ("s.csv", b"rid,why,wt\nA1,a,1.2\nA2,b,heavy\n", {"weight": "wt"},
                           "row 3 (data row 2), column wt: 'heavy' is not a number"),
    "bad date": ("s.csv", b"rid,why,d\nA1,a,2024-01-02\nA2,b,yesterday\n", {"kinds": {"d": "date"}},
                 "column d: 'yesterday' is not a date"),
    "unknown kind": ("s.csv", b"rid,why,k\nA1,a,1\n", {"kinds": {"k": "colour"}}, "unknown kind 'colour'"),
    "dichotomy not 0/1": ("s.csv", b"rid,why,m1,m2\nA1,a,1,0\nA2,b,2,1\n", {"multi": {"m": ["m1", "m2"]}},
                          "column m1: 2 is not 0 or 1"),
    "huge cell": ("s.csv", b"rid,why\nA1,fine\nA2," + b"x" * 2_100_000 + b"\n", {"max_cell_chars": 1_000_000},
                  "row 3 (data row 2), column why: a cell of 2.1 million characters"),
    "weight column unknown": ("s.csv", b"rid,why\nA1,a\n", {"weight": "wt"}, "no column named 'wt' for --weight"),
    # -- data maps (--labels) ---------------------------------------------------------------------------------
    "labels file without code column": ("s.csv", b"rid,why,support\nA1,a,1\n",
                                        {"labels_file": ("map.csv", b"variable,label\nsupport,Support\n")},
                                        "needs the columns variable, label, code"),
    "labels file with text code": ("s.csv", b"rid,why,support\nA1,a,1\n",
                                   {"labels_file": ("map.csv", b"variable,label,code,value_label\nsupport,,one,x\n")},
                                   "row 2, column code: 'one' is not a number"),
    "labels file naming no column": ("s.csv", b"rid,why,support\nA1,a,1\n",
                                     {"labels_file": ("map.csv", b"variable,code,value_label\nsuport,1,x\n")},
                                     "variable 'suport' is not a column of s.csv"),
    "labels file with short row": ("s.csv", b"rid,why,support\nA1,a,1\n",
                                   {"labels_file": ("map.csv", b"variable,code,value_label\nsupport,1\n")},
                                   "map.csv: row 2, line 2: has 2 fields but the header has 3"),
    # -- spreadsheets -----------------------------------------------------------------------------------------
    "xlsx formula without result": ("s.xlsx", lambda tmp: _xlsx(GOOD, formulas={"B3": '=CONCAT("o","k")'}), {},
                                    "sheet 'answers', row 3, column B (why): a formula with no saved result"),
    "xlsx formula in a closed column": ("s.xlsx", lambda tmp: _xlsx(GOOD, formulas={"C2": "=1+1", "C3": "=2+2"}),
                                       {}, "row 2, column C (support): a formula with no saved result (=1+1); "
                                       "1 more formula cells like it"),
    "xlsx duplicate header": ("s.xlsx", lambda tmp: _xlsx([["rid", "why", "why"], ["A1", "a", "b"]]), {},
                              "columns B and C are both named 'why'"),
    "xlsx header only": ("s.xlsx", lambda tmp: _xlsx([["rid", "why"]]), {}, "has a header but no data rows"),
    "xlsx empty sheet": ("s.xlsx", lambda tmp: _xlsx([]), {}, "sheet 'answers' is empty"),
    "xlsx sheet unknown": ("s.xlsx", lambda tmp: _xlsx(GOOD), {"sheet": "Answers 2"},
                           "no sheet named 'Answers 2' (sheets: answers)"),
    "xlsx sheet number too high": ("s.xlsx", lambda tmp: _xlsx(GOOD), {"sheet": "3"}, "there is no sheet number 3"),
    "xlsx duplicate id after empty rows": ("s.xlsx", lambda tmp: _xlsx([["rid", "why"], ["A1", "a"], [None, None],
                                                                        ["A1", "b"]]), {},
                                           "'A1' appears more than once (row 2 (data row 1), row 4 (data row 2))"),
    "xlsx missing id": ("s.xlsx", lambda tmp: _xlsx([["rid", "why"], ["A1", "a"], [None, "b"]]), {},
                        "missing respondent id in row 3"),
    # -- labelled formats -------------------------------------------------------------------------------------
    "sav without the id": ("s.sav", lambda tmp: _sav(pd.DataFrame({"case": ["A1"], "why": ["x"]}), tmp), {},
                           "no column named 'rid' for --id"),
    "sav with duplicate ids": ("s.sav", lambda tmp: _sav(pd.DataFrame({"rid": ["A1", "A1"], "why": ["x", "y"]}),
                                                         tmp), {}, "'A1' appears more than once (case 1, case 2)"),
}


def _build(tmp_path: Path, name: str) -> tuple[Path, dict, str]:
    file_name, content, options, message = CASES[name]
    folder = tmp_path / "in"
    folder.mkdir(exist_ok=True)
    source = folder / file_name
    if content is not None:
        source.write_bytes(content(folder) if callable(content) else content)
        (folder / "ref.sav").unlink(missing_ok=True)
    options = dict(options)
    if "labels_file" in options:
        map_name, map_bytes = options["labels_file"]
        (folder / map_name).write_bytes(map_bytes)
        options["labels_file"] = folder / map_name
    return source, options, message


def test_there_are_at_least_sixty_bad_files():
    assert len(CASES) >= 60


@pytest.fixture(scope="module")
def kept_study(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("kept")
    (folder / "first.csv").write_text("rid,why,support,visits,m,d,k,m1,m2\nZ9,a first answer,1,2,1,2024-01-01,1,0,1\n",
                                      encoding="utf-8")
    import_survey(folder / "kept.study", folder / "first.csv", ImportOptions("rid", ["why"]))
    return folder / "kept.study"


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_file_into_a_new_study_leaves_nothing(tmp_path, name):
    source, options, message = _build(tmp_path, name)
    options = {"id_column": "rid", "questions": ["why"], **options}
    target = tmp_path / "out" / "new.study"
    target.parent.mkdir()
    with pytest.raises(OpenCodeError) as error:
        import_survey(target, source, ImportOptions(**options))
    text = str(error.value)
    assert message in text and (source.name in text or "map.csv" in text), text
    assert "\n" not in text
    assert list(target.parent.iterdir()) == []  # no study, no temporary file


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_file_leaves_an_existing_study_byte_identical(tmp_path, kept_study, name):
    study = tmp_path / "kept.study"
    study.write_bytes(kept_study.read_bytes())
    before = file_digest(study)
    source, options, message = _build(tmp_path, name)
    options = {"id_column": "rid", "questions": ["why"], **options}
    with pytest.raises(OpenCodeError, match=r".") as error:
        import_survey(study, source, ImportOptions(**options))
    assert message in str(error.value)
    assert file_digest(study) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in", "kept.study"]


@pytest.mark.parametrize("name", ["utf-8 with one bad byte", "duplicate header", "short row", "ids 1 and 1.0",
                                  "xlsx formula without result"])
def test_cli_says_one_line_and_exits_non_zero(tmp_path, kept_study, capsys, name):
    study = tmp_path / "kept.study"
    study.write_bytes(kept_study.read_bytes())
    before = file_digest(study)
    source, options, message = _build(tmp_path, name)
    code = main(["new", str(study), "--from", str(source), "--id", "rid", "--question", "why"])
    err = capsys.readouterr().err
    assert code == 1 and message in err and "Traceback" not in err
    assert len([line for line in err.splitlines() if not line.startswith("  ..")]) == 1
    assert file_digest(study) == before


# -- files that are fine and must be read exactly -------------------------------------------------------------
def _texts(tmp_path: Path, content: bytes, name: str = "s.csv", **options) -> tuple[list[str], list[bool], Study]:
    source = tmp_path / name
    source.write_bytes(content)
    target = tmp_path / "t.study"
    report = import_survey(target, source, ImportOptions("rid", ["why"], **options))
    with Study.open(target) as study:
        frame = survey_data.verbatims(study, "why")
    return frame["text"].tolist(), frame["nonanswer"].tolist(), report


def test_none_null_nan_are_answers_kept_as_typed(tmp_path):
    texts, flags, report = _texts(tmp_path, b"rid,why\nA1,None\nA2,NULL\nA3,nan\nA4,NaN\nA5,\\N\nA6,\nA7,N/A\n")
    # the empty cell and \\N (a database dump's null marker) are the format's own missing values
    assert texts == ["None", "NULL", "nan", "NaN", "", "", "N/A"]
    assert flags[4] and flags[5]
    assert not any(flags[i] for i in (1, 2, 3))  # NULL, nan and NaN are text, not non-answers


def test_xlsx_keeps_none_na_and_null_as_text(tmp_path):
    content = _xlsx([["rid", "why"], ["A1", "None"], ["A2", "NA"], ["A3", "NULL"], ["A4", None], ["A5", "n/a"]])
    texts, flags, _ = _texts(tmp_path, content, "s.xlsx")
    assert texts == ["None", "NA", "NULL", "", "n/a"]
    assert flags[3] and flags[4]  # empty is missing; "n/a" is flagged a non-answer, text kept


def test_xlsx_formula_with_a_saved_result_reads_the_result(tmp_path):
    # openpyxl cannot save a cached result; write the sheet XML by hand, as a spreadsheet program would.
    book = _xlsx(GOOD, formulas={"B3": '=CONCAT("o","k")'})
    import zipfile

    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(book)) as source, zipfile.ZipFile(out, "w") as target:
        for item in source.infolist():
            data = source.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                data = data.replace(b'<f>CONCAT("o","k")</f><v></v>', b'<f>CONCAT("o","k")</f><v>ok</v>')
                data = data.replace(b'<c r="B3"><f>', b'<c r="B3" t="str"><f>')
            target.writestr(item, data)
    texts, _, _ = _texts(tmp_path, out.getvalue(), "s.xlsx")
    assert texts == ["fine", "ok"]


def test_lone_carriage_return_in_a_quoted_answer_is_a_line_break(tmp_path):
    texts, _, _ = _texts(tmp_path, b'rid,why\nA1,"first\rsecond"\nA2,"a\r\nb"\nA3,"c\nd"\n')
    assert texts == ["first\nsecond", "a\nb", "c\nd"]


def test_ids_written_as_decimals_are_the_same_respondent_in_a_later_wave(tmp_path):
    (tmp_path / "w1.csv").write_bytes(b"rid,why\n1,first wave\n2,another\n")
    (tmp_path / "w2.xlsx").write_bytes(_xlsx([["rid", "why"], [1.0, "first wave"], [3.0, "new"]]))
    target = tmp_path / "t.study"
    import_survey(target, tmp_path / "w1.csv", ImportOptions("rid", ["why"]))
    report = import_survey(target, tmp_path / "w2.xlsx", ImportOptions("rid", ["why"]))
    assert (report.respondents_added, report.respondents_updated) == (1, 1)
    with Study.open(target) as study:
        assert survey_data.respondent_keys(study) == ["1", "2", "3"]


# Windows-1252 code chart: £ A3, € 80, ½ BD, ñ F1, é E9, ‘ 91, ’ 92, “ 93, ” 94; ISO 8859-15 puts œ at BD.
CP1252_BYTES = (b"rid,why\nA1,\xa35 a week is too dear \x80 3\nA2,\"\xbd price for students, ma\xf1ana\"\n"
                b"A3,\"caf\xe9 \x93closed\x94 at six, it\x92s a pity \x91sadly\x91\"\n")


def test_cp1252_bytes_read_as_cp1252(tmp_path):
    texts, _, report = _texts(tmp_path, CP1252_BYTES)
    assert report.encoding == "cp1252"
    assert texts == ["£5 a week is too dear € 3", "½ price for students, mañana",
                     "café \u201cclosed\u201d at six, it\u2019s a pity \u2018sadly\u2018"]


def test_utf8_is_never_read_as_a_legacy_code_page(tmp_path):
    texts, _, report = _texts(tmp_path, "rid,why\nA1,café crème\nA2,½ price £5 €3 mañana “quoted”\n".encode())
    assert report.encoding == "utf-8" and texts[0] == "café crème" and "Ã" not in "".join(texts)


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_utf16_without_bom_is_read_and_said(tmp_path, codec, capsys):
    source = tmp_path / "s.csv"
    source.write_bytes("rid,why,support\nA1,café crème,1\nA2,ñ ½,2\n".encode(codec))
    code = main(["new", str(tmp_path / "t.study"), "--from", str(source), "--id", "rid", "--question", "why"])
    out = capsys.readouterr().out
    assert code == 0 and f"read as {codec}" in out
    with Study.open(tmp_path / "t.study") as study:
        assert survey_data.verbatims(study, "why")["text"].tolist() == ["café crème", "ñ ½"]


def test_central_european_file_is_still_read_as_cp1250(tmp_path):
    texts, _, report = _texts(tmp_path, "rid,why\nA1,zażółć gęślą jaźń łódź\n".encode("cp1250"))
    assert report.encoding == "cp1250" and texts == ["zażółć gęślą jaźń łódź"]


def test_quoted_line_breaks_and_delimiters_do_not_count_as_fields(tmp_path):
    texts, _, _ = _texts(tmp_path, b'rid,why,support\nA1,"one, two\nthree ""quoted""",1\nA2,"x",2\n')
    assert texts == ['one, two\nthree "quoted"', "x"]


def test_bad_bytes_message_names_lines_and_offsets(tmp_path):
    raw = "rid,why\nA1,café\n".encode() + b"A2,\xff\n"
    source = tmp_path / "s.csv"
    source.write_bytes(raw)
    with pytest.raises(OpenCodeError) as error:
        import_survey(tmp_path / "t.study", source, ImportOptions("rid", ["why"]))
    offset = raw.index(b"\xff")
    assert f"line 3 (byte offset {offset}, 0xff)" in str(error.value)
