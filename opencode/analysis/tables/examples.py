"""Example verbatims for each code: typical of the code, given by a person, different across codes.

A code's examples come only from verbatims a person coded with it (hand codes of the chosen coder, in the
base), never from unconfirmed rule or machine suggestions. Among them the typical ones are those nearest
the code's centroid in the term space (cosine similarity of tf-idf rows to the mean of the code's rows;
common practice for picking a cluster's representative documents, no published source). A verbatim already
shown for another code is passed over while the code has other candidates, so different codes show
different quotes where they can.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy import sparse

from opencode.analysis.tables.coded_data import QuestionCoding
from opencode.coding.assignments import assignments
from opencode.errors import OpenCodeError
from opencode.study.store import Study

#: Example verbatims of a readable length are preferred (characters).
QUOTE_LENGTH = (15, 280)


@dataclass(frozen=True)
class Example:
    """One example verbatim of a code: its respondent row, text and cosine similarity to the code's centroid."""

    row: int
    text: str
    similarity: float


def centroid_similarity(matrix: sparse.csr_matrix, rows: np.ndarray) -> np.ndarray:
    """Cosine similarity of each of `rows` (of an L2-normalised matrix) to the rows' mean; 0 for empty rows."""
    if len(rows) == 0:
        return np.zeros(0)
    block = matrix[rows]
    centroid = np.asarray(block.mean(axis=0)).ravel()
    norm = np.linalg.norm(centroid)
    if norm == 0:
        return np.zeros(len(rows))
    return np.asarray(block @ (centroid / norm)).ravel()


def pick_typical(matrix: sparse.csr_matrix, members: Sequence[np.ndarray], per_code: int,
                 preferred: np.ndarray | None = None, keys: Sequence | None = None) -> list[list[tuple[int, float]]]:
    """For each code (its member rows of `matrix`), up to `per_code` (row, similarity) pairs, most typical first.

    Preferred rows (e.g. readable lengths) come before the others; codes with the fewest members choose first,
    and a row taken by one code goes to another only when that code has nothing else left. Rows with equal
    `keys` (e.g. the same text from two respondents) count as one: a code never shows the same key twice.
    """
    if per_code < 0:
        raise OpenCodeError(f"example verbatims per code must be 0 or more, got {per_code}")
    n_rows = matrix.shape[0]
    preferred = np.ones(n_rows, dtype=bool) if preferred is None else np.asarray(preferred, dtype=bool)
    ranked = []
    for rows in members:
        rows = np.unique(np.asarray(rows, dtype=np.int64))
        similarity = centroid_similarity(matrix, rows)
        order = np.lexsort((rows, -similarity, ~preferred[rows]))
        ranked.append(list(zip(rows[order].tolist(), similarity[order].tolist())))
    key = (lambda row: row) if keys is None else (lambda row: keys[row])
    used: set = set()
    chosen: list[list[tuple[int, float]]] = [[] for _ in members]
    for j in sorted(range(len(members)), key=lambda k: (len(ranked[k]), k)):
        taken: list[tuple[int, float]] = []
        seen: set = set()
        for second_round in (False, True):  # first rows no other code shows, then any
            for row, similarity in ranked[j]:
                if len(taken) == per_code:
                    break
                if key(row) in seen or (key(row) in used) != second_round:
                    continue
                taken.append((row, similarity))
                seen.add(key(row))
        chosen[j] = taken
        used.update(seen)
    return chosen


def example_verbatims(study: Study, coding: QuestionCoding, per_code: int) -> dict[int, list[Example]]:
    """Up to `per_code` typical verbatims per code of `coding`, from the hand codes of its coder in its base."""
    from opencode.text.study_text import term_matrix

    if per_code <= 0 or not coding.codes:
        return {}
    n = len(coding.respondent_ids)
    hand = assignments(study, coding.question, [coding.coder], ("hand",))
    texts = coding.verbatim_text
    tm, frame = term_matrix(study, coding.question, weighting="tfidf")
    # Matrix rows follow the question's verbatims; put them in respondent order (non-answers stay empty).
    position = {key: i for i, key in enumerate(coding.respondent_ids)}
    respondent_row = frame["respondent"].map(position).to_numpy()
    row_of_verbatim = dict(zip(frame["verbatim_id"].tolist(), respondent_row.tolist()))
    in_matrix = frame["matrix_row"].to_numpy() >= 0
    lift = sparse.csr_matrix((np.ones(int(in_matrix.sum())),
                              (respondent_row[in_matrix], frame["matrix_row"].to_numpy()[in_matrix])),
                             shape=(n, tm.X.shape[0]))
    matrix = (lift @ tm.X).tocsr()
    hand_rows = hand["verbatim_id"].map(row_of_verbatim).to_numpy()
    members = []
    for code in coding.codes:
        rows = hand_rows[(hand["number"] == code.number).to_numpy()].astype(np.int64)
        members.append(rows[coding.answered[rows]])
    lengths = np.array([len(t.strip()) if t else 0 for t in texts])
    readable = (lengths >= QUOTE_LENGTH[0]) & (lengths <= QUOTE_LENGTH[1])
    folded = [" ".join((t or "").split()).casefold() for t in texts]
    picked = pick_typical(matrix, members, per_code, readable, folded)
    return {code.number: [Example(row, texts[row] or "", similarity) for row, similarity in pairs]
            for code, pairs in zip(coding.codes, picked) if pairs}
