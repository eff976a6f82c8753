"""Read-only queries the coding desk pages through: one verbatim at a time, filtered id lists, progress counts.

The desk never loads every verbatim's text: it keeps the question's verbatim ids (a numpy array) and asks
for one verbatim's text when it shows it. Writes go through opencode.coding, never through here.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import numpy as np

from opencode.study.store import Study


@dataclass(frozen=True)
class VerbatimCard:
    """What the desk shows about one verbatim."""

    id: int
    respondent_id: int
    respondent: str
    text: str
    nonanswer: bool


def question_verbatim_ids(study: Study, question_id: int) -> np.ndarray:
    """Every verbatim id of a question, ascending (the desk's running order)."""
    rows = study._db.execute("SELECT id FROM verbatims WHERE question_id = ? ORDER BY id", (question_id,)).fetchall()
    return np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))


def verbatim_card(study: Study, verbatim_id: int) -> VerbatimCard | None:
    """One verbatim with its respondent's key, or None."""
    row = study._db.execute(
        "SELECT v.id, v.respondent_id, r.key, v.text, v.nonanswer FROM verbatims v "
        "JOIN respondents r ON r.id = v.respondent_id WHERE v.id = ?", (int(verbatim_id),)).fetchone()
    return None if row is None else VerbatimCard(int(row[0]), int(row[1]), row[2], row[3], bool(row[4]))


def verbatim_of_respondent(study: Study, question_id: int, respondent_key: str) -> int | None:
    """The verbatim id a respondent (by survey id) gave to a question, or None."""
    row = study._db.execute(
        "SELECT v.id FROM verbatims v JOIN respondents r ON r.id = v.respondent_id "
        "WHERE v.question_id = ? AND r.key = ?", (question_id, str(respondent_key).strip())).fetchone()
    return None if row is None else int(row[0])


def respondent_row_ids(study: Study) -> np.ndarray:
    """Respondent row ids in study order (value arrays follow this order)."""
    rows = study._db.execute("SELECT id FROM respondents ORDER BY id").fetchall()
    return np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))


def search_ids(study: Study, question_id: int, *, text: str | None = None, code_id: int | None = None,
               coder: str | None = None, uncoded: bool = False, respondent_ids: np.ndarray | None = None,
               nonanswer: bool | None = None) -> np.ndarray:
    """Verbatim ids of a question matching every filter given (ascending).

    text: case-insensitive substring; code_id: the coder holds that code (any source); uncoded: the coder has
    no hand code and no done mark; respondent_ids: only these respondents (e.g. a closed-ended value).
    """
    query = "SELECT v.id FROM verbatims v WHERE v.question_id = ?"
    params: list[Any] = [question_id]
    if text:
        query += " AND instr(lower(v.text), lower(?)) > 0"
        params.append(text)
    if code_id is not None:
        query += " AND EXISTS (SELECT 1 FROM assignments a WHERE a.verbatim_id = v.id AND a.code_id = ?"
        params.append(int(code_id))
        if coder is not None:
            query += " AND a.coder = ?"
            params.append(coder)
        query += ")"
    if uncoded:
        query += (" AND NOT EXISTS (SELECT 1 FROM coded_marks m WHERE m.verbatim_id = v.id AND m.coder = ?)"
                  " AND NOT EXISTS (SELECT 1 FROM assignments a WHERE a.verbatim_id = v.id AND a.coder = ?"
                  " AND a.source = 'hand')")
        params += [coder, coder]
    if respondent_ids is not None:
        wanted = [int(i) for i in np.asarray(respondent_ids).tolist()]
        if study.on_server:
            query += " AND v.respondent_id = ANY(?)"
            params.append(wanted)
        else:
            query += " AND v.respondent_id IN (SELECT value FROM json_each(?))"
            params.append(json.dumps(wanted))
    if nonanswer is not None:
        query += " AND v.nonanswer = ?"
        params.append(int(nonanswer))
    rows = study._db.execute(query + " ORDER BY v.id", params).fetchall()
    return np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))


def suggestion_below(study: Study, question_id: int, coder: str, threshold: float, after: int,
                     forward: bool = True) -> int | None:
    """The next (or previous) verbatim holding a rule/machine suggestion for the coder below a confidence."""
    compare, order = (">", "ASC") if forward else ("<", "DESC")
    row = study._db.execute(
        "SELECT a.verbatim_id FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
        f"WHERE a.coder = ? AND a.source IN ('rule', 'machine') AND v.question_id = ? AND a.verbatim_id {compare} ? "
        f"AND COALESCE(a.confidence, 0) < ? ORDER BY a.verbatim_id {order} LIMIT 1",
        (coder, question_id, int(after), float(threshold))).fetchone()
    return None if row is None else int(row[0])


def other_coders_codes(study: Study, verbatim_id: int, coder: str) -> list[tuple[str, int, str]]:
    """(coder, code number, source) that other coders hold on one verbatim, by coder then number."""
    return study._db.execute(
        "SELECT a.coder, c.number, a.source FROM assignments a JOIN codes c ON c.id = a.code_id "
        "WHERE a.verbatim_id = ? AND a.coder <> ? ORDER BY a.coder, c.number", (int(verbatim_id), coder)).fetchall()


def question_coders(study: Study, question_id: int) -> list[str]:
    """Every coder holding any assignment or done mark on the question, by name."""
    return [r[0] for r in study._db.execute(
        "SELECT a.coder FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id WHERE v.question_id = ? "
        "UNION SELECT m.coder FROM coded_marks m JOIN verbatims v ON v.id = m.verbatim_id WHERE v.question_id = ? "
        "ORDER BY 1", (question_id, question_id))]


def verbatims_holding(study: Study, question_id: int, coder: str, code_ids: list[int]) -> int:
    """How many of a question's verbatims hold any of these codes as the coder's hand codes (a net's count)."""
    marks = ", ".join("?" for _ in code_ids)
    return int(study._db.execute(
        "SELECT COUNT(DISTINCT a.verbatim_id) FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
        f"WHERE a.coder = ? AND a.source = 'hand' AND v.question_id = ? AND a.code_id IN ({marks})",
        (coder, question_id, *code_ids)).fetchone()[0])
