"""Assignments, done marks, notes and the audit walk used by undo/redo: the SQL.

Writers expect to run inside study.transaction(); readers use the indexes on (coder, verbatim_id),
(code_id) and the verbatims' primary key so a single-verbatim call stays in the low milliseconds.
"""

from __future__ import annotations

import json
from typing import Any, Iterator

import numpy as np
import pandas as pd

from opencode.study.store import Study, read_frame

#: The columns of an assignment row as ops and readers carry it.
ASSIGNMENT_COLUMNS = ("verbatim_id", "code_id", "coder", "source", "confidence", "created_at")


# -- assignments -------------------------------------------------------------------------------------------------
def get_assignment(study: Study, verbatim_id: int, code_id: int, coder: str) -> dict[str, Any] | None:
    """One assignment row, or None."""
    row = study._db.execute(
        f"SELECT {', '.join(ASSIGNMENT_COLUMNS)} FROM assignments WHERE verbatim_id = ? AND code_id = ? AND coder = ?",
        (verbatim_id, code_id, coder)).fetchone()
    return None if row is None else dict(zip(ASSIGNMENT_COLUMNS, row))


def put_assignment(study: Study, row: dict[str, Any]) -> None:
    """Insert an assignment row, replacing one with the same verbatim, code and coder."""
    study._db.execute(
        f"INSERT OR REPLACE INTO assignments ({', '.join(ASSIGNMENT_COLUMNS)}) VALUES (?, ?, ?, ?, ?, ?)",
        tuple(row[c] for c in ASSIGNMENT_COLUMNS))


def remove_assignment(study: Study, verbatim_id: int, code_id: int, coder: str) -> None:
    """Delete one assignment row (no-op when absent)."""
    study._db.execute("DELETE FROM assignments WHERE verbatim_id = ? AND code_id = ? AND coder = ?",
                     (verbatim_id, code_id, coder))


def update_assignment(study: Study, verbatim_id: int, code_id: int, coder: str, fields: dict[str, Any]) -> None:
    """Change the source / confidence / time of one assignment."""
    allowed = {k: v for k, v in fields.items() if k in ("source", "confidence", "created_at")}
    if allowed:
        study._db.execute(f"UPDATE assignments SET {', '.join(f'{k} = ?' for k in allowed)} "
                         "WHERE verbatim_id = ? AND code_id = ? AND coder = ?",
                         (*allowed.values(), verbatim_id, code_id, coder))


def assignments_of_code(study: Study, code_id: int) -> list[dict[str, Any]]:
    """Every assignment of one code (any coder)."""
    return [dict(zip(ASSIGNMENT_COLUMNS, r)) for r in study._db.execute(
        f"SELECT {', '.join(ASSIGNMENT_COLUMNS)} FROM assignments WHERE code_id = ?", (code_id,))]


def count_of_code(study: Study, code_id: int) -> int:
    """How many assignments a code has (any coder)."""
    return int(study._db.execute("SELECT COUNT(*) FROM assignments WHERE code_id = ?", (code_id,)).fetchone()[0])


def codes_of_verbatim(study: Study, verbatim_id: int, coder: str) -> list[tuple[int, str, float | None]]:
    """(code number, source, confidence) a coder holds on one verbatim, by number."""
    return study._db.execute(
        "SELECT c.number, a.source, a.confidence FROM assignments a JOIN codes c ON c.id = a.code_id "
        "WHERE a.coder = ? AND a.verbatim_id = ? ORDER BY c.number", (coder, verbatim_id)).fetchall()


def assignments_table(study: Study, question_id: int, coders: list[str] | None = None,
                      sources: tuple[str, ...] | None = None) -> pd.DataFrame:
    """A question's assignments: verbatim_id, number, coder, source, confidence, created_at."""
    query = ("SELECT a.verbatim_id, c.number, a.coder, a.source, a.confidence, a.created_at "
             "FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id JOIN codes c ON c.id = a.code_id "
             "WHERE v.question_id = ?")
    params: list[Any] = [question_id]
    if coders:
        query += f" AND a.coder IN ({', '.join('?' for _ in coders)})"
        params += list(coders)
    if sources:
        query += f" AND a.source IN ({', '.join('?' for _ in sources)})"
        params += list(sources)
    return read_frame(study, query + " ORDER BY a.verbatim_id, c.number", params)


def code_counts(study: Study, question_id: int, coder: str, sources: tuple[str, ...]) -> dict[int, int]:
    """Code number -> how many of the question's verbatims the coder gave it (only the given sources)."""
    marks = ", ".join("?" for _ in sources)
    return dict(study._db.execute(
        "SELECT c.number, COUNT(*) FROM assignments a JOIN codes c ON c.id = a.code_id "
        "JOIN verbatims v ON v.id = a.verbatim_id "
        f"WHERE a.coder = ? AND v.question_id = ? AND a.source IN ({marks}) GROUP BY c.number",
        (coder, question_id, *sources)))


def uncoded_ids(study: Study, question_id: int, coder: str, after: int | None, limit: int | None,
                include_nonanswers: bool) -> list[int]:
    """Verbatim ids (ascending) the coder has neither hand-coded nor marked done."""
    # "+v.question_id" keeps SQLite walking the rowid in order (fast with a LIMIT) instead of sorting the question
    query = ("SELECT v.id FROM verbatims v WHERE +v.question_id = ? AND v.id > ? "
             "AND NOT EXISTS (SELECT 1 FROM coded_marks m WHERE m.verbatim_id = v.id AND m.coder = ?) "
             "AND NOT EXISTS (SELECT 1 FROM assignments a WHERE a.coder = ? AND a.verbatim_id = v.id "
             "AND a.source = 'hand')")
    if not include_nonanswers:
        query += " AND v.nonanswer = 0"
    query += " ORDER BY v.id"
    params: list[Any] = [question_id, -1 if after is None else after, coder, coder]
    if limit is not None:
        query += " LIMIT ?"
        params.append(int(limit))
    return [row[0] for row in study._db.execute(query, params)]


def coded_verbatim_ids(study: Study, question_id: int, coder: str) -> np.ndarray:
    """Ids of the question's verbatims the coder has coded: any hand code, or marked done."""
    rows = study._db.execute(
        "SELECT a.verbatim_id FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
        "WHERE a.coder = ? AND a.source = 'hand' AND v.question_id = ? "
        "UNION SELECT m.verbatim_id FROM coded_marks m JOIN verbatims v ON v.id = m.verbatim_id "
        "WHERE m.coder = ? AND v.question_id = ?", (coder, question_id, coder, question_id)).fetchall()
    return np.array(sorted(r[0] for r in rows), dtype=np.int64)


def question_has_assignments(study: Study, question_id: int) -> bool:
    """Whether any verbatim of the question holds any code (any coder, any source)."""
    return study._db.execute("SELECT 1 FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
                             "WHERE v.question_id = ? LIMIT 1", (question_id,)).fetchone() is not None


def coders_of_question(study: Study, question_id: int) -> list[tuple[str, int]]:
    """(coder, number of hand assignments) for a question, most active first."""
    return study._db.execute(
        "SELECT a.coder, COUNT(*) FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
        "WHERE v.question_id = ? AND a.source = 'hand' GROUP BY a.coder ORDER BY COUNT(*) DESC, a.coder",
        (question_id,)).fetchall()


def verbatim_question(study: Study, verbatim_id: int) -> int | None:
    """The question id a verbatim answers, or None if there is no such verbatim."""
    row = study._db.execute("SELECT question_id FROM verbatims WHERE id = ?", (verbatim_id,)).fetchone()
    return None if row is None else int(row[0])


def verbatim_text(study: Study, verbatim_id: int) -> str | None:
    """One verbatim's text, or None."""
    row = study._db.execute("SELECT text FROM verbatims WHERE id = ?", (verbatim_id,)).fetchone()
    return None if row is None else row[0]


def verbatim_is_nonanswer(study: Study, verbatim_id: int) -> bool:
    """Whether a verbatim is flagged as a non-answer (False when there is no such verbatim)."""
    row = study._db.execute("SELECT nonanswer FROM verbatims WHERE id = ?", (verbatim_id,)).fetchone()
    return bool(row and row[0])


def verbatim_ids_by_respondent(study: Study, question_id: int) -> dict[str, int]:
    """Respondent key -> verbatim id for one question."""
    return dict(study._db.execute(
        "SELECT r.key, v.id FROM verbatims v JOIN respondents r ON r.id = v.respondent_id WHERE v.question_id = ?",
        (question_id,)))


# -- done marks and notes --------------------------------------------------------------------------------------------
def get_mark(study: Study, verbatim_id: int, coder: str) -> str | None:
    """When the coder marked a verbatim done, or None."""
    row = study._db.execute("SELECT marked_at FROM coded_marks WHERE verbatim_id = ? AND coder = ?",
                           (verbatim_id, coder)).fetchone()
    return None if row is None else row[0]


def put_mark(study: Study, verbatim_id: int, coder: str, marked_at: str) -> None:
    """Mark a verbatim done for a coder."""
    study._db.execute("INSERT OR REPLACE INTO coded_marks (verbatim_id, coder, marked_at) VALUES (?, ?, ?)",
                     (verbatim_id, coder, marked_at))


def remove_mark(study: Study, verbatim_id: int, coder: str) -> None:
    """Clear a coder's done mark on a verbatim."""
    study._db.execute("DELETE FROM coded_marks WHERE verbatim_id = ? AND coder = ?", (verbatim_id, coder))


def marked_ids(study: Study, question_id: int, coder: str) -> set[int]:
    """Verbatim ids of a question the coder marked done."""
    return {r[0] for r in study._db.execute(
        "SELECT m.verbatim_id FROM coded_marks m JOIN verbatims v ON v.id = m.verbatim_id "
        "WHERE m.coder = ? AND v.question_id = ?", (coder, question_id))}


def get_note(study: Study, verbatim_id: int, coder: str) -> str | None:
    """A coder's note on a verbatim, or None."""
    row = study._db.execute("SELECT text FROM notes WHERE verbatim_id = ? AND coder = ?",
                           (verbatim_id, coder)).fetchone()
    return None if row is None else row[0]


def put_note(study: Study, verbatim_id: int, coder: str, text: str | None, updated_at: str) -> None:
    """Set (or with None clear) a coder's note on a verbatim."""
    if text is None:
        study._db.execute("DELETE FROM notes WHERE verbatim_id = ? AND coder = ?", (verbatim_id, coder))
    else:
        study._db.execute("INSERT OR REPLACE INTO notes (verbatim_id, coder, text, updated_at) VALUES (?, ?, ?, ?)",
                         (verbatim_id, coder, text, updated_at))


# -- the audit walk behind undo / redo -------------------------------------------------------------------------------
def audit_newest_first(study: Study, actor: str) -> Iterator[tuple[int, str, int]]:
    """(id, action, undone) of an actor's audit rows, newest first (lazily: callers stop early)."""
    cursor = study._db.execute("SELECT id, action, undone FROM audit WHERE actor = ? ORDER BY id DESC", (actor,))
    try:
        yield from cursor
    finally:
        cursor.close()


def audit_payload(study: Study, audit_id: int) -> dict[str, Any]:
    """The JSON payload of one audit row."""
    return json.loads(study._db.execute("SELECT payload FROM audit WHERE id = ?", (audit_id,)).fetchone()[0])


def set_undone(study: Study, audit_ids: list[int], state: int) -> None:
    """Set the undone state of audit rows (0 live, 1 undone and redoable, 2 undone for good)."""
    study._db.executemany("UPDATE audit SET undone = ? WHERE id = ?", [(state, i) for i in audit_ids])


def code_texts(study: Study, question_id: int, code_id: int, coder: str | None, limit: int) -> list[str]:
    """Texts of verbatims holding a hand code (any coder when None), shortest first, for codebook examples."""
    query = ("SELECT v.text FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
             "WHERE a.code_id = ? AND v.question_id = ? AND a.source = 'hand' AND v.nonanswer = 0")
    params: list[Any] = [code_id, question_id]
    if coder is not None:
        query += " AND a.coder = ?"
        params.append(coder)
    return [r[0] for r in study._db.execute(query + " GROUP BY v.text ORDER BY length(v.text), MIN(v.id) LIMIT ?",
                                            (*params, limit))]
