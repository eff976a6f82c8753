"""The study file: SQLite settings, migrations, refusal of foreign or newer files, locks, audit."""

from __future__ import annotations

import sqlite3

import pytest

from opencode.errors import OpenCodeError
from opencode.study.schema import SCHEMA_VERSION
from opencode.study.store import Study


def test_new_study_uses_wal_foreign_keys_and_current_schema(tmp_path):
    with Study.create(tmp_path / "a.study") as study:
        assert study._db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert study._db.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert study.schema_version() == SCHEMA_VERSION
    with Study.open(tmp_path / "a.study") as study:
        assert study.schema_version() == SCHEMA_VERSION


def test_name_must_end_in_study(tmp_path):
    with pytest.raises(OpenCodeError, match=r"must end in \.study"):
        Study.create(tmp_path / "a.db")


def test_file_that_is_not_sqlite_is_refused(tmp_path):
    path = tmp_path / "fake.study"
    path.write_text("hello")
    with pytest.raises(OpenCodeError, match="not a study file"):
        Study.open(path)


def test_sqlite_file_from_elsewhere_is_refused(tmp_path):
    path = tmp_path / "other.study"
    sqlite3.connect(path).execute("CREATE TABLE t (x)").connection.commit()
    with pytest.raises(OpenCodeError, match="not an oecode study"):
        Study.open(path)


def test_study_from_newer_version_is_refused(tmp_path):
    path = tmp_path / "new.study"
    with Study.create(path) as study, study.transaction():
        study._db.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(SCHEMA_VERSION + 5),))
    with pytest.raises(OpenCodeError, match="newer opencode"):
        Study.open(path)


def test_failed_transaction_leaves_nothing(tmp_path):
    with Study.create(tmp_path / "t.study") as study:
        with pytest.raises(RuntimeError):
            with study.transaction():
                study._db.execute("INSERT INTO settings (key, value) VALUES ('x', '1')")
                raise RuntimeError("boom")
        assert study.get_setting("x") is None


def test_second_writer_gets_a_clear_lock_message(tmp_path, monkeypatch):
    path = tmp_path / "l.study"
    Study.create(path).close()
    holder = sqlite3.connect(path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    try:
        study = Study.open(path)
        study._db.execute("PRAGMA busy_timeout = 100")
        with pytest.raises(OpenCodeError, match="locked"):
            with study.transaction():
                pass
        study.close()
    finally:
        holder.rollback()
        holder.close()


def test_settings_are_audited(tmp_path):
    with Study.create(tmp_path / "s.study") as study:
        study.set_setting("language", "english", actor="ash")
        assert study.get_setting("language") == "english"
        actor, action = study._db.execute("SELECT actor, action FROM audit ORDER BY id DESC").fetchone()
        assert (actor, action) == ("ash", "set")
