"""Who may do what in a server study: a lead role and a coder role, enforced by the server itself.

Each study gets two group roles. Members of the lead group read and write everything (frames, samples,
the `final` coder, the machine coder's output). Members of the coder group read the study and write only
their own rows: assignments, notes and done marks whose `coder` is their database user name, audit rows
whose actor is their name (for their own undo), and the term-matrix cache (derived data). Row-level
security policies enforce this on the server, so a hand-written SQL client gets the same answer as the desk;
a coder's UPDATE or DELETE reaching another coder's row is refused with an error (trigger `oecode_own_rows`)
rather than quietly touching nothing.
Blind double coding stays blind: on a verbatim of a reliability sample assigned to them, a coder cannot read
another coder's codes or notes, and coders cannot read the machine coder's stored models at all (a model learned
from every coder's codes; running it would reproduce them): the machine coder is the lead's. A coder's name in the study is their database user name.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

from opencode.errors import BadInput, NotPermitted, OpenCodeError
from opencode.study.postgres import quote_ident

if TYPE_CHECKING:
    from opencode.study.store import Study

#: A coder's or lead's database user name (also their coder name in the study).
MEMBER_NAME = re.compile(r"^[a-z][a-z0-9_]{0,40}$")
#: Tables a coder writes (their own rows only, by policy).
OWN_ROWS = ("assignments", "notes", "coded_marks")


@dataclass(frozen=True)
class Members:
    """The lead and coder group members of a study."""

    leads: list[str]
    coders: list[str]


def _require_server(study: "Study") -> None:
    if not study.on_server:
        raise BadInput(f"{study.path}: roles are set on a server study; a study file has no users "
                       "(give coders a copy with oecode handout instead)")


def group_roles(study: "Study") -> tuple[str, str]:
    """(lead group, coder group) role names of a study: per database and study, at most 63 characters."""
    database = study._db.raw.info.dbname
    base = f"oecode_{database}_{study._db.schema}"
    if len(base) > 50:
        base = base[:42] + "_" + hashlib.sha1(base.encode()).hexdigest()[:7]
    return f"{base}_lead", f"{base}_coder"


def roles_exist(study: "Study") -> bool:
    """Whether the study's group roles were set up (by a first grant)."""
    lead, coder = group_roles(study)
    count = study._db.admin("SELECT COUNT(*) FROM pg_roles WHERE rolname IN (%s, %s)", (lead, coder)).fetchone()
    return int(count[0]) == 2


def check_member_name(name: str) -> str:
    """A usable coder or lead name (it is also a database user name)."""
    if not MEMBER_NAME.match(name or ""):
        raise BadInput(f"{name!r}: a team member's name is a database user name: lower-case letters, digits and "
                       "underscores, starting with a letter")
    return name


def grant(study: "Study", name: str, role: str, password: str | None = None) -> bool:
    """Make `name` a coder or lead of the study (creating their login when missing); True if newly granted.

    The password, when given, is hashed on this machine (SCRAM) before it reaches the server, so it never
    appears in a statement or a server log. Needs a user who may create roles (the server's admin).
    """
    _require_server(study)
    check_member_name(name)
    if role not in ("coder", "lead"):
        raise BadInput(f"role {role!r}: choose coder or lead")
    if role == "coder" and name == "final":
        raise BadInput("'final' is the adjudicated coder, written by the lead; it cannot be a coder's name")
    db = study._db
    lead_group, coder_group = group_roles(study)
    with study.transaction():
        _ensure_groups(study)
        exists = db.admin("SELECT 1 FROM pg_roles WHERE rolname = %s", (name,)).fetchone() is not None
        if not exists:
            db.admin(f"CREATE ROLE {quote_ident(name)} LOGIN")
        if password:
            hashed = db.raw.pgconn.encrypt_password(password.encode(), name.encode(), b"scram-sha-256").decode()
            db.admin(f"ALTER ROLE {quote_ident(name)} PASSWORD '{hashed}'")
        group = lead_group if role == "lead" else coder_group
        already = db.admin(
            "SELECT 1 FROM pg_auth_members m JOIN pg_roles g ON g.oid = m.roleid JOIN pg_roles u ON u.oid = m.member "
            "WHERE g.rolname = %s AND u.rolname = %s", (group, name)).fetchone() is not None
        if not already:
            db.admin(f"GRANT {quote_ident(group)} TO {quote_ident(name)}")
        db.admin(f"GRANT CONNECT ON DATABASE {quote_ident(db.raw.info.dbname)} TO {quote_ident(group)}")
        apply_policies(study)
        if not already:
            study.audit(study._db.user, "grant", "team", None, {"member": name, "role": role})
    return not already


def revoke(study: "Study", name: str) -> bool:
    """Take a member out of both of the study's groups (their login stays); True if they were in one."""
    _require_server(study)
    check_member_name(name)
    db = study._db
    removed = False
    with study.transaction():
        for group in group_roles(study):
            held = db.admin(
                "SELECT 1 FROM pg_auth_members m JOIN pg_roles g ON g.oid = m.roleid JOIN pg_roles u "
                "ON u.oid = m.member WHERE g.rolname = %s AND u.rolname = %s", (group, name)).fetchone()
            if held:
                db.admin(f"REVOKE {quote_ident(group)} FROM {quote_ident(name)}")
                removed = True
        if removed:
            study.audit(study._db.user, "revoke", "team", None, {"member": name})
    return removed


def members(study: "Study") -> Members:
    """The study's leads and coders, by name."""
    _require_server(study)
    lead_group, coder_group = group_roles(study)
    found: dict[str, list[str]] = {lead_group: [], coder_group: []}
    for group, member in study._db.admin(
            "SELECT g.rolname, u.rolname FROM pg_auth_members m JOIN pg_roles g ON g.oid = m.roleid "
            "JOIN pg_roles u ON u.oid = m.member WHERE g.rolname IN (%s, %s) ORDER BY u.rolname",
            (lead_group, coder_group)):
        found[group].append(member)
    return Members(found[lead_group], found[coder_group])


def role_of(study: "Study") -> str:
    """What the connected user may do here: 'owner' (the study's owner or a superuser), 'lead', 'coder' or 'none'."""
    if not study.on_server:
        return "owner"
    db = study._db
    owner = db.admin(
        "SELECT pg_has_role(current_user, n.nspowner, 'USAGE') OR r.rolsuper FROM pg_namespace n, pg_roles r "
        "WHERE n.nspname = %s AND r.rolname = current_user", (study._db.schema,)).fetchone()
    if owner and owner[0]:
        return "owner"
    if not roles_exist(study):
        return "none"
    lead_group, coder_group = group_roles(study)
    for group, name in ((lead_group, "lead"), (coder_group, "coder")):
        if db.admin("SELECT pg_has_role(current_user, %s, 'MEMBER')", (group,)).fetchone()[0]:
            return name
    return "none"


def _ensure_groups(study: "Study") -> None:
    db = study._db
    for group in group_roles(study):
        if db.admin("SELECT 1 FROM pg_roles WHERE rolname = %s", (group,)).fetchone() is None:
            db.admin(f"CREATE ROLE {quote_ident(group)} NOLOGIN")


def apply_policies(study: "Study") -> None:
    """Grants, the blind-sample test and row-level security policies of both groups (idempotent)."""
    db = study._db
    schema = quote_ident(study._db.schema)
    lead_group, coder_group = (quote_ident(g) for g in group_roles(study))
    statements = [
        f"GRANT USAGE ON SCHEMA {schema} TO {lead_group}, {coder_group}",
        f"GRANT SELECT ON ALL TABLES IN SCHEMA {schema} TO {coder_group}",
        # the machine coder's models learned from every coder's codes, blind samples included: running one
        # would reproduce another coder's blind codes, so coders do not read them (as handouts leave them out)
        f"REVOKE ALL ON {schema}.models FROM {coder_group}",
        f"GRANT SELECT, INSERT, UPDATE, DELETE ON ALL TABLES IN SCHEMA {schema} TO {lead_group}",
        f"GRANT USAGE, SELECT, UPDATE ON ALL SEQUENCES IN SCHEMA {schema} TO {lead_group}",
        f"GRANT INSERT, UPDATE, DELETE ON {schema}.assignments, {schema}.notes, {schema}.coded_marks, "
        f"{schema}.matrix_cache TO {coder_group}",
        f"GRANT INSERT, UPDATE (undone) ON {schema}.audit TO {coder_group}",
        f"GRANT USAGE ON SEQUENCE {schema}.assignments_id_seq, {schema}.audit_id_seq TO {coder_group}",
        f"CREATE INDEX IF NOT EXISTS sample_items_by_verbatim ON {schema}.sample_items (verbatim_id)",
        # true when the verbatim is in a reliability sample assigned to the connected coder
        f"""CREATE OR REPLACE FUNCTION {schema}.oecode_blind(v integer) RETURNS boolean LANGUAGE sql STABLE AS $fn$
            SELECT EXISTS (SELECT 1 FROM {schema}.sample_items si JOIN {schema}.sample_coders sc
                           ON sc.sample_id = si.sample_id
                           WHERE si.verbatim_id = v AND sc.coder = current_user::text) $fn$""",
    ]
    own = "coder = current_user::text"
    visible = f"{own} OR NOT {schema}.oecode_blind(verbatim_id)"
    # UPDATE and DELETE reach every row the coder can read, so that the trigger below refuses another coder's
    # row out loud instead of the statement quietly touching nothing; rows hidden on a blind sample stay out
    # of reach (and silent: refusing would tell the coder they exist).
    policies = {
        "assignments": {"SELECT": (visible, None), "INSERT": (None, own), "UPDATE": (visible, own),
                        "DELETE": (visible, None)},
        "notes": {"SELECT": (visible, None), "INSERT": (None, own), "UPDATE": (visible, own), "DELETE": (visible, None)},
        "coded_marks": {"SELECT": ("true", None), "INSERT": (None, own), "UPDATE": ("true", own),
                        "DELETE": ("true", None)},
        "audit": {"SELECT": ("actor = current_user::text", None), "INSERT": (None, "actor = current_user::text"),
                  "UPDATE": ("actor = current_user::text", "actor = current_user::text")},
    }
    for table, rules in policies.items():
        target = f"{schema}.{table}"
        statements.append(f"ALTER TABLE {target} ENABLE ROW LEVEL SECURITY")
        statements.append(f"DROP POLICY IF EXISTS lead_all ON {target}")
        statements.append(f"CREATE POLICY lead_all ON {target} FOR ALL TO {lead_group} USING (true) WITH CHECK (true)")
        for command in ("SELECT", "INSERT", "UPDATE", "DELETE"):
            name = f"coder_{command.lower()}"
            statements.append(f"DROP POLICY IF EXISTS {name} ON {target}")
            if command not in rules:
                continue
            using, check = rules[command]
            text = f"CREATE POLICY {name} ON {target} FOR {command} TO {coder_group}"
            text += f" USING ({using})" if using else ""
            text += f" WITH CHECK ({check})" if check else ""
            statements.append(text)
    lead_name, coder_name = group_roles(study)
    statements.append(
        # a coder (not a lead) changing or deleting a row of another coder: refused, naming both
        f"""CREATE OR REPLACE FUNCTION {schema}.oecode_own_rows() RETURNS trigger LANGUAGE plpgsql AS $fn$
            BEGIN
                IF pg_has_role(current_user, {_literal(coder_name)}, 'MEMBER')
                   AND NOT pg_has_role(current_user, {_literal(lead_name)}, 'MEMBER') THEN
                    RAISE EXCEPTION USING ERRCODE = 'insufficient_privilege',
                        MESSAGE = format('%s may not %s %s''s rows in %s (a coder changes only their own)',
                                         current_user, lower(TG_OP), OLD.coder, TG_TABLE_NAME);
                END IF;
                IF TG_OP = 'DELETE' THEN RETURN OLD; END IF;
                RETURN NEW;
            END $fn$""")
    for table in OWN_ROWS:
        statements.append(f"DROP TRIGGER IF EXISTS oecode_own_rows ON {schema}.{table}")
        statements.append(f"CREATE TRIGGER oecode_own_rows BEFORE UPDATE OR DELETE ON {schema}.{table} FOR EACH ROW "
                          f"WHEN (OLD.coder <> current_user::text) EXECUTE FUNCTION {schema}.oecode_own_rows()")
    with study.transaction():
        for statement in statements:
            db.admin(statement)


def _literal(text: str) -> str:
    """A SQL string literal (role names are checked names, but quote them all the same)."""
    return "'" + text.replace("'", "''") + "'"


def require_lead(study: "Study", what: str, why: str) -> None:
    """On a server, refuse a coder (or a non-member) `what` with one clear line; a study file allows anyone."""
    if not study.on_server or role_of(study) in ("owner", "lead"):
        return
    raise NotPermitted(f"{study.path}: only a lead can {what} on a server study ({why}); {study._db.user} is not "
                       "a lead of this study")


def check_coder_identity(study: "Study", coder: str) -> None:
    """On a server, a coder (not a lead) codes under their own database user name only; a clear error otherwise."""
    if not study.on_server:
        return
    role = role_of(study)
    if role == "coder" and coder != study._db.user:
        raise OpenCodeError(f"{study.path}: you are connected as {study._db.user}, a coder of this study; code as "
                            f"--coder {study._db.user} (a coder writes only their own codes)")
    if role == "none":
        raise OpenCodeError(f"{study.path}: {study._db.user} is not a member of this study's team; ask the lead "
                            "to run oecode team grant")
