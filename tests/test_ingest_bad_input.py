"""Bad survey files: a clear message naming the file, row and column, a non-zero exit, the study unchanged."""

from __future__ import annotations

import sqlite3

import pytest

from opencode.cli import main
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey


def study_dump(path) -> list[str]:
    """Every row of a study (the schema and the data), to compare before and after a failed import."""
    if not path.exists():
        return ["absent"]
    connection = sqlite3.connect(path)
    try:
        return list(connection.iterdump())
    finally:
        connection.close()


def _write(tmp_path, name, content: bytes):
    path = tmp_path / name
    path.write_bytes(content)
    return path


BAD_FILES = {
    "missing id": (b"rid,why\nR1,fine\n,no id here\n", "missing respondent id in row 3"),
    "duplicated id": (b"rid,why\nR1,fine\nR2,ok\nR1,again\n", "'R1' appears more than once (row 2"),
    "empty file": (b"", "the file is empty"),
    "header only": (b"rid,why\n", "has a header but no data rows"),
    "ragged row": (b"rid,why\nR1,fine\nR2,too,many,fields\n", "line 3: has 4 fields but the header has 2"),
}


@pytest.mark.parametrize("case", sorted(BAD_FILES))
def test_bad_file_names_the_problem_and_creates_no_study(tmp_path, case):
    content, message = BAD_FILES[case]
    source = _write(tmp_path, "bad.csv", content)
    target = tmp_path / "new.study"
    with pytest.raises(OpenCodeError) as error:
        import_survey(target, source, ImportOptions("rid", ["why"]))
    assert message in str(error.value) and "bad.csv" in str(error.value)
    assert not target.exists()
    assert [p.name for p in tmp_path.iterdir()] == ["bad.csv"]  # no temporary leftovers


@pytest.mark.parametrize("case", sorted(BAD_FILES))
def test_bad_file_leaves_an_existing_study_exactly_as_it_was(tmp_path, small_csv, case):
    target = tmp_path / "kept.study"
    import_survey(target, small_csv, ImportOptions("rid", ["why"]))
    before = study_dump(target)
    content, message = BAD_FILES[case]
    with pytest.raises(OpenCodeError, match="bad.csv"):
        import_survey(target, _write(tmp_path, "bad.csv", content), ImportOptions("rid", ["why"]))
    assert study_dump(target) == before


def test_unknown_column_suggests_close_names(tmp_path, small_csv):
    with pytest.raises(OpenCodeError, match=r"no column named 'whyy' for --question \(did you mean why\?\)"):
        import_survey(tmp_path / "x.study", small_csv, ImportOptions("rid", ["whyy"]))


def test_forced_encoding_that_fails_names_the_line(tmp_path):
    source = _write(tmp_path, "latin.csv", "rid,why\nR1,ok\nR2,caf\u00e9\n".encode("cp1252"))
    with pytest.raises(OpenCodeError, match=r"line 3: byte 0xe9 cannot be read as utf-8"):
        import_survey(tmp_path / "x.study", source, ImportOptions("rid", ["why"], encoding="utf-8"))


def test_huge_single_cell_is_refused_with_row_and_column(tmp_path):
    big = b"x" * (50 * 1024 * 1024)
    source = _write(tmp_path, "big.csv", b"rid,why\nR1,fine\nR2," + big + b"\n")
    with pytest.raises(OpenCodeError, match=r"row 3 \(data row 2\), column why: a cell of 52.4 million characters"):
        import_survey(tmp_path / "x.study", source, ImportOptions("rid", ["why"]))


@pytest.mark.parametrize("name,content,message", [
    ("fake.xlsx", b"rid,why\nR1,x\n", "the name says an Excel .xlsx workbook but the content is not that"),
    ("fake.sav", b"rid,why\nR1,x\n", "the name says an SPSS .sav file"),
    ("fake.csv", b"PK\x03\x04" + b"\x00" * 40, "the name says a CSV text file but the content is an Excel"),
    ("fake.parquet", b"hello", "the name says a Parquet file"),
])
def test_file_that_is_not_what_its_extension_says(tmp_path, name, content, message):
    with pytest.raises(OpenCodeError, match=message):
        import_survey(tmp_path / "x.study", _write(tmp_path, name, content), ImportOptions("rid", ["why"]))


def test_bad_numbers_in_a_forced_numeric_column_name_the_row(tmp_path):
    source = _write(tmp_path, "n.csv", b"rid,why,visits\nR1,a,3\nR2,b,lots\n")
    with pytest.raises(OpenCodeError, match=r"row 3 \(data row 2\), column visits: 'lots' is not a number"):
        import_survey(tmp_path / "x.study", source, ImportOptions("rid", ["why"], kinds={"visits": "numeric"}))


def test_cli_prints_one_line_and_exits_non_zero(tmp_path, capsys):
    source = _write(tmp_path, "bad.csv", b"rid,why\n")
    code = main(["new", str(tmp_path / "x.study"), "--from", str(source), "--id", "rid", "--question", "why"])
    captured = capsys.readouterr()
    assert code == 1
    assert "oecode new:" in captured.err and "no data rows" in captured.err and "Traceback" not in captured.err
    assert not (tmp_path / "x.study").exists()
