"""Machine coder models kept in the study: JSON metadata and npz arrays (never pickle). The SQL.

On a server study only the lead reads and writes them (coders have no SELECT on `models`, see study/team.py):
`require_access` says so in one line before any work is done.
"""

from __future__ import annotations

import json
from typing import Any

from opencode.study import team
from opencode.study.store import Study, now


def require_access(study: Study) -> None:
    """Refuse a coder of a server study before they train or use a model (NotPermitted, one line)."""
    team.require_lead(study, "run the machine coder",
                      "its models learned from every coder's codes, blind reliability samples included")


def save_model(study: Study, question_id: int, meta: dict[str, Any], arrays: bytes) -> int:
    """Store a trained model for a question; returns its id (the newest model is the one used)."""
    with study.transaction():
        cursor = study._db.execute(
            "INSERT INTO models (question_id, created_at, meta, arrays) VALUES (?, ?, ?, ?)",
            (question_id, now(), json.dumps(meta, ensure_ascii=False), arrays))
        model_id = int(cursor.lastrowid)
        study.audit(meta.get("trained_by", "oecode"), "train", "model", model_id,
                    {"question_id": question_id, "codes": meta.get("n_codes"), "verbatims": meta.get("n_train")})
    return model_id


def latest_model_id(study: Study, question_id: int) -> int | None:
    """The id of a question's newest model, or None."""
    row = study._db.execute("SELECT MAX(id) FROM models WHERE question_id = ?", (question_id,)).fetchone()
    return None if row[0] is None else int(row[0])


def load_model_row(study: Study, model_id: int) -> tuple[dict[str, Any], bytes, str]:
    """(metadata, npz bytes, created_at) of one model."""
    meta, arrays, created = study._db.execute("SELECT meta, arrays, created_at FROM models WHERE id = ?",
                                             (model_id,)).fetchone()
    return json.loads(meta), bytes(arrays), created
