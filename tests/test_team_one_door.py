"""All SQL lives in opencode/study/ (the one door to the data, so a second store plugs in there).

Scans every string constant (f-string parts and implicitly joined literals included) of the shipped package
outside study/ for SQL statements, and every attribute access for the study's private connection.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import opencode

PACKAGE = Path(opencode.__file__).parent
STUDY = PACKAGE / "study"

#: Statement shapes, upper-case keywords as the project writes SQL (prose such as "select from" is not matched).
SQL_SHAPES = re.compile(
    r"\bSELECT\b[\s\S]*?\bFROM\b"
    r"|\bINSERT\s+(?:OR\s+[A-Z]+\s+)?INTO\b"
    r"|\bUPDATE\s+\w+\s+SET\b"
    r"|\bDELETE\s+FROM\b"
    r"|\b(?:CREATE|DROP|ALTER)\s+(?:UNIQUE\s+|TEMP\s+|TEMPORARY\s+)?(?:TABLE|INDEX|VIEW|TRIGGER|SCHEMA|ROLE|POLICY)\b"
    r"|\bPRAGMA\s+\w+"
    r"|\b(?:GRANT|REVOKE)\s+\w+[\s\S]*?\b(?:ON|TO|FROM)\b"
    r"|\bLISTEN\s+\w+|\bNOTIFY\s+\w+")


def sql_in(source: str) -> list[tuple[int, str]]:
    """(line, text) of every string constant in Python source that holds an SQL statement shape."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and SQL_SHAPES.search(node.value):
            found.append((node.lineno, node.value[:70]))
    return found


def private_connection_uses(source: str) -> list[int]:
    """Lines reading the study's private connection attribute `_db`."""
    return [node.lineno for node in ast.walk(ast.parse(source))
            if isinstance(node, ast.Attribute) and node.attr == "_db"]


def _outside_study() -> list[Path]:
    return [p for p in sorted(PACKAGE.rglob("*.py")) if STUDY not in p.parents]


def test_the_scanner_sees_sql_in_every_form_the_code_could_hide_it():
    # the scan must be able to fail: each form below is SQL a module could carry
    samples = [
        'q = "SELECT id FROM codes WHERE frame_id = ?"',
        'q = ("SELECT id "\n     "FROM codes")',                       # implicitly joined literals
        'q = f"UPDATE codes SET {col} = ? WHERE id = ?"',              # an f-string part
        'q = "INSERT OR REPLACE INTO notes (a) VALUES (?)"',
        'q = "DELETE FROM assignments"',
        'q = "CREATE TABLE x (a TEXT)"',
        'q = "PRAGMA journal_mode"',
        'q = "GRANT SELECT ON ALL TABLES IN SCHEMA s TO r"',
        'q = "LISTEN oecode_s"',
    ]
    for sample in samples:
        assert sql_in(sample), sample
    prose = ['"""Select the codes from the frame and update the counts."""', 'm = "delete from the list"',
             'm = "insert into the frame a new code"']
    for sample in prose:
        assert not sql_in(sample), sample
    assert private_connection_uses("x = study._db.execute('')") == [1]


def test_no_sql_outside_the_study_package():
    offenders = [f"{path.relative_to(PACKAGE.parent)}:{line}: {text!r}"
                 for path in _outside_study() for line, text in sql_in(path.read_text(encoding="utf-8"))]
    assert not offenders, "SQL outside opencode/study/:\n" + "\n".join(offenders)


def test_no_module_outside_the_study_package_touches_the_connection():
    offenders = [f"{path.relative_to(PACKAGE.parent)}:{line}"
                 for path in _outside_study() for line in private_connection_uses(path.read_text(encoding="utf-8"))]
    assert not offenders, "the study connection used outside opencode/study/:\n" + "\n".join(offenders)


def test_the_connection_is_private(tmp_path):
    from opencode.study.store import Study

    with Study.create(tmp_path / "x.study") as study:
        assert not hasattr(study, "db")
        assert study._db is not None
