"""Where a study lives: a file path, or a PostgreSQL address naming a database and a study in it.

Two address forms reach a server study (everything else is a file path):

    postgresql://kit@db.example/surveys?study=wrenfield&sslmode=verify-full
    service=surveys study=wrenfield          (a libpq service from pg_service.conf, plus the study)

The `study` part names the study (one PostgreSQL schema per study); every other part goes to libpq as it is,
so TLS settings (sslmode, sslrootcert, sslcert, sslkey), services and password files work as libpq documents.
A password written in the address is refused: command lines are visible to other users of the machine and
stay in shell history. Use a password file (~/.pgpass or PGPASSFILE), a service file, or PGPASSWORD.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from urllib.parse import parse_qsl, quote, urlsplit

from opencode.errors import BadInput

#: A study's name becomes its schema name: lower-case letters, digits and underscores, starting with a letter.
STUDY_NAME = re.compile(r"^[a-z][a-z0-9_]{0,39}$")
_URI_SCHEMES = ("postgresql://", "postgres://")
_CONNINFO_PAIR = re.compile(r"\s*([A-Za-z_][A-Za-z0-9_]*)\s*=\s*('(?:[^'\\]|\\.)*'|[^\s']+)")
_CONNINFO_WHOLE = re.compile(r"(?:\s*[A-Za-z_][A-Za-z0-9_]*\s*=\s*(?:'(?:[^'\\]|\\.)*'|[^\s']+))+\s*")
PASSWORD_HELP = ("put the password in a password file (~/.pgpass, or PGPASSFILE), a service file "
                 "(pg_service.conf with passfile=), or the PGPASSWORD environment variable")


@dataclass(frozen=True)
class ServerAddress:
    """A study on a PostgreSQL server: libpq connection settings (no password) and the study's name."""

    conninfo: str   # what libpq gets (the study part removed)
    study: str      # the study's name = its schema
    shown: str      # the address as typed, for messages

    # A study's `path` is a ServerAddress for server studies: messages use str(), .name and .stem alike.
    @property
    def name(self) -> str:
        return self.study

    @property
    def stem(self) -> str:
        return self.study

    def __str__(self) -> str:
        return self.shown

    def with_study(self, study: str) -> "ServerAddress":
        """The same server and database, another study."""
        check_study_name(study)
        shown = re.sub(r"study=[^&\s]*", f"study={study}", self.shown)
        return ServerAddress(self.conninfo, study, shown)


def is_server_address(target: object) -> bool:
    """Whether a study argument names a server study rather than a file."""
    if isinstance(target, ServerAddress):
        return True
    if not isinstance(target, str):
        return False
    text = target.strip()
    if text.startswith(_URI_SCHEMES):
        return True
    return _looks_like_conninfo(text)


def _looks_like_conninfo(text: str) -> bool:
    """key=value pairs only, one of them a libpq connection key or the study (a file name is never that)."""
    if not _CONNINFO_WHOLE.fullmatch(text):
        return False
    return bool({k for k, _ in _CONNINFO_PAIR.findall(text)} & {"study", "service", "host", "hostaddr", "dbname"})


def check_study_name(name: str) -> str:
    """A study name usable as a schema name, or a clear error."""
    if not STUDY_NAME.match(name or ""):
        raise BadInput(f"study name {name!r}: use lower-case letters, digits and underscores, starting with a "
                       "letter (at most 40 characters), e.g. study=wrenfield")
    return name


def parse_address(target: "str | ServerAddress") -> ServerAddress:
    """Split an address into libpq settings and the study name; refuse passwords and a missing study."""
    if isinstance(target, ServerAddress):
        return target
    text = target.strip()
    if text.startswith(_URI_SCHEMES):
        return _parse_uri(text)
    return _parse_conninfo(text)


def _parse_uri(text: str) -> ServerAddress:
    parts = urlsplit(text)
    userinfo = parts.netloc.rpartition("@")[0] if "@" in parts.netloc else ""
    if ":" in userinfo:
        raise BadInput(f"{_redact_uri(text)}: a password in the address is refused; {PASSWORD_HELP}")
    query = parse_qsl(parts.query, keep_blank_values=True)
    keys = [k for k, _ in query]
    if "password" in keys:
        raise BadInput(f"{_redact_uri(text)}: a password in the address is refused; {PASSWORD_HELP}")
    studies = [v for k, v in query if k == "study"]
    if not studies:
        raise BadInput(f"{text}: name the study in the address, e.g. {text}{'&' if parts.query else '?'}study=NAME")
    rest = "&".join(f"{k}={quote(v, safe='/:,.-_~')}" for k, v in query if k != "study")
    conninfo = f"{parts.scheme}://{parts.netloc}{parts.path}" + (f"?{rest}" if rest else "")
    return ServerAddress(conninfo, check_study_name(studies[-1]), text)


def _parse_conninfo(text: str) -> ServerAddress:
    pairs = [(k, v) for k, v in _CONNINFO_PAIR.findall(text)]
    keys = [k for k, _ in pairs]
    if "password" in keys:
        shown = " ".join(f"{k}={'***' if k == 'password' else v}" for k, v in pairs)
        raise BadInput(f"{shown}: a password in the address is refused; {PASSWORD_HELP}")
    studies = [v.strip("'") for k, v in pairs if k == "study"]
    if not studies:
        raise BadInput(f"{text}: name the study in the address, e.g. '{text} study=NAME'")
    conninfo = " ".join(f"{k}={v}" for k, v in pairs if k != "study")
    return ServerAddress(conninfo, check_study_name(studies[-1]), text)


def _redact_uri(text: str) -> str:
    """The address with any password replaced by ***, for the refusal message."""
    text = re.sub(r"(://[^:/@?]*):[^@/?]*@", r"\1:***@", text)
    return re.sub(r"(password=)[^&\s]*", r"\1***", text)
