"""push and pull: a study file to a real PostgreSQL server and back, every table row for row (audit included)."""

from __future__ import annotations

import shlex
import shutil
import sqlite3

import pytest

from helpers import file_digest
from opencode.cli import main
from opencode.coding import assignments as coding
from opencode.study import survey_data
from opencode.study.store import Study, study_exists
from opencode.study.transfer import same_rows, study_tables, table_rows
from team_server import study_name

#: Commands that leave rows in every table of a study (lexicons, matrix cache, theme runs, models, samples...).
FILLING = [
    "lexicon stop-add STUDY quite --question why",
    "lexicon merge STUDY 'later,latest->late' --study-default",
    "words STUDY --question why --top 5",
    "phrases suggest STUDY --question why --top 5",
    "themes fit STUDY --question why --k 4",
    "sample draw STUDY --question why --name check --n 40",
    "sample assign STUDY --question why --name check --coders ash,bryn",
    "model train STUDY --question why --coder ash",
    "drivers STUDY --question why --outcome support --split top2 --indicators safe staff",
]


@pytest.fixture(scope="module")
def rich_study(demo_base, tmp_path_factory):
    """The double-coded demo after a day's work: every table of the study holds rows."""
    path = tmp_path_factory.mktemp("rich") / "rich.study"
    shutil.copyfile(demo_base, path)
    for command in FILLING:
        assert main([a.replace("STUDY", str(path)) for a in shlex.split(command)]) == 0, command
    with Study.open(path) as study:
        first = int(survey_data.verbatims(study, "why")["verbatim_id"].iloc[0])
        coding.set_note(study, first, "ash", "ask the lead: \"staff\" or \"safety\"? ünïcode ✓")
        coding.mark_done(study, first, "ash")
        study.set_setting("desk.bar", {"value": float("nan"), "list": [1, 2.5, None]})
        empty = [table for table, _ in study_tables(study) if not table_rows(study, table)]
    assert not empty, f"the test study should fill every table; empty: {empty}"
    return path


def test_a_round_trip_gives_back_every_table_row_for_row(pg_server, rich_study, tmp_path, capsys):
    address = pg_server.address(study=study_name("trip"))
    before = file_digest(rich_study)
    assert main(["push", str(rich_study), address]) == 0
    assert "audit rows" in capsys.readouterr().out
    back = tmp_path / "back.study"
    assert main(["pull", address, str(back)]) == 0
    assert file_digest(rich_study) == before  # pushing only reads the file
    with Study.open(rich_study) as original, Study.open(address) as server, Study.open(back) as pulled:
        tables = [t for t, _ in study_tables(original)]
        assert "audit" in tables and len(tables) >= 20
        assert same_rows(original, server) == []
        assert same_rows(original, pulled) == []
        assert table_rows(pulled, "audit") == table_rows(original, "audit")
    # the file's own schema too: the same tables, columns and indexes as a file made by this oecode
    schema = "SELECT type, name, sql FROM sqlite_master ORDER BY name"
    with sqlite3.connect(rich_study) as a, sqlite3.connect(back) as b:
        assert a.execute(schema).fetchall() == b.execute(schema).fetchall()
        assert b.execute("PRAGMA application_id").fetchone() == a.execute("PRAGMA application_id").fetchone()


def test_the_same_rows_check_can_fail(pg_server, rich_study, tmp_path):
    # a test that compares tables must notice one changed cell, one extra row and one changed audit payload
    for i, statement in enumerate(("UPDATE notes SET text = text || '!'",
                                   "INSERT INTO settings (key, value) VALUES ('x', '1')",
                                   "UPDATE audit SET payload = '{}' WHERE id = (SELECT MAX(id) FROM audit)")):
        copy = tmp_path / f"changed{i}.study"
        shutil.copyfile(rich_study, copy)
        connection = sqlite3.connect(copy)
        connection.execute(statement)
        connection.commit()
        connection.close()
        with Study.open(rich_study) as a, Study.open(copy) as b:
            assert len(same_rows(a, b)) == 1, statement


def test_push_refuses_to_overwrite_unless_asked(pg_server, demo_copy, capsys):
    address = pg_server.address(study=study_name("twice"))
    assert main(["push", str(demo_copy), address]) == 0
    assert main(["push", str(demo_copy), address]) == 1
    assert "exists already" in capsys.readouterr().err
    with Study.open(demo_copy) as study:
        coding.mark_done(study, int(survey_data.verbatims(study, "why")["verbatim_id"].iloc[5]), "kit")
    assert main(["push", str(demo_copy), address, "--replace"]) == 0
    with Study.open(demo_copy) as a, Study.open(address) as b:
        assert same_rows(a, b) == []


def test_a_failed_push_leaves_no_study_behind(pg_server, demo_copy, capsys):
    # a file holding an assignment of a code that does not exist (written with foreign keys off)
    with sqlite3.connect(demo_copy) as connection:
        connection.execute("PRAGMA foreign_keys = OFF")
        connection.execute("UPDATE assignments SET code_id = 9999 WHERE id = (SELECT MIN(id) FROM assignments)")
    address = pg_server.address(study=study_name("broken"))
    assert main(["push", str(demo_copy), address]) == 1
    assert "pointing nowhere" in capsys.readouterr().err
    assert not study_exists(address)


def test_pull_refuses_an_existing_file_and_a_file_address(pg_server, demo_copy, tmp_path, capsys):
    address = pg_server.address(study=study_name("pull"))
    assert main(["push", str(demo_copy), address]) == 0
    target = tmp_path / "there.study"
    target.write_bytes(b"someone's file")
    assert main(["pull", address, str(target)]) == 1
    assert "already exists" in capsys.readouterr().err and target.read_bytes() == b"someone's file"
    assert main(["pull", address, str(tmp_path / "wrong.name")]) == 1
    assert main(["pull", str(demo_copy), str(tmp_path / "x.study")]) == 1
    assert "not a server address" in capsys.readouterr().err
    assert main(["push", str(demo_copy), str(tmp_path / "y.study")]) == 1
    assert not list(tmp_path.glob(".*.study"))  # no temporary file left behind
