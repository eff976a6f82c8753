"""Studies on a PostgreSQL server: one schema per study, created, opened and migrated like a study file.

A server study is marked by a comment on its schema and holds the same tables as a file (pg_schema). Each
table that coders change also carries a trigger announcing the change (LISTEN/NOTIFY), so desks hear of
other coders' work and frame edits as they happen (changes.py).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from opencode.version import __version__
from opencode.errors import BadInput, NotAStudy, NotPermitted, OpenCodeError, StudyNotFound
from opencode.study.address import ServerAddress
from opencode.study.pg_schema import pg_migration
from opencode.study.postgres import PgConnection, connect_raw, quote_ident
from opencode.study.schema import SCHEMA_VERSION

if TYPE_CHECKING:
    from opencode.study.store import Study

#: The comment that marks a schema as an oecode study.
MARK = "oecode study"

#: Tables whose changes are announced to desks: what coders write, and the frame they code with.
ANNOUNCED = ("assignments", "coded_marks", "notes", "codes", "frames", "frame_questions", "samples",
             "sample_items", "sample_coders")


def channel(schema: str) -> str:
    """The LISTEN/NOTIFY channel of a study."""
    return f"oecode_{schema}"


def schema_state(raw, schema: str) -> str:
    """'absent', 'study' (marked as an oecode study) or 'other' (a schema that is not one)."""
    row = raw.execute("SELECT obj_description(n.oid, 'pg_namespace') FROM pg_namespace n WHERE n.nspname = %s",
                      (schema,)).fetchone()
    if row is None:
        return "absent"
    return "study" if (row[0] or "").startswith(MARK) else "other"


def list_studies(raw) -> list[str]:
    """The names of the studies in the connected database."""
    return [r[0] for r in raw.execute(
        "SELECT n.nspname FROM pg_namespace n WHERE obj_description(n.oid, 'pg_namespace') LIKE %s "
        "ORDER BY n.nspname", (MARK + "%",))]


def open_study(cls, address: ServerAddress) -> "Study":
    """Open a server study (migrating it forward when the connected role may)."""
    connection = PgConnection(address)
    try:
        state = schema_state(connection.raw, address.study)
        if state == "absent":
            there = ", ".join(list_studies(connection.raw)) or "none"
            raise StudyNotFound(f"{address}: no study {address.study!r} in this database (studies there: {there}); "
                                "copy one in with oecode push")
        if state == "other":
            raise NotAStudy(f"{address}: schema {address.study!r} exists but is not an oecode study")
        if not connection.raw.execute("SELECT has_schema_privilege(%s, 'USAGE')", (address.study,)).fetchone()[0]:
            raise NotPermitted(f"{address}: {connection.user} is not in this study's team; the lead adds them with "
                               "oecode team grant")
        study = cls(address, connection, dialect="postgresql")
        version = study.schema_version()
        if version > SCHEMA_VERSION:
            raise OpenCodeError(f"{address}: was written by a newer oecode (study version {version}, this one "
                                f"reads up to {SCHEMA_VERSION}); upgrade oecode to open it")
        if version < SCHEMA_VERSION:
            study._migrate(from_version=version)
    except BaseException:
        connection.close()
        raise
    return study


def study_exists(address: ServerAddress) -> bool:
    """Whether the address's database holds a schema of the study's name (a study or not)."""
    raw = connect_raw(address)
    try:
        return schema_state(raw, address.study) != "absent"
    finally:
        raw.close()


def create_study(cls, address: ServerAddress, *, overwrite: bool = False, with_meta: bool = True,
                 fill=None) -> "Study":
    """Create a study (a new schema) on the server, and `fill` it, in one transaction."""
    connection = PgConnection(address)
    try:
        state = schema_state(connection.raw, address.study)
        if state == "other":
            raise BadInput(f"{address}: schema {address.study!r} exists and is not an oecode study; choose "
                           "another study name")
        if state == "study" and not overwrite:
            raise BadInput(f"{address}: study {address.study!r} exists already (choose another name, or --replace)")
        study = cls(address, connection, dialect="postgresql")
        with study.transaction():
            if state == "study":
                connection.admin(f"DROP SCHEMA {quote_ident(address.study)} CASCADE")
            connection.admin(f"CREATE SCHEMA {quote_ident(address.study)}")
            connection.admin(f"COMMENT ON SCHEMA {quote_ident(address.study)} IS "
                                   f"'{MARK} (oecode {__version__})'")
            _build(study, 0)
            if with_meta:
                from opencode.study.store import now

                study._db.execute("INSERT INTO meta (key, value) VALUES ('created_at', ?), ('created_by', ?)",
                                  (now(), f"opencode {__version__}"))
            if fill is not None:
                fill(study)
    except BaseException:
        connection.close()
        raise
    return study


def migrate(study: "Study", from_version: int) -> None:
    """Bring a server study forward to this version in one transaction (the schema's owner or a lead does it)."""
    with study.transaction():
        _build(study, from_version)


def _build(study: "Study", from_version: int) -> None:
    db = study._db
    for version in range(from_version, SCHEMA_VERSION):
        for statement in pg_migration(version):
            db.admin(statement)
    db.admin("INSERT INTO meta (key, value) VALUES ('schema_version', %s) "
                "ON CONFLICT (key) DO UPDATE SET value = EXCLUDED.value", (str(SCHEMA_VERSION),))
    install_change_triggers(study)
    from opencode.study import team

    if team.roles_exist(study):
        team.apply_policies(study)


def install_change_triggers(study: "Study") -> None:
    """The triggers that announce changes on the study's channel (idempotent)."""
    db = study._db
    schema = quote_ident(study._db.schema)
    db.admin(f"""
        CREATE OR REPLACE FUNCTION {schema}.oecode_announce() RETURNS trigger LANGUAGE plpgsql AS $fn$
        DECLARE row_json jsonb;
        BEGIN
            IF TG_OP = 'DELETE' THEN row_json := to_jsonb(OLD); ELSE row_json := to_jsonb(NEW); END IF;
            PERFORM pg_notify(TG_ARGV[0], json_build_object(
                'table', TG_TABLE_NAME, 'op', lower(TG_OP),
                'coder', row_json ->> 'coder', 'verbatim_id', (row_json ->> 'verbatim_id')::bigint)::text);
            RETURN NULL;
        END $fn$""")
    for table in ANNOUNCED:
        db.admin(f"DROP TRIGGER IF EXISTS oecode_announce ON {schema}.{table}")
        db.admin(f"CREATE TRIGGER oecode_announce AFTER INSERT OR UPDATE OR DELETE ON {schema}.{table} "
                    f"FOR EACH ROW EXECUTE FUNCTION {schema}.oecode_announce('{channel(study._db.schema)}')")


def drop_study(address: ServerAddress) -> None:
    """Remove a study from the server (its schema and everything in it)."""
    raw = connect_raw(address)
    try:
        if schema_state(raw, address.study) != "study":
            raise StudyNotFound(f"{address}: no study {address.study!r} to remove")
        raw.execute(f"DROP SCHEMA {quote_ident(address.study)} CASCADE")
    finally:
        raw.close()
