"""Top terms of a term matrix: how often, in how many verbatims, and the words behind each term."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from opencode.errors import OpenCodeError
from opencode.text.matrix import TermMatrix
from opencode.files.textout import format_table


@dataclass
class TermRow:
    """One term: occurrences, verbatims mentioning it, their share of the base, surface forms."""

    term: str
    label: str
    count: int
    verbatims: int
    percent: float
    surfaces: list[tuple[str, int]]


def row_mask(tm: TermMatrix, subset: Sequence[bool] | np.ndarray | None) -> np.ndarray:
    """A subset as a mask over the matrix rows (given over the rows or over every input verbatim)."""
    if subset is None:
        return np.ones(tm.counts.shape[0], dtype=bool)
    mask = np.asarray(subset, dtype=bool)
    if mask.shape == (tm.n_input,):
        return mask[tm.rows_source]
    if mask.shape == (tm.counts.shape[0],):
        return mask
    raise OpenCodeError(
        f"the subset has {mask.size} entries; expected {tm.n_input} (all verbatims) or "
        f"{tm.counts.shape[0]} (analysed verbatims)"
    )


def top_terms(tm: TermMatrix, n: int | None = 30, subset: Sequence[bool] | np.ndarray | None = None) -> list[TermRow]:
    """Terms by verbatims mentioning them (then occurrences, then name), optionally within a subset."""
    rows = row_mask(tm, subset)
    base = int(rows.sum())
    if base == 0:
        raise OpenCodeError("the subset holds no analysed verbatim")
    sub = tm.counts[rows]
    occurrences = np.asarray(sub.sum(axis=0)).ravel()
    verbatims = np.bincount(sub.indices, minlength=sub.shape[1])
    order = np.lexsort((np.array(tm.terms, dtype=object), -occurrences, -verbatims))
    order = order[verbatims[order] > 0][:n]
    return [
        TermRow(tm.terms[i], tm.labels[i], int(occurrences[i]), int(verbatims[i]),
                100.0 * verbatims[i] / base, tm.surfaces[i])
        for i in order
    ]


def format_top_terms(rows: Sequence[TermRow], max_forms: int = 4) -> str:
    """An aligned text table of top terms with their commonest surface forms."""
    return format_table(
        ["term", "count", "verbatims", "%", "forms"],
        [
            [r.label, r.count, r.verbatims, f"{r.percent:.1f}",
             ", ".join(f"{form} ({c})" for form, c in r.surfaces[:max_forms])]
            for r in rows
        ],
        align="lrrrl", note="sorted by verbatims mentioning the term (then occurrences, then term)",
    )
