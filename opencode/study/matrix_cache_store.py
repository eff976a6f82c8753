"""The SQL behind cached term-document matrices: one row per cache key, a few kept per question."""

from __future__ import annotations

from opencode.study.store import Study, now

#: Matrices kept per question (the most recently built); older ones (an earlier lexicon or verbatims,
#: or options no longer used) are deleted when a new one is written, so the file does not keep growing.
KEEP_PER_QUESTION = 4


def load_matrix_blob(study: Study, cache_key: str) -> bytes | None:
    """The stored matrix bytes for a cache key, or None."""
    row = study._db.execute("SELECT data FROM matrix_cache WHERE cache_key = ?", (cache_key,)).fetchone()
    return None if row is None else bytes(row[0])


def store_matrix_blob(study: Study, question_id: int, cache_key: str, blob: bytes,
                      keep: int = KEEP_PER_QUESTION) -> int:
    """Store a matrix under its key and drop the question's older rows beyond `keep`; returns rows dropped."""
    with study.transaction():
        study._db.execute("INSERT OR REPLACE INTO matrix_cache (cache_key, question_id, created_at, data) "
                         "VALUES (?, ?, ?, ?)", (cache_key, question_id, now(), blob))
        cursor = study._db.execute(
            f"DELETE FROM matrix_cache WHERE question_id = ? AND {_ROW} NOT IN "
            f"(SELECT {_ROW} FROM matrix_cache WHERE question_id = ? ORDER BY {_newest(study)} LIMIT ?)",
            (question_id, question_id, max(1, keep)))
    return cursor.rowcount


_ROW = "cache_key"


def _newest(study: Study) -> str:
    """Newest first: by insertion (rowid) in a file; by time, then key, on a server (which has no rowid)."""
    return "created_at DESC, cache_key DESC" if study.on_server else "rowid DESC"


def cached_keys(study: Study, question_id: int) -> list[str]:
    """Cache keys held for a question, newest first."""
    return [row[0] for row in study._db.execute(
        f"SELECT cache_key FROM matrix_cache WHERE question_id = ? ORDER BY {_newest(study)}", (question_id,))]


def clear_matrix_cache(study: Study, question_id: int | None = None) -> int:
    """Delete cached matrices (of one question, or all); returns rows deleted."""
    with study.transaction():
        if question_id is None:
            return study._db.execute("DELETE FROM matrix_cache").rowcount
        return study._db.execute("DELETE FROM matrix_cache WHERE question_id = ?", (question_id,)).rowcount
