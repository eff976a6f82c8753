"""The SQL behind a study's lexicons (one per question, NULL question = the study default) and the
last phrase-suggestion list of each question (kept so a suggestion can be accepted by its rank)."""

from __future__ import annotations

import json
from typing import Any

from opencode.errors import OpenCodeError
from opencode.study.store import Study, now

_SUGGESTIONS_KEY = "text.phrase_suggestions.{}"


def read_lexicon_data(study: Study, question_id: int | None) -> dict[str, Any] | None:
    """The stored lexicon dict of a question (None: the study default), or None when there is none."""
    row = study._db.execute("SELECT data FROM lexicons WHERE question_id IS ?", (question_id,)).fetchone()
    if row is None:
        return None
    try:
        data = json.loads(row[0])
    except json.JSONDecodeError as error:
        where = "the study default" if question_id is None else f"question id {question_id}"
        raise OpenCodeError(f"{study.path}: the stored lexicon of {where} is not valid JSON ({error})") from error
    if not isinstance(data, dict):
        raise OpenCodeError(f"{study.path}: the stored lexicon of question id {question_id} is not a JSON object")
    return data


def write_lexicon_data(study: Study, question_id: int | None, data: dict[str, Any]) -> None:
    """Store (replace) a question's lexicon dict; call inside study.transaction()."""
    study._db.execute("DELETE FROM lexicons WHERE question_id IS ?", (question_id,))
    study._db.execute("INSERT INTO lexicons (question_id, data, updated_at) VALUES (?, ?, ?)",
                     (question_id, json.dumps(data, ensure_ascii=False, sort_keys=True), now()))


def delete_lexicon_data(study: Study, question_id: int | None) -> bool:
    """Drop a question's own lexicon (it falls back to the study default); True if there was one."""
    cursor = study._db.execute("DELETE FROM lexicons WHERE question_id IS ?", (question_id,))
    return cursor.rowcount > 0


def save_phrase_suggestions(study: Study, question_id: int, rows: list[dict[str, Any]]) -> None:
    """Remember a question's latest phrase suggestions (derived output: not audited)."""
    with study.transaction():
        study._db.execute("INSERT OR REPLACE INTO settings (key, value) VALUES (?, ?)",
                         (_SUGGESTIONS_KEY.format(question_id), json.dumps(rows, ensure_ascii=False)))


def load_phrase_suggestions(study: Study, question_id: int) -> list[dict[str, Any]]:
    """The latest phrase suggestions saved for a question (empty when none were made)."""
    row = study._db.execute("SELECT value FROM settings WHERE key = ?",
                           (_SUGGESTIONS_KEY.format(question_id),)).fetchone()
    return json.loads(row[0]) if row else []
