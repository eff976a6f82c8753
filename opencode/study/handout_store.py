"""The SQL behind handouts (a coder's working copy of a study) and merging them back.

A handout is a study file: a copy of the study with what the coder must not see taken out (other coders'
codes and notes on the coder's blind sample verbatims, rule and machine suggestions on those verbatims
(the coder's own included: the sample is coded from the text alone), every stored machine-coder model
(trained on the team's codes, blind ones included, so its suggestions would reproduce them), and other
people's audit rows, whose payloads hold codes). The copy remembers, in its settings, what the coder's rows and the frame looked like when it was
made; merging compares the three states (then, in the copy, in the study now).
"""

from __future__ import annotations

import uuid
from typing import Any

from opencode.study.store import Study

#: The code fields whose change means a code no longer says what it said when the coder used it.
MEANING = ("frame_id", "number", "label", "kind", "net_id", "active")


def study_uid(study: Study, create: bool = False) -> str | None:
    """The study's identity (kept in meta, copied with the study); made on first use when `create`."""
    row = study._db.execute("SELECT value FROM meta WHERE key = 'study_uid'").fetchone()
    if row is not None or not create:
        return None if row is None else row[0]
    uid = uuid.uuid4().hex
    with study.transaction():
        study._db.execute("INSERT INTO meta (key, value) VALUES ('study_uid', ?)", (uid,))
    return uid


def coder_assignments(study: Study, coder: str) -> dict[tuple[int, int], tuple[str, float | None]]:
    """(verbatim id, code id) -> (source, confidence) of every assignment a coder holds."""
    return {(int(v), int(c)): (s, conf) for v, c, s, conf in study._db.execute(
        "SELECT verbatim_id, code_id, source, confidence FROM assignments WHERE coder = ?", (coder,))}


def coder_marks(study: Study, coder: str) -> dict[int, str]:
    """Verbatim id -> when the coder marked it done."""
    return {int(v): at for v, at in study._db.execute(
        "SELECT verbatim_id, marked_at FROM coded_marks WHERE coder = ?", (coder,))}


def coder_notes(study: Study, coder: str) -> dict[int, str]:
    """Verbatim id -> the coder's note."""
    return {int(v): text for v, text in study._db.execute(
        "SELECT verbatim_id, text FROM notes WHERE coder = ?", (coder,))}


def code_meanings(study: Study) -> dict[int, dict[str, Any]]:
    """Code id -> the fields that give the code its meaning (see MEANING)."""
    return {int(row[0]): dict(zip(MEANING, row[1:])) for row in study._db.execute(
        f"SELECT id, {', '.join(MEANING)} FROM codes")}


def verbatim_places(study: Study, verbatim_ids: list[int]) -> dict[int, tuple[str, str]]:
    """Verbatim id -> (question name, survey respondent id), for listing conflicts."""
    if not verbatim_ids:
        return {}
    marks = ", ".join("?" for _ in verbatim_ids)
    return {int(v): (q, r) for v, q, r in study._db.execute(
        "SELECT v.id, q.name, r.key FROM verbatims v JOIN variables q ON q.id = v.question_id "
        f"JOIN respondents r ON r.id = v.respondent_id WHERE v.id IN ({marks})", [int(i) for i in verbatim_ids])}


_BLIND = ("SELECT si.verbatim_id FROM sample_items si JOIN sample_coders sc ON sc.sample_id = si.sample_id "
          "WHERE sc.coder = ?")


def own_blind_suggestions(study: Study, coder: str) -> list[tuple[int, int]]:
    """(verbatim id, code id) of the coder's own rule/machine suggestions on their blind sample verbatims."""
    return [(int(v), int(c)) for v, c in study._db.execute(
        "SELECT verbatim_id, code_id FROM assignments WHERE coder = ? AND source IN ('rule', 'machine') "
        f"AND verbatim_id IN ({_BLIND}) ORDER BY verbatim_id, code_id", (coder, coder))]


def redact_for(study: Study, coder: str) -> dict[str, int]:
    """Take out of a copy what its coder must not read; returns rows removed per kind. Inside a transaction."""
    blind = _BLIND
    removed = {
        "blind codes": study._db.execute(f"DELETE FROM assignments WHERE coder <> ? AND verbatim_id IN ({blind})",
                                         (coder, coder)).rowcount,
        "blind suggestions": study._db.execute(
            "DELETE FROM assignments WHERE coder = ? AND source IN ('rule', 'machine') "
            f"AND verbatim_id IN ({blind})", (coder, coder)).rowcount,
        "models": study._db.execute("DELETE FROM models").rowcount,
        "blind notes": study._db.execute(f"DELETE FROM notes WHERE coder <> ? AND verbatim_id IN ({blind})",
                                         (coder, coder)).rowcount,
        "others' audit rows": study._db.execute("DELETE FROM audit WHERE actor <> ?", (coder,)).rowcount,
    }
    return removed
