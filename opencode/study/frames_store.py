"""Code frames and codes: the SQL (frames, frame_questions, codes). Call writers inside study.transaction()."""

from __future__ import annotations

import json
from typing import Any

from opencode.errors import NotAStudy
from opencode.study.store import Study

#: The columns of a code row, in the order `code_rows` returns them.
CODE_COLUMNS = ("id", "frame_id", "number", "label", "kind", "net_id", "description", "include_note",
                "exclude_note", "examples", "hotkey", "special", "active", "rule")
_SELECT_CODES = f"SELECT {', '.join(CODE_COLUMNS)} FROM codes"


def _row(values, study: Study) -> dict[str, Any]:
    row = dict(zip(CODE_COLUMNS, values))
    try:
        row["examples"] = json.loads(row["examples"] or "[]")
    except (TypeError, ValueError):
        raise NotAStudy(f"{study.path}: damaged study: the examples of code {row['number']} are not valid "
                        "JSON") from None
    if not isinstance(row["examples"], list) or not all(isinstance(e, str) for e in row["examples"]):
        raise NotAStudy(f"{study.path}: damaged study: the examples of code {row['number']} are not a list "
                        "of texts")
    row["active"] = bool(row["active"])
    return row


def frame_of_question(study: Study, question_id: int) -> tuple[int, str] | None:
    """(frame id, frame name) attached to a question, or None."""
    return study._db.execute(
        "SELECT f.id, f.name FROM frame_questions fq JOIN frames f ON f.id = fq.frame_id WHERE fq.question_id = ?",
        (question_id,)).fetchone()


def frame_by_name(study: Study, name: str) -> int | None:
    """A frame's id by name, or None."""
    row = study._db.execute("SELECT id FROM frames WHERE name = ?", (name,)).fetchone()
    return None if row is None else int(row[0])


def frame_name(study: Study, frame_id: int) -> str:
    """A frame's name by id."""
    return study._db.execute("SELECT name FROM frames WHERE id = ?", (frame_id,)).fetchone()[0]


def frame_names(study: Study) -> list[str]:
    """Every frame's name."""
    return [row[0] for row in study._db.execute("SELECT name FROM frames ORDER BY name")]


def insert_frame(study: Study, name: str) -> int:
    """Create an empty frame; returns its id."""
    return int(study._db.execute("INSERT INTO frames (name) VALUES (?)", (name,)).lastrowid)


def attach_question(study: Study, question_id: int, frame_id: int) -> None:
    """Attach (or re-attach) a question to a frame."""
    study._db.execute("INSERT OR REPLACE INTO frame_questions (question_id, frame_id) VALUES (?, ?)",
                     (question_id, frame_id))


def questions_of_frame(study: Study, frame_id: int) -> list[int]:
    """Ids of the questions sharing a frame."""
    return [row[0] for row in study._db.execute(
        "SELECT question_id FROM frame_questions WHERE frame_id = ? ORDER BY question_id", (frame_id,))]


def code_rows(study: Study, frame_id: int) -> list[dict[str, Any]]:
    """All codes of a frame as dicts, by number."""
    rows = study._db.execute(f"{_SELECT_CODES} WHERE frame_id = ? ORDER BY number", (frame_id,))
    return [_row(r, study) for r in rows]


def code_row(study: Study, code_id: int) -> dict[str, Any] | None:
    """One code by id, or None."""
    found = study._db.execute(f"{_SELECT_CODES} WHERE id = ?", (code_id,)).fetchone()
    return None if found is None else _row(found, study)


def code_by_number(study: Study, frame_id: int, number: int) -> dict[str, Any] | None:
    """One code by its number in a frame, or None."""
    found = study._db.execute(f"{_SELECT_CODES} WHERE frame_id = ? AND number = ?", (frame_id, number)).fetchone()
    return None if found is None else _row(found, study)


def code_by_hotkey(study: Study, frame_id: int, hotkey: str) -> dict[str, Any] | None:
    """The code holding a hotkey in a frame, or None."""
    found = study._db.execute(f"{_SELECT_CODES} WHERE frame_id = ? AND hotkey = ?", (frame_id, hotkey)).fetchone()
    return None if found is None else _row(found, study)


def max_number(study: Study, frame_id: int) -> int:
    """The highest code number in a frame (0 when empty)."""
    return int(study._db.execute("SELECT COALESCE(MAX(number), 0) FROM codes WHERE frame_id = ?",
                                (frame_id,)).fetchone()[0])


def _stored(row: dict[str, Any]) -> dict[str, Any]:
    stored = dict(row)
    if "examples" in stored:
        stored["examples"] = json.dumps(list(stored["examples"]), ensure_ascii=False)
    if "active" in stored:
        stored["active"] = int(bool(stored["active"]))
    return stored


def insert_code(study: Study, row: dict[str, Any]) -> int:
    """Insert a code (with its id when the row carries one, as undo/redo does); returns the id."""
    stored = {k: v for k, v in _stored(row).items() if k in CODE_COLUMNS and not (k == "id" and v is None)}
    names = ", ".join(stored)
    marks = ", ".join("?" for _ in stored)
    return int(study._db.execute(f"INSERT INTO codes ({names}) VALUES ({marks})", tuple(stored.values())).lastrowid)


def update_code(study: Study, code_id: int, fields: dict[str, Any]) -> None:
    """Change some columns of one code."""
    stored = {k: v for k, v in _stored(fields).items() if k in CODE_COLUMNS and k not in ("id", "frame_id")}
    if stored:
        assignments = ", ".join(f"{k} = ?" for k in stored)
        study._db.execute(f"UPDATE codes SET {assignments} WHERE id = ?", (*stored.values(), code_id))


def delete_code(study: Study, code_id: int) -> None:
    """Remove one code row (its assignments must be gone first)."""
    study._db.execute("DELETE FROM codes WHERE id = ?", (code_id,))


def children_of(study: Study, code_id: int) -> list[dict[str, Any]]:
    """Codes and nets whose parent net is `code_id`."""
    return [_row(r, study) for r in study._db.execute(f"{_SELECT_CODES} WHERE net_id = ? ORDER BY number", (code_id,))]


def code_for_verbatim(study: Study, verbatim_id: int, number: int) -> tuple | None:
    """(frame id, code id, kind, active, label) of code `number` in the frame of a verbatim's question.

    None when the verbatim does not exist or its question has no frame; the code fields are None when the
    frame has no such number.
    """
    return study._db.execute(
        "SELECT fq.frame_id, c.id, c.kind, c.active, c.label FROM verbatims v "
        "JOIN frame_questions fq ON fq.question_id = v.question_id "
        "LEFT JOIN codes c ON c.frame_id = fq.frame_id AND c.number = ? WHERE v.id = ?",
        (number, verbatim_id)).fetchone()
