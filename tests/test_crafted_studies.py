"""Damaged or crafted study files: every verb says one clear line naming the file, exits non-zero, runs no
code and changes nothing (the study byte-identical afterwards). Also malformed JSON given by the user."""

from __future__ import annotations

import shutil
import sqlite3
from pathlib import Path

import pytest

from opencode.cli import main
from opencode.coding.assignments import assign
from opencode.study import survey_data
from opencode.study.store import Study
from helpers import file_digest, make_desk_study

# name -> (SQL that damages the study, what the message says)
CRAFTED = {
    "schema version abc": ("UPDATE meta SET value = 'abc' WHERE key = 'schema_version'",
                           "damaged study: its schema version 'abc' is not a version number"),
    "schema version negative": ("UPDATE meta SET value = '-3' WHERE key = 'schema_version'",
                                "its schema version '-3' is not a version number"),
    "schema version missing": ("DELETE FROM meta WHERE key = 'schema_version'", "it records no schema version"),
    "schema version from the future": ("UPDATE meta SET value = '999' WHERE key = 'schema_version'",
                                       "was written by a newer opencode"),
    "not our application id": ("PRAGMA application_id = 0", "is an SQLite database but not an oecode study"),
    "values blob garbage": ("UPDATE variable_data SET data = X'00112233'",
                            "damaged study: the values of variable 'support' cannot be read"),
    "values blob pickled": ("UPDATE variable_data SET data = X'934e554d505901007600" + "7b2764657363723a27" + "'",
                            "the values of variable 'support' cannot be read"),
    "values json not utf-8": ("UPDATE variable_data SET encoding = 'json', data = X'fffe00'",
                              "the values of variable 'support' cannot be read"),
    "values json not a list": ("UPDATE variable_data SET encoding = 'json', data = CAST('{\"a\": 1}' AS BLOB)",
                               "not a JSON list"),
    "values unknown encoding": ("PRAGMA ignore_check_constraints = 1; UPDATE variable_data SET encoding = 'pkl'",
                                "unknown encoding 'pkl'"),
    "code examples not json": ("UPDATE codes SET examples = '{bad'", "the examples of code 1 are not valid JSON"),
    "code examples not texts": ("UPDATE codes SET examples = '[1, 2]'", "are not a list of texts"),
    "verbatim is a blob": ("UPDATE verbatims SET text = X'ff00' WHERE id = 1",
                           "verbatim 1 of question 'why' holds binary data or a number"),
}

VERBS = {
    "schema version abc": ["info"], "schema version negative": ["tables"], "schema version missing": ["words"],
    "schema version from the future": ["report"], "not our application id": ["export"],
    "values blob garbage": ["tables"], "values blob pickled": ["export"], "values json not utf-8": ["tables"],
    "values json not a list": ["export"], "values unknown encoding": ["tables"],
    "code examples not json": ["frame"], "code examples not texts": ["report"], "verbatim is a blob": ["words"],
}
ARGS = {
    "info": ["info", "{s}"], "words": ["words", "{s}", "--question", "why"],
    "tables": ["tables", "{s}", "--question", "why", "--banner", "support"],
    "frame": ["frame", "list", "{s}", "--question", "why"],
    "export": ["export", "{s}", "--format", "csv", "--all-closed", "--out", "{o}"],
    "report": ["report", "{s}", "--out", "{o}"],
}


@pytest.fixture(scope="module")
def base_study(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("crafted")
    path = make_desk_study(folder)
    with Study.open(path) as study:
        verbatims = survey_data.verbatims(study, "why")
        for verbatim_id, code in zip(verbatims["verbatim_id"].tolist(), [1, 2, 3, 1, 3]):
            assign(study, int(verbatim_id), code, "final")
    return path


@pytest.mark.parametrize("name", sorted(CRAFTED))
def test_crafted_study_gives_one_line_and_stays_byte_identical(base_study, tmp_path, capsys, name):
    sql, message = CRAFTED[name]
    study = tmp_path / "crafted.study"
    shutil.copy(base_study, study)
    connection = sqlite3.connect(study)
    connection.executescript(sql)
    connection.commit()
    connection.close()
    before = file_digest(study)
    for verb in VERBS[name]:
        argv = [str(study) if a == "{s}" else str(tmp_path / "out.csv") if a == "{o}" else a for a in ARGS[verb]]
        code = main(argv)
        _, err = capsys.readouterr()
        lines = [line for line in err.splitlines() if not line.startswith(("  ", "\r", "warning:"))]
        assert code == 1, err
        assert message in err and "crafted.study" in err, err
        assert len(lines) == 1 and "Traceback" not in err
        assert file_digest(study) == before
        assert not (tmp_path / "out.csv").exists()


@pytest.mark.parametrize("content,message", [
    (b"{not json", "not valid JSON"), (b"[1, 2, 3]", "code entry 1 is int, expected an object"),
    (b"\xff\xfe\x00", "byte offset 0 (0xff) is not UTF-8"),
])
def test_malformed_frame_json_is_one_line(base_study, tmp_path, capsys, content, message):
    study = tmp_path / "s.study"
    shutil.copy(base_study, study)
    before = file_digest(study)
    source = tmp_path / "frame.json"
    source.write_bytes(content)
    code = main(["frame", "import", str(study), "--question", "why", "--file", str(source)])
    _, err = capsys.readouterr()
    assert code == 1 and "frame.json" in err and message in err and "Traceback" not in err, err
    assert file_digest(study) == before


def test_malformed_lexicon_file_is_one_line(base_study, tmp_path, capsys):
    study = tmp_path / "s.study"
    shutil.copy(base_study, study)
    before = file_digest(study)
    source = tmp_path / "lexicon.txt"
    source.write_bytes(b"\xff\xfe[broken\x00")
    code = main(["lexicon", "import", str(study), str(source), "--question", "why"])
    _, err = capsys.readouterr()
    assert code == 1 and "lexicon.txt" in err and "Traceback" not in err, err
    assert file_digest(study) == before


def test_malformed_settings_json_is_one_line(base_study, tmp_path, capsys):
    # A stored setting (the drivers choice of a question) that is not JSON: a clear error naming file and key.
    study = tmp_path / "s.study"
    shutil.copy(base_study, study)
    connection = sqlite3.connect(study)
    connection.execute("INSERT INTO settings (key, value) VALUES ('drivers:why', '{not json')")
    connection.commit()
    connection.close()
    before = file_digest(study)
    from opencode.analysis.drivers.study import drivers_choice
    from opencode.errors import NotAStudy

    with Study.open(study) as opened, pytest.raises(NotAStudy, match=r"s.study: damaged study: the setting "
                                                                     r"'drivers:why' is not valid JSON"):
        drivers_choice(opened, "why")
    assert file_digest(study) == before
