"""Open, create and migrate a study file (one SQLite database), with transactions and the audit trail."""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import sqlite3
from pathlib import Path
from typing import Any, Iterator

from opencode import __version__
from opencode.errors import BadInput, NotAStudy, OpenCodeError, StudyBusy, StudyNotFound, WriteFailed
from opencode.files.targets import protect
from opencode.study.schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION

SUFFIX = ".study"
BUSY_TIMEOUT_MS = 5000


def now() -> str:
    """The current UTC time as ISO 8601 text (what the study stores)."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="milliseconds")


def _is_locked(error: sqlite3.OperationalError) -> bool:
    text = str(error).lower()
    return "locked" in text or "busy" in text


class Study:
    """One open study file. Use `Study.open` / `Study.create`; close it (or use `with`) when done."""

    def __init__(self, path: Path, connection: sqlite3.Connection):
        self.path = path
        self.db = connection

    # -- opening ---------------------------------------------------------------------------------------------
    @classmethod
    def create(cls, path: str | os.PathLike, *, overwrite: bool = False) -> "Study":
        """Create a new empty study file at `path` (must end in .study)."""
        target = Path(path)
        if target.suffix != SUFFIX:
            raise BadInput(f"{target}: a study file name must end in {SUFFIX}")
        if target.exists() and not overwrite:
            raise BadInput(f"{target}: already exists (choose another name, or import into it to merge)")
        if not target.parent.exists():
            raise BadInput(f"{target}: the folder {target.parent} does not exist")
        if overwrite:
            for extra in ("", "-wal", "-shm"):
                with contextlib.suppress(FileNotFoundError):
                    os.remove(str(target) + extra)
        connection = _connect(target)
        study = cls(target, connection)
        study._migrate(from_version=0)
        with study.transaction():
            study.db.execute("INSERT INTO meta (key, value) VALUES ('created_at', ?), ('created_by', ?)",
                             (now(), f"opencode {__version__}"))
        return study

    @classmethod
    def open(cls, path: str | os.PathLike) -> "Study":
        """Open an existing study, migrating it forward if it was written by an older opencode."""
        target = Path(path)
        if not target.is_file():
            raise StudyNotFound(f"{target}: no such study file")
        with open(target, "rb") as handle:
            header = handle.read(16)
        if header != b"SQLite format 3\x00":
            raise NotAStudy(f"{target}: is not a study file (not an SQLite database)")
        connection = _connect(target)
        study = cls(target, connection)
        try:
            app_id = connection.execute("PRAGMA application_id").fetchone()[0]
            if app_id != APPLICATION_ID:
                raise NotAStudy(f"{target}: is an SQLite database but not an oecode study")
            version = study.schema_version()
            if version == 0:
                raise NotAStudy(f"{target}: damaged study: it records no schema version")
            if version > SCHEMA_VERSION:
                raise OpenCodeError(
                    f"{target}: was written by a newer opencode (study version {version}, this one reads up to "
                    f"{SCHEMA_VERSION}); upgrade opencode to open it")
            if version < SCHEMA_VERSION:
                study._migrate(from_version=version)
            protect([target], "a study file")
            protect(study.import_sources(), f"a survey file the study {target.name} was imported from")
        except BaseException:
            connection.close()
            raise
        return study

    def import_sources(self) -> list[Path]:
        """The survey files this study was imported from (absolute where recorded), so no output replaces them."""
        found: list[Path] = []
        for (payload,) in self.db.execute("SELECT payload FROM audit WHERE actor = 'import' AND action = 'import'"):
            try:
                data = json.loads(payload)
            except (TypeError, ValueError):
                continue
            source = data.get("source_path") or data.get("source") if isinstance(data, dict) else None
            if isinstance(source, str) and source:
                found.append(Path(source))
                if not Path(source).is_absolute():
                    found.append(self.path.parent / source)
        return found

    def close(self) -> None:
        """Close the connection (the study stays consistent whether or not this runs)."""
        self.db.close()

    def __enter__(self) -> "Study":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @contextlib.contextmanager
    def private_bulk_load(self) -> Iterator["Study"]:
        """Fill a study no one else can see yet (a temporary file) without journaling; WAL again afterwards.

        Only for a file that is thrown away if anything fails: without a journal a failed write is not undone.
        """
        self.db.execute("PRAGMA journal_mode = OFF")
        self.db.execute("PRAGMA synchronous = OFF")
        try:
            yield self
        finally:
            self.db.execute("PRAGMA journal_mode = WAL")
            self.db.execute("PRAGMA synchronous = NORMAL")

    # -- schema ----------------------------------------------------------------------------------------------
    def schema_version(self) -> int:
        """The schema version this file is at."""
        try:
            row = self.db.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()
        except sqlite3.DatabaseError as error:
            raise OpenCodeError(f"{self.path}: is not a readable study ({error})") from error
        if row is None:
            return 0
        try:
            version = int(str(row[0]).strip())
        except ValueError:
            version = -1
        if version < 1:
            raise NotAStudy(f"{self.path}: damaged study: its schema version {row[0]!r} is not a version number")
        return version

    def _migrate(self, from_version: int) -> None:
        with self.transaction():
            for version in range(from_version, SCHEMA_VERSION):
                for statement in _split_sql(MIGRATIONS[version]):
                    self.db.execute(statement)
            self.db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            self.db.execute("INSERT OR REPLACE INTO meta (key, value) VALUES ('schema_version', ?)",
                            (str(SCHEMA_VERSION),))

    # -- transactions and audit ------------------------------------------------------------------------------
    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        """One write transaction: everything inside commits together or not at all.

        Takes the write lock up front (BEGIN IMMEDIATE) so a second writer waits up to the busy timeout and
        then gets a clear message instead of failing half-way.
        """
        if self.db.in_transaction:
            yield self.db  # nested: the outer transaction decides
            return
        try:
            self.db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as error:
            if _is_locked(error):
                raise StudyBusy(
                    f"{self.path}: another program is writing to this study (the file is locked); "
                    "try again in a moment") from error
            raise
        try:
            yield self.db
        except sqlite3.OperationalError as error:
            self.db.rollback()
            raise _write_error(self.path, error) from None
        except BaseException:
            self.db.rollback()
            raise
        else:
            try:
                self.db.commit()
            except sqlite3.OperationalError as error:
                self.db.rollback()
                if _is_locked(error):
                    raise StudyBusy(f"{self.path}: the study is locked by another program; try again") from error
                raise _write_error(self.path, error) from None

    def audit(self, actor: str, action: str, entity: str, entity_id: int | None = None,
              payload: dict[str, Any] | None = None) -> int:
        """Record one change in the audit trail (call inside the transaction making the change)."""
        cursor = self.db.execute(
            "INSERT INTO audit (at, actor, action, entity, entity_id, payload) VALUES (?, ?, ?, ?, ?, ?)",
            (now(), actor, action, entity, entity_id, json.dumps(payload or {}, ensure_ascii=False)))
        return int(cursor.lastrowid)

    # -- settings --------------------------------------------------------------------------------------------
    def get_setting(self, key: str, default: Any = None) -> Any:
        """A study setting (JSON value), or `default`."""
        row = self.db.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
        if not row:
            return default
        try:
            return json.loads(row[0])
        except (TypeError, ValueError) as error:
            raise NotAStudy(f"{self.path}: damaged study: the setting {key!r} is not valid JSON ({error})") from None

    def set_setting(self, key: str, value: Any, actor: str = "oecode") -> None:
        """Store a study setting (JSON-serialisable) and audit the change."""
        with self.transaction():
            old = self.get_setting(key)
            self.db.execute("INSERT OR REPLACE INTO settings (key, value) VALUES (?, ?)",
                            (key, json.dumps(value, ensure_ascii=False)))
            self.audit(actor, "set", "setting", None, {"key": key, "before": old, "after": value})


def _write_error(path: Path, error: sqlite3.OperationalError) -> Exception:
    """A failed write to the study in one line (disk full, read-only), or the error itself if it is not one."""
    text = str(error).lower()
    if "full" in text:
        return WriteFailed(f"{path}: could not write: the disk is full; the change was not saved")
    if "readonly" in text or "read-only" in text:
        return WriteFailed(f"{path}: could not write: the study file or its folder is read-only; "
                           "the change was not saved")
    if "disk i/o" in text:
        return WriteFailed(f"{path}: could not write: an input/output error on the disk; the change was not saved")
    if _is_locked(error):
        return StudyBusy(f"{path}: another program is writing to this study (the file is locked); try again")
    return error


def _connect(path: Path) -> sqlite3.Connection:
    try:
        connection = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                                     check_same_thread=False)
        connection.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        connection.execute("PRAGMA foreign_keys = ON")
        mode = connection.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        connection.execute("PRAGMA synchronous = NORMAL")
    except sqlite3.OperationalError as error:
        if _is_locked(error):
            raise StudyBusy(f"{path}: the study is locked by another program; try again") from error
        raise OpenCodeError(f"{path}: cannot open the study ({error})") from error
    except sqlite3.DatabaseError as error:
        raise NotAStudy(f"{path}: is not a study file ({error})") from error
    if mode.lower() != "wal":
        connection.close()
        raise OpenCodeError(f"{path}: could not switch the study to WAL journaling (got {mode})")
    return connection


def _split_sql(script: str) -> list[str]:
    """Split a migration script into statements (our scripts hold no ';' inside strings)."""
    lines = [line.split("--", 1)[0] for line in script.splitlines()]
    return [statement.strip() for statement in "\n".join(lines).split(";") if statement.strip()]
