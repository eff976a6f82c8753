"""Respondents, variables (labels, value order, missing codes), their values and the verbatims: the SQL."""

from __future__ import annotations

import io
import json
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from opencode.errors import NotAStudy, OpenCodeError
from opencode.study.store import Study, read_frame

if TYPE_CHECKING:  # pandas loads only where a frame is read, so the desk starts without it
    import pandas as pd

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
    rows = study._db.execute(
        f"SELECT id, name, label, kind, role, position, origin FROM variables {where} ORDER BY position, id",
        params).fetchall()
    variables = [Variable(*row) for row in rows]
    if not variables:
        return variables
    by_id = {v.id: v for v in variables}
    for variable_id, code, label in study._db.execute(
            "SELECT variable_id, code, label FROM value_labels ORDER BY variable_id, position"):
        if variable_id in by_id:
            by_id[variable_id].value_labels[code] = label
    for variable_id, code in study._db.execute("SELECT variable_id, code FROM missing_codes"):
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
    return int(study._db.execute("SELECT COUNT(*) FROM respondents").fetchone()[0])


def respondent_keys(study: Study) -> list[str]:
    """Respondent ids in study order (the order value arrays follow)."""
    return [row[0] for row in study._db.execute("SELECT key FROM respondents ORDER BY id")]


def raw_values(study: Study, name: str):
    """A variable's values as stored (missing codes kept), aligned with `respondent_keys`."""
    variable = get_variable(study, name)
    row = study._db.execute("SELECT encoding, data, n_rows FROM variable_data WHERE variable_id = ?",
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
    frame = read_frame(study, query + " ORDER BY v.respondent_id", (variable.id,))
    frame["nonanswer"] = frame["nonanswer"].astype(bool)
    from pandas.api.types import is_string_dtype  # pandas is imported on first use: the desk starts without it

    if not is_string_dtype(frame["text"]):  # a C-level look; the Python one only when it fails
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
    position = study._db.execute("SELECT COALESCE(MAX(position), 0) + 1 FROM variables").fetchone()[0]
    cursor = study._db.execute(
        "INSERT INTO variables (name, label, kind, role, position, origin) VALUES (?, ?, ?, ?, ?, ?)",
        (name, label or "", kind, role, position, origin))
    variable_id = int(cursor.lastrowid)
    set_value_labels(study, variable_id, value_labels or {})
    study._db.executemany("INSERT INTO missing_codes (variable_id, code) VALUES (?, ?)",
                         [(variable_id, float(code)) for code in missing_codes])
    return variable_id


def set_value_labels(study: Study, variable_id: int, value_labels: dict[float, str]) -> None:
    """Replace a variable's value labels (their order is the dict's order)."""
    study._db.execute("DELETE FROM value_labels WHERE variable_id = ?", (variable_id,))
    study._db.executemany(
        "INSERT INTO value_labels (variable_id, code, label, position) VALUES (?, ?, ?, ?)",
        [(variable_id, float(code), str(label), i) for i, (code, label) in enumerate(value_labels.items())])


def set_variable_role(study: Study, name: str, role: str, actor: str = "oecode") -> None:
    """Change a variable's role (e.g. mark it as the outcome or a banner), audited."""
    if role not in ROLES:
        raise OpenCodeError(f"variable {name!r}: unknown role {role!r} (roles: {', '.join(ROLES)})")
    variable = get_variable(study, name)
    with study.transaction():
        study._db.execute("UPDATE variables SET role = ? WHERE id = ?", (role, variable.id))
        study.audit(actor, "set-role", "variable", variable.id, {"before": variable.role, "after": role})


def write_values(study: Study, variable_id: int, values) -> None:
    """Store (or replace) one variable's values aligned with respondents."""
    encoding, data = encode_values(values)
    study._db.execute("INSERT OR REPLACE INTO variable_data (variable_id, encoding, n_rows, data) VALUES (?, ?, ?, ?)",
                     (variable_id, encoding, len(values), data))


def add_indicator_variable(study: Study, name: str, label: str, values: np.ndarray, actor: str = "oecode") -> int:
    """Store a 0/1 variable made by an analysis (e.g. 'verbatim mentions a term'), replacing one of the same name."""
    with study.transaction():
        old = study._db.execute("SELECT id, origin FROM variables WHERE name = ?", (name,)).fetchone()
        if old is not None:
            if old[1] != "indicator":
                raise OpenCodeError(f"{study.path}: a survey variable named {name!r} exists; choose another name")
            study._db.execute("DELETE FROM variables WHERE id = ?", (old[0],))
        variable_id = add_variable(study, name, label=label, kind="single", role="banner", origin="indicator",
                                   value_labels={0.0: "no", 1.0: "yes"})
        write_values(study, variable_id, np.asarray(values, dtype=float))
        study.audit(actor, "add-indicator", "variable", variable_id, {"name": name, "label": label})
    return variable_id


# -- what an import writes (call inside study.transaction()) -------------------------------------------------------
def respondent_ids_by_key(study: Study) -> dict[str, int]:
    """Survey respondent id -> the study's respondent row id."""
    return dict(study._db.execute("SELECT key, id FROM respondents"))


def add_respondents(study: Study, first_id: int, keys: list[str]) -> None:
    """Add respondents numbered first_id, first_id + 1, ... in the order of `keys`."""
    if not keys:
        return
    if study.dialect == "sqlite":  # one statement over a JSON array: far faster than a row at a time
        study._db.execute("INSERT INTO respondents (id, key) SELECT ? + key, value FROM json_each(?)",
                          (first_id, json.dumps(keys)))
    else:
        study._db.executemany("INSERT INTO respondents (id, key) VALUES (?, ?)",
                              [(first_id + i, key) for i, key in enumerate(keys)])


def variable_identity(study: Study, name: str) -> tuple[int, str, str] | None:
    """(id, kind, role) of a variable by name, or None."""
    row = study._db.execute("SELECT id, kind, role FROM variables WHERE name = ?", (name,)).fetchone()
    return None if row is None else (int(row[0]), row[1], row[2])


def set_variable_label(study: Study, variable_id: int, label: str) -> None:
    """Replace a variable's label."""
    study._db.execute("UPDATE variables SET label = ? WHERE id = ?", (label, variable_id))


def add_missing_codes(study: Study, variable_id: int, codes) -> None:
    """Add missing codes to a variable (codes it has already are kept once)."""
    study._db.executemany("INSERT OR IGNORE INTO missing_codes (variable_id, code) VALUES (?, ?)",
                          [(variable_id, float(c)) for c in codes])


def stored_values(study: Study, variable_id: int):
    """A variable's stored values as written (not padded to later respondents), or None when it has none."""
    row = study._db.execute("SELECT encoding, data FROM variable_data WHERE variable_id = ?",
                            (variable_id,)).fetchone()
    return None if row is None else decode_values(row[0], bytes(row[1]))


def question_has_verbatims(study: Study, question_id: int) -> bool:
    """Whether any verbatim of the question is stored."""
    return study._db.execute("SELECT 1 FROM verbatims WHERE question_id = ? LIMIT 1",
                             (question_id,)).fetchone() is not None


def add_verbatim_block(study: Study, question_id: int, first_respondent_id: int, texts_json: str) -> None:
    """Add a question's verbatims for consecutive respondents from a JSON list of texts (non-answer flags 0)."""
    if study.dialect == "sqlite":
        study._db.execute("INSERT INTO verbatims (question_id, respondent_id, text, nonanswer) "
                          "SELECT ?, ? + key, value, 0 FROM json_each(?)",
                          (question_id, first_respondent_id, texts_json))
    else:
        texts = json.loads(texts_json)
        study._db.executemany("INSERT INTO verbatims (question_id, respondent_id, text, nonanswer) VALUES (?, ?, ?, 0)",
                              [(question_id, first_respondent_id + i, t) for i, t in enumerate(texts)])


def flag_nonanswer_rows(study: Study, question_id: int, respondent_ids) -> None:
    """Mark these respondents' verbatims of a question as non-answers."""
    study._db.executemany("UPDATE verbatims SET nonanswer = 1 WHERE question_id = ? AND respondent_id = ?",
                          [(question_id, int(rid)) for rid in respondent_ids])


def set_nonanswer_flags(study: Study, verbatim_ids, flag: bool) -> int:
    """Set or clear the non-answer flag of these verbatims (call inside a transaction); how many changed."""
    value = int(bool(flag))
    changed = 0
    for vid in verbatim_ids:
        changed += study._db.execute("UPDATE verbatims SET nonanswer = ? WHERE id = ? AND nonanswer <> ?",
                                     (value, int(vid), value)).rowcount
    return changed


def nonanswer_text_counts(study: Study, question_id: int) -> list[tuple[str, int]]:
    """The texts of a question's verbatims flagged as non-answers, each with its count; most frequent first."""
    return [(text, int(n)) for text, n in study._db.execute(
        "SELECT text, COUNT(*) AS n FROM verbatims WHERE question_id = ? AND nonanswer = 1 "
        "GROUP BY text ORDER BY n DESC, text", (question_id,))]


def verbatims_by_respondent(study: Study, question_id: int) -> dict[int, tuple[str, str]]:
    """Respondent row id -> (stored text, survey respondent id) for one question."""
    return {int(rid): (text, key) for rid, text, key in study._db.execute(
        "SELECT v.respondent_id, v.text, r.key FROM verbatims v JOIN respondents r ON r.id = v.respondent_id "
        "WHERE v.question_id = ?", (question_id,))}


def add_verbatims(study: Study, rows: list[tuple[int, int, str, int]]) -> None:
    """Add verbatims as (question id, respondent row id, text, non-answer 0/1) rows."""
    study._db.executemany("INSERT INTO verbatims (question_id, respondent_id, text, nonanswer) VALUES (?, ?, ?, ?)",
                          [(q, r, t, int(bool(n))) for q, r, t, n in rows])

def add_derived_variable(study: Study, name: str, label: str, values: np.ndarray, *, kind: str = "single",
                         role: str = "banner", value_labels: dict[float, str] | None = None, missing_codes=(),
                         action: str = "add-derived", details: dict | None = None, actor: str = "oecode") -> int:
    """Store a variable an analysis made (e.g. a sentiment score), replacing an earlier one of the same name;
    a survey variable of that name is never replaced."""
    with study.transaction():
        old = study._db.execute("SELECT id, origin FROM variables WHERE name = ?", (name,)).fetchone()
        if old is not None:
            if old[1] != "indicator":
                raise OpenCodeError(f"{study.path}: a survey variable named {name!r} exists; choose another name")
            study._db.execute("DELETE FROM variables WHERE id = ?", (old[0],))
        variable_id = add_variable(study, name, label=label, kind=kind, role=role, origin="indicator",
                                   value_labels=value_labels, missing_codes=missing_codes)
        write_values(study, variable_id, np.asarray(values, dtype=float))
        study.audit(actor, action, "variable", variable_id, {"name": name, "label": label, **(details or {})})
    return variable_id
