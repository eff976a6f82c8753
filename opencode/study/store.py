"""Open, create and migrate a study file (one SQLite database), with transactions and the audit trail."""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import sqlite3
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Iterator

from opencode.version import __version__
from opencode.errors import BadInput, NotAStudy, OpenCodeError, StudyBusy, StudyNotFound, WriteFailed
from opencode.files.targets import protect
from opencode.study.address import ServerAddress, is_server_address, parse_address
from opencode.study.schema import APPLICATION_ID, MIGRATIONS, SCHEMA_VERSION

SUFFIX = ".study"
BUSY_TIMEOUT_MS = 5000


def now() -> str:
    """The current UTC time as ISO 8601 text (what the study stores)."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="milliseconds")


def _is_locked(error: sqlite3.OperationalError) -> bool:
    text = str(error).lower()
    return "locked" in text or "busy" in text


if TYPE_CHECKING:  # pandas is imported only when codes are read
    import pandas as pd


class Study:
    """One open study: a file (SQLite) or a schema on a PostgreSQL server, with the same API.

    Use `Study.open` / `Study.create` with a path or a server address; close it (or use `with`) when done.
    `path` is the file's Path, or the ServerAddress (str(), .name and .stem work for both in messages).
    """

    def __init__(self, path: "Path | ServerAddress", connection, dialect: str = "sqlite"):
        self.path = path
        self._db = connection
        #: Which SQL the connection speaks ("sqlite" or "postgresql"); store modules branch on it only where
        #: the two stores differ.
        self.dialect = dialect

    @property
    def on_server(self) -> bool:
        """Whether the study lives on a PostgreSQL server (a coding team's shared store)."""
        return self.dialect == "postgresql"

    # -- opening ---------------------------------------------------------------------------------------------
    @classmethod
    def create(cls, path: "str | os.PathLike | ServerAddress", *, overwrite: bool = False,
               fill: Callable[["Study"], None] | None = None) -> "Study":
        """Create a new study: a file at `path` (must end in .study), or a study on a server address.

        `fill(study)` writes its first contents; on a server it runs in the transaction that creates the
        study, so a failed fill leaves no study behind.
        """
        if is_server_address(path):
            from opencode.study import server

            return server.create_study(cls, parse_address(path), overwrite=overwrite, fill=fill)
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
            study._db.execute("INSERT INTO meta (key, value) VALUES ('created_at', ?), ('created_by', ?)",
                             (now(), f"opencode {__version__}"))
        if fill is not None:
            try:
                with study.transaction():
                    fill(study)
            except BaseException:
                study.close()
                raise
        return study

    @classmethod
    def open(cls, path: str | os.PathLike) -> "Study":
        """Open an existing study (a file path or a server address), migrating it forward if it is older."""
        if is_server_address(path):
            from opencode.study import server

            return server.open_study(cls, parse_address(path))
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
        for (payload,) in self._db.execute("SELECT payload FROM audit WHERE actor = 'import' AND action = 'import'"):
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
        self._db.close()

    def __enter__(self) -> "Study":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @contextlib.contextmanager
    def private_bulk_load(self) -> Iterator["Study"]:
        """Fill a study no one else can see yet (a temporary file) without journaling; WAL again afterwards.

        Only for a file that is thrown away if anything fails: without a journal a failed write is not undone.
        On a server this changes nothing (the caller's transaction already keeps a failed load invisible).
        """
        if self.on_server:
            yield self
            return
        self._db.execute("PRAGMA journal_mode = OFF")
        self._db.execute("PRAGMA synchronous = OFF")
        try:
            yield self
        finally:
            self._db.execute("PRAGMA journal_mode = WAL")
            self._db.execute("PRAGMA synchronous = NORMAL")

    # -- schema ----------------------------------------------------------------------------------------------
    def schema_version(self) -> int:
        """The schema version this file is at."""
        try:
            row = self._db.execute("SELECT value FROM meta WHERE key = 'schema_version'").fetchone()
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
        if self.on_server:
            from opencode.study import server

            server.migrate(self, from_version)
            return
        with self.transaction():
            for version in range(from_version, SCHEMA_VERSION):
                for statement in _split_sql(MIGRATIONS[version]):
                    self._db.execute(statement)
            self._db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            self._db.execute("INSERT OR REPLACE INTO meta (key, value) VALUES ('schema_version', ?)",
                            (str(SCHEMA_VERSION),))

    # -- transactions and audit ------------------------------------------------------------------------------
    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        """One write transaction: everything inside commits together or not at all.

        Takes the write lock up front (BEGIN IMMEDIATE) so a second writer waits up to the busy timeout and
        then gets a clear message instead of failing half-way.
        """
        if self._db.in_transaction:
            yield self._db  # nested: the outer transaction decides
            return
        if self.on_server:  # READ COMMITTED; row locks and unique keys keep concurrent coders apart
            self._db.begin()
            try:
                yield self._db
            except BaseException:
                self._db.rollback()
                raise
            self._db.commit()
            return
        try:
            self._db.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as error:
            if _is_locked(error):
                raise StudyBusy(
                    f"{self.path}: another program is writing to this study (the file is locked); "
                    "try again in a moment") from error
            raise
        try:
            yield self._db
        except sqlite3.OperationalError as error:
            self._db.rollback()
            raise _write_error(self.path, error) from None
        except BaseException:
            self._db.rollback()
            raise
        else:
            try:
                self._db.commit()
            except sqlite3.OperationalError as error:
                self._db.rollback()
                if _is_locked(error):
                    raise StudyBusy(f"{self.path}: the study is locked by another program; try again") from error
                raise _write_error(self.path, error) from None

    def audit(self, actor: str, action: str, entity: str, entity_id: int | None = None,
              payload: dict[str, Any] | None = None) -> int:
        """Record one change in the audit trail (call inside the transaction making the change)."""
        cursor = self._db.execute(
            "INSERT INTO audit (at, actor, action, entity, entity_id, payload) VALUES (?, ?, ?, ?, ?, ?)",
            (now(), actor, action, entity, entity_id, json.dumps(payload or {}, ensure_ascii=False)))
        return int(cursor.lastrowid)

    # -- settings --------------------------------------------------------------------------------------------
    def get_setting(self, key: str, default: Any = None) -> Any:
        """A study setting (JSON value), or `default`."""
        row = self._db.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
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
            self._db.execute("INSERT OR REPLACE INTO settings (key, value) VALUES (?, ?)",
                            (key, json.dumps(value, ensure_ascii=False)))
            self.audit(actor, "set", "setting", None, {"key": key, "before": old, "after": value})

    # -- reading codes (the public API's door for notebooks) ---------------------------------------------------
    def codes(self, question: str, coder: str = "final") -> "pd.DataFrame":
        """One coder's codes on a question: respondent (the survey's id), code, label, net, source."""
        from opencode.study.codes_table import question_codes

        return question_codes(self, question, coder)


def as_study_target(target: "str | os.PathLike | ServerAddress") -> "Path | ServerAddress":
    """A study argument as a Path, or as a ServerAddress when it names a server study."""
    return parse_address(target) if is_server_address(target) else Path(target)


def study_exists(target: "str | os.PathLike | ServerAddress") -> bool:
    """Whether a study is at this path or address (a server is asked; a file is looked for)."""
    if not is_server_address(target):
        return Path(target).exists()
    from opencode.study import server

    return server.study_exists(parse_address(target))


def read_frame(study: Study, sql: str, params=()):
    """A query's rows as a pandas DataFrame (the same column types from either store)."""
    import pandas as pd

    if not study.on_server:
        return pd.read_sql_query(sql, study._db, params=params)
    cursor = study._db.execute(sql, params)
    columns = [c.name for c in cursor.description]
    return pd.DataFrame.from_records(cursor.fetchall(), columns=columns, coerce_float=True)


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
