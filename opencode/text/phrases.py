"""Phrases: merge user phrases into one term (longest match first) and suggest new ones.

Suggestions rank adjacent word pairs by Dunning's (1993) log-likelihood ratio G2, with pointwise
mutual information as a second view and a minimum count.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy.special import xlogy

from opencode.files.textout import format_table
from opencode.text.tokenize import term_label

if TYPE_CHECKING:
    from opencode.text.analyzer import Analyzer, Progress, Vocabulary

_GONE = 6  # analyzer.K_GONE (kept here to avoid an import cycle)
_TERM = 3  # analyzer.K_TERM


class PhraseMatcher:
    """Finds user phrases in arrays of term key ids; longer phrases win, then the leftmost."""

    def __init__(self, table: dict[tuple[int, ...], int]) -> None:
        self.table = table
        self.lengths = sorted({len(ids) for ids in table}, reverse=True)
        first = {ids[0] for ids in table}
        self._first = np.array(sorted(first), dtype=np.int64)

    def find(self, key: np.ndarray) -> dict[int, tuple[np.ndarray, np.ndarray]]:
        """Occurrences by phrase length: sorted start positions and phrase key ids (overlaps included)."""
        found: dict[int, list[tuple[np.ndarray, int]]] = {}
        if not self.table:
            return {}
        n = len(key)
        cand = np.flatnonzero(np.isin(key, self._first))
        first = key[cand]
        for ids, pid in self.table.items():
            length = len(ids)
            starts = cand[(first == ids[0]) & (cand <= n - length)]
            for j in range(1, length):
                starts = starts[key[starts + j] == ids[j]]
            if len(starts):
                found.setdefault(length, []).append((starts, pid))
        out = {}
        for length, parts in found.items():
            starts = np.concatenate([s for s, _ in parts])
            pids = np.concatenate([np.full(len(s), pid, dtype=np.int64) for s, pid in parts])
            order = np.argsort(starts, kind="stable")
            out[length] = (starts[order], pids[order])
        return out

    def resolve(self, found: dict[int, tuple[np.ndarray, np.ndarray]], n: int) -> list[tuple[int, np.ndarray, np.ndarray]]:
        """Non-overlapping matches as (length, starts, phrase ids): longest first, then leftmost."""
        taken = np.zeros(n + 1, dtype=np.int64)
        kept = []
        for length in sorted(found, reverse=True):
            starts, pids = found[length]
            covered = np.concatenate([[0], np.cumsum(taken[:n])])
            free = covered[starts + length] - covered[starts] == 0
            starts, pids = starts[free], pids[free]
            if len(starts) > 1 and (np.diff(starts) < length).any():
                accept, last_end = [], -1
                for i, s in enumerate(starts.tolist()):
                    if s >= last_end:
                        accept.append(i)
                        last_end = s + length
                starts, pids = starts[accept], pids[accept]
            for j in range(length):
                taken[starts + j] = 1
            kept.append((length, starts, pids))
        return kept

    def apply(self, kind: np.ndarray, key: np.ndarray, surf: np.ndarray, vocabulary: Vocabulary) -> dict[int, int]:
        """Merge matched phrases in place (first position becomes the phrase term, the rest are gone)."""
        hits: dict[int, int] = {}
        names = vocabulary.surface_names
        for length, starts, pids in self.resolve(self.find(key), len(key)):
            if len(starts) == 0:
                continue
            window = surf[starts[:, None] + np.arange(length)]
            uniq, inverse = np.unique(window, axis=0, return_inverse=True)
            ids = np.array([vocabulary.surface_id(" ".join(names[s] for s in row)) for row in uniq],
                           dtype=np.int64)
            surf[starts] = ids[inverse.ravel()]
            key[starts] = pids
            kind[starts] = _TERM
            for j in range(1, length):
                kind[starts + j] = _GONE
            for pid, count in zip(*np.unique(pids, return_counts=True)):
                hits[int(pid)] = hits.get(int(pid), 0) + int(count)
        return hits


def dunning_g2(o11: np.ndarray, o12: np.ndarray, o21: np.ndarray, o22: np.ndarray) -> np.ndarray:
    """Dunning's log-likelihood ratio G2 = 2 sum O ln(O/E) for 2x2 tables given cell by cell."""
    o = np.stack([np.asarray(x, dtype=float) for x in (o11, o12, o21, o22)])
    n = o.sum(axis=0)
    rows = np.stack([o[0] + o[1], o[0] + o[1], o[2] + o[3], o[2] + o[3]])
    cols = np.stack([o[0] + o[2], o[1] + o[3], o[0] + o[2], o[1] + o[3]])
    with np.errstate(divide="ignore", invalid="ignore"):
        expected = rows * cols / n
        terms = xlogy(o, o) - xlogy(o, expected)
    return 2.0 * terms.sum(axis=0)


def pmi(o11: np.ndarray, first: np.ndarray, second: np.ndarray, n: float) -> np.ndarray:
    """Pointwise mutual information log2(P(ab) / (P(a) P(b))) from counts."""
    return np.log2(np.asarray(o11, float) * n / (np.asarray(first, float) * np.asarray(second, float)))


@dataclass
class PhraseSuggestion:
    """A candidate phrase: the pair of words, how often it occurs, G2 and PMI."""

    phrase: str
    terms: tuple[str, str]
    count: int
    g2: float
    pmi: float


def suggest_phrases(
    texts: Sequence[str],
    analyzer: Analyzer,
    *,
    exclude: Sequence[bool] | np.ndarray | None = None,
    min_count: int = 5,
    top: int = 50,
    progress: Progress = None,
) -> list[PhraseSuggestion]:
    """Adjacent content-word pairs ranked by G2 (pairs under min_count left out)."""
    from opencode.text.analyzer import batches
    from opencode.text.matrix import check_corpus

    texts = [t for t, gone in zip(texts, check_corpus(texts, exclude)) if not gone]
    vocabulary = analyzer.vocabulary()
    pair_keys: list[np.ndarray] = []
    uni_keys: list[np.ndarray] = []
    uni_surf: list[np.ndarray] = []
    for _, batch in batches(texts, progress):
        kind, key, surf, _ = vocabulary.stream_chunk(batch)
        content = kind == _TERM
        both = content[:-1] & content[1:]
        pair_keys.append(np.stack([key[:-1][both], key[1:][both]], axis=1))
        uni_keys.append(key[content])
        uni_surf.append(surf[content])
    pairs = np.concatenate(pair_keys) if pair_keys else np.zeros((0, 2), np.int64)
    if len(pairs) == 0:
        return []
    uniq, counts = np.unique(pairs, axis=0, return_counts=True)
    n = float(len(pairs))
    first = np.bincount(pairs[:, 0], minlength=len(vocabulary.key_names))
    second = np.bincount(pairs[:, 1], minlength=len(vocabulary.key_names))
    keep = counts >= min_count
    uniq, counts = uniq[keep], counts[keep]
    a, b = first[uniq[:, 0]], second[uniq[:, 1]]
    g2 = dunning_g2(counts, a - counts, b - counts, n - a - b + counts)
    scores = pmi(counts, a, b, n)
    labels = _labels(np.concatenate(uni_keys), np.concatenate(uni_surf), vocabulary)
    order = np.lexsort((-scores, -g2))[:top]
    names = vocabulary.key_names
    return [
        PhraseSuggestion(
            phrase=f"{labels.get(int(uniq[i, 0]), names[uniq[i, 0]])} {labels.get(int(uniq[i, 1]), names[uniq[i, 1]])}",
            terms=(names[uniq[i, 0]], names[uniq[i, 1]]),
            count=int(counts[i]),
            g2=float(g2[i]),
            pmi=float(scores[i]),
        )
        for i in order
    ]


def _labels(keys: np.ndarray, surf: np.ndarray, vocabulary: Vocabulary) -> dict[int, str]:
    """What a reader sees for each term key id: its most frequent surface form (a placeholder as itself)."""
    pairs, counts = np.unique(np.stack([keys, surf], axis=1), axis=0, return_counts=True)
    order = np.lexsort((-counts, pairs[:, 0]))
    pairs = pairs[order]
    first = np.ones(len(pairs), bool)
    first[1:] = pairs[1:, 0] != pairs[:-1, 0]
    return {int(k): term_label(vocabulary.key_names[k], vocabulary.surface_names[s]) for k, s in pairs[first]}


def format_phrase_suggestions(rows: Sequence[PhraseSuggestion], ranked: bool = False) -> str:
    """An aligned text table of phrase suggestions (`ranked`: with their rank, 1 first, as `accept` takes)."""
    return format_table(
        (["#"] if ranked else []) + ["phrase", "count", "G2", "PMI"],
        [([rank] if ranked else []) + [r.phrase, r.count, f"{r.g2:.1f}", f"{r.pmi:.2f}"]
         for rank, r in enumerate(rows, start=1)],
        align=("r" if ranked else "") + "lrrr", note="sorted by G2 (log-likelihood ratio), largest first",
    )
