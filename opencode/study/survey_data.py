"""Respondents, variables (labels, value order, missing codes), their values and the verbatims: the SQL."""

from __future__ import annotations

import io
import json
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from opencode.errors import NotAStudy, OpenCodeError
from opencode.study.store import Study

KINDS = ("text", "single", "multiple", "numeric", "date")
ROLES = ("id", "question", "outcome", "banner", "weight", "other")


@dataclass
class Variable:
    """A survey variable: an open question or a closed-ended item, with its labels and missing codes."""

    id: int
    name: str
    label: str
    kind: str
    role: str
    position: int
    origin: str = "import"
    value_labels: dict[float, str] = field(default_factory=dict)  # in value order
    missing_codes: set[float] = field(default_factory=set)

    def display(self, code: float) -> str:
        """The label of a code, or the code itself written plainly."""
        if code in self.value_labels:
            return self.value_labels[code]
        return str(int(code)) if float(code).is_integer() else str(code)


# -- encoding of value arrays -----------------------------------------------------------------------------------
def encode_values(values) -> tuple[str, bytes]:
    """Encode one variable's values: float arrays as .npy bytes, anything else as JSON."""
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiub":
        buffer = io.BytesIO()
        np.save(buffer, values.astype("<f8"), allow_pickle=False)
        return "f8", buffer.getvalue()
    return "json", json.dumps(list(values), ensure_ascii=False).encode("utf-8")


def decode_values(encoding: str, data: bytes, where: str = "stored values"):
    """Decode what `encode_values` wrote; anything else (a damaged or crafted study) is a NotAStudy error
    naming `where` ("FILE: the values of variable X"). Never unpickles."""
    try:
        if encoding == "f8":
            values = np.load(io.BytesIO(data), allow_pickle=False)
            if not isinstance(values, np.ndarray) or values.ndim != 1 or values.dtype.kind not in "fiub":
                raise ValueError("not a one-dimensional numeric array")
            return values
        if encoding == "json":
            values = json.loads(bytes(data).decode("utf-8"))
            if not isinstance(values, list):
                raise ValueError("not a JSON list")
            return values
        raise ValueError(f"unknown encoding {encoding!r}")
    except (ValueError, TypeError, OSError, EOFError) as error:
        file, _, what = where.rpartition(": ")
        raise NotAStudy(f"{file + ': ' if file else ''}damaged study: {what} cannot be read ({error})") from None


# -- reading ----------------------------------------------------------------------------------------------------
def _load_variables(study: Study, where: str = "", params: tuple = ()) -> list[Variable]:
    rows = study.db.execute(
        f"SELECT id, name, label, kind, role, position, origin FROM variables {where} ORDER BY position, id",
        params).fetchall()
    variables = [Variable(*row) for row in rows]
    if not variables:
        return variables
    by_id = {v.id: v for v in variables}
    for variable_id, code, label in study.db.execute(
            "SELECT variable_id, code, label FROM value_labels ORDER BY variable_id, position"):
        if variable_id in by_id:
            by_id[variable_id].value_labels[code] = label
    for variable_id, code in study.db.execute("SELECT variable_id, code FROM missing_codes"):
        if variable_id in by_id:
            by_id[variable_id].missing_codes.add(code)
    return variables


def list_variables(study: Study, role: str | None = None) -> list[Variable]:
    """All variables in file order, optionally only those with one role."""
    if role is None:
        return _load_variables(study)
    return _load_variables(study, "WHERE role = ?", (role,))


def get_variable(study: Study, name: str) -> Variable:
    """One variable by name; a clear error lists the names there are."""
    found = _load_variables(study, "WHERE name = ?", (name,))
    if not found:
        names = ", ".join(v.name for v in list_variables(study)) or "(none)"
        raise OpenCodeError(f"{study.path}: no variable named {name!r} (variables: {names})")
    return found[0]


def list_questions(study: Study) -> list[Variable]:
    """The open questions whose verbatims get coded."""
    return list_variables(study, role="question")


def get_question(study: Study, name: str) -> Variable:
    """One open question by name; a clear error lists the questions there are."""
    variable = _load_variables(study, "WHERE name = ? AND role = 'question'", (name,))
    if not variable:
        names = ", ".join(q.name for q in list_questions(study)) or "(none)"
        raise OpenCodeError(f"{study.path}: no open question named {name!r} (questions: {names})")
    return variable[0]


def respondent_count(study: Study) -> int:
    """How many respondents the study holds."""
    return int(study.db.execute("SELECT COUNT(*) FROM respondents").fetchone()[0])


def respondent_keys(study: Study) -> list[str]:
    """Respondent ids in study order (the order value arrays follow)."""
    return [row[0] for row in study.db.execute("SELECT key FROM respondents ORDER BY id")]


def raw_values(study: Study, name: str):
    """A variable's values as stored (missing codes kept), aligned with `respondent_keys`."""
    variable = get_variable(study, name)
    row = study.db.execute("SELECT encoding, data, n_rows FROM variable_data WHERE variable_id = ?",
                           (variable.id,)).fetchone()
    n = respondent_count(study)
    if row is None:
        return np.full(n, np.nan)
    values = decode_values(row[0], row[1], f"{study.path}: the values of variable {name!r}")
    if len(values) < n:  # respondents added by a later wave: they have no value yet
        if isinstance(values, np.ndarray):
            values = np.concatenate([values, np.full(n - len(values), np.nan)])
        else:
            values = list(values) + [None] * (n - len(values))
    return values


def analysis_values(study: Study, name: str) -> np.ndarray:
    """A numeric variable's values with its missing codes turned into NaN (what every analysis uses)."""
    variable = get_variable(study, name)
    if variable.kind not in ("single", "numeric"):
        raise OpenCodeError(f"{study.path}: variable {name!r} is {variable.kind}, not a single-choice or numeric item")
    values = np.array(raw_values(study, name), dtype=float)
    if variable.missing_codes:
        values[np.isin(values, list(variable.missing_codes))] = np.nan
    return values


def multiple_values(study: Study, name: str) -> list[set[float]]:
    """A multiple-response variable's chosen codes per respondent (missing codes dropped)."""
    variable = get_variable(study, name)
    if variable.kind != "multiple":
        raise OpenCodeError(f"{study.path}: variable {name!r} is {variable.kind}, not multiple response")
    return [set() if not chosen else {float(c) for c in chosen if float(c) not in variable.missing_codes}
            for chosen in raw_values(study, name)]


def verbatims(study: Study, question: str, include_nonanswers: bool = True) -> pd.DataFrame:
    """A question's verbatims: verbatim_id, respondent_id, respondent (key), text, nonanswer; in study order."""
    variable = get_question(study, question)
    query = ("SELECT v.id AS verbatim_id, v.respondent_id, r.key AS respondent, v.text, v.nonanswer "
             "FROM verbatims v JOIN respondents r ON r.id = v.respondent_id WHERE v.question_id = ?")
    if not include_nonanswers:
        query += " AND v.nonanswer = 0"
    frame = pd.read_sql_query(query + " ORDER BY v.respondent_id", study.db, params=(variable.id,))
    frame["nonanswer"] = frame["nonanswer"].astype(bool)
    if not pd.api.types.is_string_dtype(frame["text"]):  # a C-level look; the Python one only when it fails
        odd = frame.loc[frame["text"].map(type).ne(str), "verbatim_id"]
        if len(odd):
            raise NotAStudy(f"{study.path}: damaged study: verbatim {int(odd.iloc[0])} of question {question!r} "
                            "holds binary data or a number, not text")
    return frame


# -- writing (call inside study.transaction()) -----------------------------------------------------------------------
def add_variable(study: Study, name: str, *, label: str, kind: str, role: str, origin: str = "import",
                 value_labels: dict[float, str] | None = None, missing_codes=()) -> int:
    """Insert a variable with its labels; returns its id."""
    if kind not in KINDS:
        raise OpenCodeError(f"variable {name!r}: unknown kind {kind!r} (kinds: {', '.join(KINDS)})")
    if role not in ROLES:
        raise OpenCodeError(f"variable {name!r}: unknown role {role!r} (roles: {', '.join(ROLES)})")
    position = study.db.execute("SELECT COALESCE(MAX(position), 0) + 1 FROM variables").fetchone()[0]
    cursor = study.db.execute(
        "INSERT INTO variables (name, label, kind, role, position, origin) VALUES (?, ?, ?, ?, ?, ?)",
        (name, label or "", kind, role, position, origin))
    variable_id = int(cursor.lastrowid)
    set_value_labels(study, variable_id, value_labels or {})
    study.db.executemany("INSERT INTO missing_codes (variable_id, code) VALUES (?, ?)",
                         [(variable_id, float(code)) for code in missing_codes])
    return variable_id


def set_value_labels(study: Study, variable_id: int, value_labels: dict[float, str]) -> None:
    """Replace a variable's value labels (their order is the dict's order)."""
    study.db.execute("DELETE FROM value_labels WHERE variable_id = ?", (variable_id,))
    study.db.executemany(
        "INSERT INTO value_labels (variable_id, code, label, position) VALUES (?, ?, ?, ?)",
        [(variable_id, float(code), str(label), i) for i, (code, label) in enumerate(value_labels.items())])


def set_variable_role(study: Study, name: str, role: str, actor: str = "oecode") -> None:
    """Change a variable's role (e.g. mark it as the outcome or a banner), audited."""
    if role not in ROLES:
        raise OpenCodeError(f"variable {name!r}: unknown role {role!r} (roles: {', '.join(ROLES)})")
    variable = get_variable(study, name)
    with study.transaction():
        study.db.execute("UPDATE variables SET role = ? WHERE id = ?", (role, variable.id))
        study.audit(actor, "set-role", "variable", variable.id, {"before": variable.role, "after": role})


def write_values(study: Study, variable_id: int, values) -> None:
    """Store (or replace) one variable's values aligned with respondents."""
    encoding, data = encode_values(values)
    study.db.execute("INSERT OR REPLACE INTO variable_data (variable_id, encoding, n_rows, data) VALUES (?, ?, ?, ?)",
                     (variable_id, encoding, len(values), data))


def add_indicator_variable(study: Study, name: str, label: str, values: np.ndarray, actor: str = "oecode") -> int:
    """Store a 0/1 variable made by an analysis (e.g. 'verbatim mentions a term'), replacing one of the same name."""
    with study.transaction():
        old = study.db.execute("SELECT id, origin FROM variables WHERE name = ?", (name,)).fetchone()
        if old is not None:
            if old[1] != "indicator":
                raise OpenCodeError(f"{study.path}: a survey variable named {name!r} exists; choose another name")
            study.db.execute("DELETE FROM variables WHERE id = ?", (old[0],))
        variable_id = add_variable(study, name, label=label, kind="single", role="banner", origin="indicator",
                                   value_labels={0.0: "no", 1.0: "yes"})
        write_values(study, variable_id, np.asarray(values, dtype=float))
        study.audit(actor, "add-indicator", "variable", variable_id, {"name": name, "label": label})
    return variable_id
