"""Saved theme runs and k searches: the SQL (table theme_runs). Arrays travel as npz bytes, never pickle."""

from __future__ import annotations

import io
import json
from dataclasses import dataclass
from typing import Any

import numpy as np

from opencode.errors import OpenCodeError
from opencode.study.store import Study, now


@dataclass
class StoredRun:
    """One row of theme_runs: ids, when, method, k, parameters, summary (JSON) and arrays."""

    id: int
    question_id: int
    created_at: str
    method: str
    k: int
    params: dict[str, Any]
    summary: dict[str, Any]
    arrays: dict[str, np.ndarray]


def arrays_to_bytes(arrays: dict[str, np.ndarray]) -> bytes:
    """numpy arrays as npz bytes; object arrays are refused so reading back never needs pickle."""
    for name, array in arrays.items():
        if np.asarray(array).dtype == object:
            raise OpenCodeError(f"theme run array {name!r}: object arrays cannot be stored without pickle")
    buffer = io.BytesIO()
    np.savez_compressed(buffer, **{name: np.asarray(array) for name, array in arrays.items()})
    return buffer.getvalue()


def arrays_from_bytes(blob: bytes) -> dict[str, np.ndarray]:
    """Inverse of arrays_to_bytes (allow_pickle=False: opening a study must not run code)."""
    with np.load(io.BytesIO(blob), allow_pickle=False) as archive:
        return {name: archive[name] for name in archive.files}


def save_run(study: Study, question_id: int, method: str, k: int, params: dict[str, Any], summary: dict[str, Any],
             arrays: dict[str, np.ndarray], actor: str = "oecode") -> int:
    """Store a run (one transaction, audited); returns its id."""
    blob = arrays_to_bytes(arrays)
    with study.transaction():
        cursor = study._db.execute(
            "INSERT INTO theme_runs (question_id, created_at, method, k, params, summary, arrays) "
            "VALUES (?, ?, ?, ?, ?, ?, ?)",
            (question_id, now(), method, int(k), json.dumps(params, ensure_ascii=False),
             json.dumps(summary, ensure_ascii=False), blob))
        run_id = int(cursor.lastrowid)
        study.audit(actor, "save-theme-run", "theme_run", run_id,
                    {"question_id": question_id, "method": method, "k": int(k), "kind": params.get("kind")})
    return run_id


def run_rows(study: Study, question_id: int | None = None) -> list[dict[str, Any]]:
    """Every stored run (of one question, or all) without its arrays, oldest first."""
    query = "SELECT id, question_id, created_at, method, k, params FROM theme_runs"
    rows = study._db.execute(query + (" WHERE question_id = ?" if question_id is not None else "") + " ORDER BY id",
                            () if question_id is None else (question_id,)).fetchall()
    return [{"id": r[0], "question_id": r[1], "created_at": r[2], "method": r[3], "k": r[4],
             "params": json.loads(r[5])} for r in rows]


def load_run(study: Study, run_id: int) -> StoredRun:
    """One stored run; a clear error names the run ids there are."""
    row = study._db.execute("SELECT id, question_id, created_at, method, k, params, summary, arrays "
                           "FROM theme_runs WHERE id = ?", (int(run_id),)).fetchone()
    if row is None:
        raise OpenCodeError(f"{study.path}: no theme run {run_id} (runs: {_ids(study)})")
    return StoredRun(id=row[0], question_id=row[1], created_at=row[2], method=row[3], k=row[4],
                     params=json.loads(row[5]), summary=json.loads(row[6]), arrays=arrays_from_bytes(bytes(row[7])))


def delete_run(study: Study, run_id: int, actor: str = "oecode") -> None:
    """Delete a stored run (audited with its parameters)."""
    row = study._db.execute("SELECT question_id, method, k, params FROM theme_runs WHERE id = ?",
                           (int(run_id),)).fetchone()
    if row is None:
        raise OpenCodeError(f"{study.path}: no theme run {run_id} (runs: {_ids(study)})")
    with study.transaction():
        study._db.execute("DELETE FROM theme_runs WHERE id = ?", (int(run_id),))
        study.audit(actor, "delete-theme-run", "theme_run", int(run_id),
                    {"question_id": row[0], "method": row[1], "k": row[2], "params": json.loads(row[3])})


def _ids(study: Study) -> str:
    """The stored run ids as text for error messages."""
    ids = [str(r[0]) for r in study._db.execute("SELECT id FROM theme_runs ORDER BY id")]
    return ", ".join(ids) if ids else "none yet"


def run_created_at(study: Study, run_id: int) -> str:
    """When a stored run was made (ISO 8601, UTC)."""
    row = study._db.execute("SELECT created_at FROM theme_runs WHERE id = ?", (int(run_id),)).fetchone()
    if row is None:
        raise OpenCodeError(f"{study.path}: no theme run {run_id} (runs: {_ids(study)})")
    return str(row[0])
