"""The PostgreSQL store: a connection that speaks to the store modules the way sqlite3 does.

The store modules call `execute`, `executemany`, `commit`, `rollback` and read `lastrowid` / `rowcount`, as
with sqlite3. This connection rewrites each statement into PostgreSQL (pg_schema.translate), runs it with
psycopg 3 in autocommit mode (Study.transaction issues BEGIN / COMMIT itself), and turns the server's
refusals into the project's exceptions: a role's refusal -> NotPermitted, a lock or serialisation conflict ->
StudyBusy (the desk offers a retry), a lost connection -> WriteFailed, a broken key -> sqlite3.IntegrityError
(the class callers already catch). psycopg is imported here only, when a server address is used.
"""

from __future__ import annotations

import sqlite3
from typing import Any, Iterable, Iterator

from opencode.errors import BadInput, NotPermitted, OpenCodeError, StudyBusy, StudyNotFound, WriteFailed
from opencode.study.address import ServerAddress
from opencode.study.pg_schema import translate

#: How long a statement waits for a row or table lock before the change is refused as busy.
LOCK_TIMEOUT = "5s"


class ServerIntegrityError(sqlite3.IntegrityError):
    """A key or constraint the server refused (a subclass of sqlite3's, so both stores raise one class)."""


def connect_raw(address: ServerAddress, *, autocommit: bool = True):
    """A psycopg connection to the address's database (no study chosen), with errors a user can act on."""
    import psycopg

    try:
        connection = psycopg.connect(address.conninfo, autocommit=autocommit, application_name="oecode")
    except psycopg.OperationalError as error:
        first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
        if "password" in first.lower() and "no password" in first.lower():
            first += " (passwords come from ~/.pgpass, PGPASSFILE, a service file or PGPASSWORD)"
        raise StudyNotFound(f"{address}: cannot connect to the server ({first})") from error
    except psycopg.ProgrammingError as error:
        raise BadInput(f"{address}: {error}") from error
    _register_adapters(connection)
    return connection


def _register_adapters(connection) -> None:
    """Python bools travel as 0/1 integers, the way the study stores flags (SQLite has no boolean type)."""
    from psycopg.adapt import Dumper
    from psycopg.postgres import types

    class FlagDumper(Dumper):
        oid = types["int4"].oid

        def dump(self, obj):
            return b"1" if obj else b"0"

    connection.adapters.register_dumper(bool, FlagDumper)


class _Cursor:
    """What execute returns: rows to fetch or iterate, rowcount, and lastrowid for a numbered insert."""

    def __init__(self, cursor, returning_id: bool, rows: list | None = None, description=None):
        self._cursor = cursor
        self._description = description
        self.rowcount = cursor.rowcount if cursor is not None else len(rows or [])
        self.lastrowid = None
        self._rows: list | None = None if rows is None else list(rows)
        if returning_id:
            rows = cursor.fetchall()
            self.lastrowid = rows[-1][0] if rows else None
            self._rows = []

    @property
    def description(self):
        return self._description if self._cursor is None else self._cursor.description

    def fetchone(self):
        if self._rows is not None:
            return self._rows.pop(0) if self._rows else None
        return self._cursor.fetchone() if self._cursor.description else None

    def fetchall(self) -> list:
        if self._rows is not None:
            rows, self._rows = self._rows, []
            return rows
        return self._cursor.fetchall() if self._cursor.description else []

    def __iter__(self) -> Iterator:
        return iter(self.fetchall())

    def close(self) -> None:
        if self._cursor is not None:
            self._cursor.close()


class PgConnection:
    """One study's connection on a server: the study's schema first on the search path."""

    def __init__(self, address: ServerAddress):
        self.address = address
        self.schema = address.study
        self._conn = self._connect()

    def _connect(self):
        connection = connect_raw(self.address)
        connection.execute("SELECT set_config('search_path', %s, false), set_config('lock_timeout', %s, false)",
                           (_quote_ident(self.schema) + ", pg_catalog", LOCK_TIMEOUT))
        return connection

    def _ensure(self) -> None:
        """Connect again after a lost connection (a server restart), between transactions only."""
        if self._conn.closed and not self._closed_by_us:
            self._conn = self._connect()

    _closed_by_us = False
    #: Within a transaction, a SELECT repeated with the same parameters and no write in between gives the
    #: rows it gave the first time (the coding functions ask the same question several times in one change;
    #: each answer saved is a round trip to the server). None outside a transaction: nothing is kept.
    _reads: dict | None = None

    @property
    def raw(self):
        """The psycopg connection (for COPY, LISTEN and role setup inside study/)."""
        return self._conn

    @property
    def user(self) -> str:
        return self._conn.info.user

    # -- the sqlite3-shaped interface ------------------------------------------------------------------------
    @property
    def in_transaction(self) -> bool:
        from psycopg.pq import TransactionStatus

        return self._conn.info.transaction_status != TransactionStatus.IDLE

    def execute(self, sql: str, params: Iterable[Any] = ()) -> _Cursor:
        self._ensure()
        params = tuple(params) if params else None
        reading = sql.lstrip()[:6].upper() == "SELECT"
        key = None
        if reading and self._reads is not None:
            try:
                key = (sql, params)
                if key in self._reads:
                    return _Cursor(None, False, *self._reads[key])
            except TypeError:  # a list parameter: not cached
                key = None
        elif not reading:
            self._reads = {} if self._reads is not None else None
        text = translate(sql, True)
        try:
            cursor = self._conn.execute(text if params else text.replace("%%", "%"), params)
        except Exception as error:
            raise self._mapped(error, sql) from error
        if key is not None:
            rows = cursor.fetchall() if cursor.description else []
            self._reads[key] = (rows, cursor.description)
            return _Cursor(None, False, rows, cursor.description)
        return _Cursor(cursor, text.endswith("RETURNING id"))

    def executemany(self, sql: str, rows: Iterable[Iterable[Any]]) -> _Cursor:
        self._ensure()
        if self._reads is not None:
            self._reads = {}
        rows = [tuple(r) for r in rows]
        if not rows:
            return _Cursor(self._conn.cursor(), False)
        cursor = self._conn.cursor()
        try:
            cursor.executemany(translate(sql, False), rows)
        except Exception as error:
            raise self._mapped(error, sql) from error
        return _Cursor(cursor, False)

    def admin(self, sql: str, params: Iterable[Any] | None = None):
        """Run PostgreSQL's own SQL as written (schemas, roles, policies, COPY set-up): no translation."""
        self._ensure()
        if self._reads is not None:
            self._reads = {}
        try:
            return self._conn.execute(sql, params)
        except Exception as error:
            raise self._mapped(error, sql) from error

    def begin(self) -> None:
        self._ensure()
        self._run("BEGIN")
        self._reads = {}

    def commit(self) -> None:
        self._reads = None
        self._run("COMMIT")

    def rollback(self) -> None:
        self._reads = None
        if self._conn.closed:
            return
        try:
            self._conn.execute("ROLLBACK")
        except Exception:  # the connection broke: the server rolled the transaction back already
            pass

    def close(self) -> None:
        self._closed_by_us = True
        self._conn.close()

    def _run(self, statement: str) -> None:
        try:
            self._conn.execute(statement)
        except Exception as error:
            raise self._mapped(error, statement) from error

    # -- the server's refusals as the project's exceptions ---------------------------------------------------
    def _mapped(self, error: Exception, sql: str) -> Exception:
        import psycopg
        from psycopg import errors as pg

        message = (str(error).strip().splitlines() or [type(error).__name__])[0]
        where = f"{self.address}"
        if isinstance(error, (pg.InsufficientPrivilege,)):
            return NotPermitted(f"{where}: {self.user} may not do this ({message}); a coder writes only their own "
                                "codes, notes and done marks, the lead edits frames and samples, and the server's "
                                "admin sets up roles")
        if isinstance(error, (pg.LockNotAvailable, pg.DeadlockDetected, pg.SerializationFailure,
                              pg.QueryCanceled)):
            return StudyBusy(f"{where}: another coder is changing the same rows; nothing was written, try again "
                             f"({message})")
        if isinstance(error, psycopg.IntegrityError):
            return ServerIntegrityError(message)
        if isinstance(error, psycopg.OperationalError) or self._conn.closed:
            return WriteFailed(f"{where}: lost the connection to the server; nothing was half-written ({message})")
        if isinstance(error, pg.UndefinedTable):
            return StudyNotFound(f"{where}: no study {self.schema!r} in this database ({message})")
        if isinstance(error, psycopg.DataError):
            return BadInput(f"{where}: the server refused a value ({message})")
        if isinstance(error, psycopg.Error):
            return OpenCodeError(f"{where}: the server refused: {message}")
        return error


def _quote_ident(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def quote_ident(name: str) -> str:
    """A name quoted as a PostgreSQL identifier."""
    return _quote_ident(name)
