"""Reliability samples and the coders they are assigned to: the SQL (samples, sample_items, sample_coders).

Writers expect to run inside study.transaction(). `is_blind_item` is one indexed lookup, cheap enough for
the desk to ask about every verbatim it shows.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

import numpy as np

from opencode.study.store import Study


@dataclass(frozen=True)
class SampleRow:
    """One stored reliability sample (without its items)."""

    id: int
    question_id: int
    name: str
    created_at: str
    params: dict[str, Any]


def _sample(row) -> SampleRow:
    return SampleRow(int(row[0]), int(row[1]), row[2], row[3], json.loads(row[4]))


def insert_sample(study: Study, question_id: int, name: str, created_at: str, params: dict[str, Any],
                  verbatim_ids: list[int]) -> int:
    """Store a sample with its verbatims; returns its id."""
    cursor = study._db.execute("INSERT INTO samples (question_id, name, created_at, params) VALUES (?, ?, ?, ?)",
                              (question_id, name, created_at, json.dumps(params, ensure_ascii=False)))
    sample_id = int(cursor.lastrowid)
    study._db.executemany("INSERT INTO sample_items (sample_id, verbatim_id) VALUES (?, ?)",
                         [(sample_id, int(v)) for v in verbatim_ids])
    return sample_id


def sample_by_name(study: Study, question_id: int, name: str) -> SampleRow | None:
    """A question's sample by name, or None."""
    row = study._db.execute("SELECT id, question_id, name, created_at, params FROM samples "
                           "WHERE question_id = ? AND name = ?", (question_id, name)).fetchone()
    return None if row is None else _sample(row)


def samples_of_question(study: Study, question_id: int) -> list[SampleRow]:
    """Every sample of a question, oldest first."""
    return [_sample(r) for r in study._db.execute(
        "SELECT id, question_id, name, created_at, params FROM samples WHERE question_id = ? ORDER BY id",
        (question_id,))]


def sample_item_ids(study: Study, sample_id: int) -> np.ndarray:
    """The verbatim ids of a sample, ascending."""
    rows = study._db.execute("SELECT verbatim_id FROM sample_items WHERE sample_id = ? ORDER BY verbatim_id",
                            (sample_id,)).fetchall()
    return np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))


def add_sample_coders(study: Study, sample_id: int, coders: list[str]) -> list[str]:
    """Assign coders to a sample (already assigned ones are kept); returns those newly added."""
    held = set(sample_coders(study, sample_id))
    added = [c for c in dict.fromkeys(coders) if c not in held]
    study._db.executemany("INSERT INTO sample_coders (sample_id, coder) VALUES (?, ?)",
                         [(sample_id, c) for c in added])
    return added


def sample_coders(study: Study, sample_id: int) -> list[str]:
    """The coders a sample is assigned to, by name."""
    return [r[0] for r in study._db.execute(
        "SELECT coder FROM sample_coders WHERE sample_id = ? ORDER BY coder", (sample_id,))]


def is_blind_item(study: Study, question_id: int, coder: str, verbatim_id: int) -> bool:
    """Whether the verbatim sits in a sample of the question that is assigned to the coder."""
    row = study._db.execute(
        "SELECT 1 FROM sample_coders sc JOIN samples s ON s.id = sc.sample_id "
        "JOIN sample_items si ON si.sample_id = sc.sample_id AND si.verbatim_id = ? "
        "WHERE sc.coder = ? AND s.question_id = ? LIMIT 1", (int(verbatim_id), coder, question_id)).fetchone()
    return row is not None


def blind_item_ids(study: Study, question_id: int, coder: str) -> np.ndarray:
    """Every verbatim id of the question the coder codes blind (in a sample assigned to them), ascending."""
    rows = study._db.execute(
        "SELECT DISTINCT si.verbatim_id FROM sample_coders sc JOIN samples s ON s.id = sc.sample_id "
        "JOIN sample_items si ON si.sample_id = sc.sample_id WHERE sc.coder = ? AND s.question_id = ? "
        "ORDER BY si.verbatim_id", (coder, question_id)).fetchall()
    return np.fromiter((r[0] for r in rows), dtype=np.int64, count=len(rows))
