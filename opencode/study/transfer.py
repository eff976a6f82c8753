"""Moving a whole study between a file and a server, table by table, nothing changed on the way.

`push` copies a study file into a new schema on a server in one transaction (a failed push leaves no
study behind); `save_copy` writes any open study (file or server) to a new study file through a temporary
file renamed into place. Every table is copied row for row with its ids, the audit trail included, so a
round trip file -> server -> file gives back the same rows (`table_rows` is how the tests compare).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from opencode.errors import BadInput, NotPermitted, OpenCodeError
from opencode.files.safe_write import normal_file_mode
from opencode.study.address import ServerAddress, is_server_address, parse_address
from opencode.study.store import SUFFIX, Study

#: Row order for copying and comparing where the primary key is not the order that matters.
ORDER = {"matrix_cache": "created_at, cache_key", "lexicons": "question_id NULLS FIRST"}


def study_tables(study: Study) -> list[tuple[str, list[str]]]:
    """(table, columns) of every study table in creation order (parents before children)."""
    if study.on_server:
        rows = study._db.raw.execute(
            "SELECT c.relname, a.attname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
            "JOIN pg_attribute a ON a.attrelid = c.oid WHERE n.nspname = %s AND c.relkind = 'r' "
            "AND a.attnum > 0 AND NOT a.attisdropped ORDER BY c.oid, a.attnum", (study._db.schema,)).fetchall()
        tables: dict[str, list[str]] = {}
        for table, column in rows:
            tables.setdefault(table, []).append(column)
        return list(tables.items())
    names = [r[0] for r in study._db.execute(
        "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%' ORDER BY rowid")]
    return [(name, [r[1] for r in study._db.execute(f"PRAGMA table_info({name})")]) for name in names]


def _order(study: Study, table: str, columns: list[str]) -> str:
    if table in ORDER:
        order = ORDER[table]
        return order if study.on_server else order.replace(" NULLS FIRST", "")
    if "id" in columns:
        return "id"
    return ", ".join(columns)


def table_rows(study: Study, table: str) -> list[tuple]:
    """Every row of one table with every column, in a fixed order (for copying and for comparing stores)."""
    columns = dict(study_tables(study))[table]
    rows = study._db.execute(f"SELECT {', '.join(columns)} FROM {table} ORDER BY {_order(study, table, columns)}")
    return [tuple(bytes(v) if isinstance(v, memoryview) else v for v in row) for row in rows]


def push(source: str | os.PathLike, address: "str | ServerAddress", *, replace: bool = False) -> dict[str, int]:
    """Copy a study file into a new study on a server; returns rows copied per table."""
    from opencode.study import server

    if not is_server_address(address):
        raise BadInput(f"{address}: not a server address (postgresql://USER@HOST/DATABASE?study=NAME)")
    address = parse_address(address)

    copied: dict[str, int] = {}
    with Study.open(source) as original:
        layout = study_tables(original)

        def fill(target: Study) -> None:
            raw = target._db.raw
            theirs = dict(study_tables(target))
            mine = dict(layout)
            if set(theirs) != set(mine) or any(theirs[t] != mine[t] for t in mine):
                raise OpenCodeError(f"{address}: the server's tables differ from {source}'s; both should come "
                                    "from the same oecode version")
            raw.execute("SET CONSTRAINTS ALL DEFERRED")
            for table in server.ANNOUNCED:  # a push is not coding: nobody needs a message per copied row
                raw.execute(f"ALTER TABLE {table} DISABLE TRIGGER oecode_announce")
            raw.execute("DELETE FROM meta")
            for table, columns in layout:
                rows = table_rows(original, table)
                try:
                    with raw.cursor().copy(f"COPY {table} ({', '.join(columns)}) FROM STDIN") as copy:
                        for row in rows:
                            copy.write_row(row)
                except Exception as error:
                    first = (str(error).strip().splitlines() or [type(error).__name__])[0]
                    raise BadInput(f"{source}: table {table} could not be copied to the server ({first})") from error
                copied[table] = len(rows)
                if "id" in columns and table in _identity():
                    raw.execute(f"SELECT setval(pg_get_serial_sequence('{table}', 'id'), "
                                f"COALESCE((SELECT MAX(id) FROM {table}), 0) + 1, false)")
            try:
                raw.execute("SET CONSTRAINTS ALL IMMEDIATE")  # every reference checked here, before the commit
            except Exception as error:
                first = (str(error).strip().splitlines() or [type(error).__name__])[0]
                raise BadInput(f"{source}: holds rows pointing nowhere ({first}); nothing was copied") from error
            for table in server.ANNOUNCED:
                raw.execute(f"ALTER TABLE {table} ENABLE TRIGGER oecode_announce")

        server.create_study(Study, address, overwrite=replace, with_meta=False, fill=fill).close()
    return copied


def _identity() -> frozenset[str]:
    from opencode.study.pg_schema import identity_tables

    return identity_tables()


def save_copy(study: Study, target: str | os.PathLike, *, overwrite: bool = False) -> dict[str, int]:
    """Write an open study (file or server) to a new study file with the same rows; returns rows per table."""
    target = Path(target)
    if target.suffix != SUFFIX:
        raise BadInput(f"{target}: a study file name must end in {SUFFIX}")
    if target.exists() and not overwrite:
        raise BadInput(f"{target}: already exists (choose another name, or --replace)")
    if not target.parent.is_dir():
        raise BadInput(f"{target}: the folder {target.parent} does not exist")
    if isinstance(study.path, Path) and target.exists() and target.resolve() == study.path.resolve():
        raise BadInput(f"{target}: is the study being copied")
    if study.on_server:
        from opencode.study import team

        if team.role_of(study) not in ("owner", "lead"):
            raise NotPermitted(f"{study.path}: only the study's lead can copy the whole study (a coder's view "
                               "hides blind codes); a coder's copy comes from oecode handout")
    copied: dict[str, int] = {}
    fd, temp_name = tempfile.mkstemp(prefix=f".{target.stem}.", suffix=SUFFIX, dir=target.parent)
    os.close(fd)
    temp = Path(temp_name)
    try:
        os.chmod(temp, normal_file_mode())
        copy = Study.create(temp, overwrite=True)
        try:
            mine = dict(study_tables(copy))
            theirs = study_tables(study)
            if set(mine) != {t for t, _ in theirs} or any(mine[t] != c for t, c in theirs):
                raise OpenCodeError(f"{study.path}: its tables differ from a new study file's; both should come "
                                    "from the same oecode version")
            copy._db.execute("PRAGMA foreign_keys = OFF")
            with copy.private_bulk_load(), copy.transaction():
                copy._db.execute("DELETE FROM meta")
                for table, columns in theirs:
                    rows = table_rows(study, table)
                    copy._db.executemany(f"INSERT INTO {table} ({', '.join(columns)}) VALUES "
                                         f"({', '.join('?' for _ in columns)})", rows)
                    copied[table] = len(rows)
            broken = copy._db.execute("PRAGMA foreign_key_check").fetchall()
            copy._db.execute("PRAGMA foreign_keys = ON")
            if broken:
                raise OpenCodeError(f"{study.path}: the copy would hold rows pointing nowhere (first: table "
                                    f"{broken[0][0]}, row {broken[0][1]}); nothing was written")
        finally:
            copy.close()
        os.replace(temp, target)
    finally:
        for extra in ("", "-wal", "-shm"):
            with contextlib.suppress(FileNotFoundError):
                os.remove(str(temp) + extra)
    return copied


def pull(address: "str | ServerAddress", target: str | os.PathLike, *, overwrite: bool = False) -> dict[str, int]:
    """Copy a server study into a new study file; returns rows copied per table."""
    if not is_server_address(address):
        raise BadInput(f"{address}: not a server address (postgresql://USER@HOST/DATABASE?study=NAME)")
    with Study.open(address) as study:
        return save_copy(study, target, overwrite=overwrite)


def same_rows(first: Study, second: Study) -> list[str]:
    """The tables whose rows differ between two studies (empty: the same study, row for row)."""
    a, b = dict(study_tables(first)), dict(study_tables(second))
    differ = sorted(set(a) ^ set(b))
    for table in sorted(set(a) & set(b)):
        if a[table] != b[table] or not _equal(table_rows(first, table), table_rows(second, table)):
            differ.append(table)
    return differ


def _equal(rows_a: list[tuple], rows_b: list[tuple]) -> bool:
    if len(rows_a) != len(rows_b):
        return False
    for row_a, row_b in zip(rows_a, rows_b):
        for x, y in zip(row_a, row_b):
            if x != y and not (isinstance(x, float) and isinstance(y, float) and x != x and y != y):
                return False
    return True

