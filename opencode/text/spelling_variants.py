"""Spelling-variant suggestions: rare terms within a small edit distance of frequent ones.

Candidates come from deletion neighbourhoods (two words within Levenshtein distance d share a
string reachable by at most d deletions from each), so only plausible pairs are compared; each
pair is then measured with nltk's edit_distance (transpositions counted as one edit).
Thresholds are common practice (no published source).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from opencode.text.matrix import TermMatrix
from opencode.files.textout import format_table


@dataclass
class VariantSuggestion:
    """A rare term that looks like a misspelling of a frequent one."""

    term: str
    label: str
    verbatims: int
    target: str
    target_label: str
    target_verbatims: int
    distance: int


def deletions(word: str, depth: int) -> set[str]:
    """Every string reachable from word by deleting at most `depth` characters (word included)."""
    out = {word}
    for k in range(1, min(depth, len(word)) + 1):
        out.update("".join(ch for i, ch in enumerate(word) if i not in drop) for drop in combinations(range(len(word)), k))
    return out


def allowed_distance(word: str, max_distance: int) -> int:
    """Edits tolerated for a word of this length: one for short words, max_distance otherwise."""
    return 1 if len(word) <= 5 else max_distance


def close_pairs(rare: Iterable[str], frequent: Iterable[str], max_distance: int = 2) -> list[tuple[str, str, int]]:
    """(rare word, frequent word, distance) for pairs within the allowed Levenshtein distance."""
    from nltk.metrics import edit_distance  # imported here: nltk costs a command seconds to import
    index: dict[str, set[str]] = defaultdict(set)
    frequent = list(frequent)
    for word in frequent:
        for variant in deletions(word, max_distance):
            index[variant].add(word)
    pairs = []
    for word in rare:
        limit = allowed_distance(word, max_distance)
        candidates = set().union(*(index.get(v, ()) for v in deletions(word, limit)))
        for other in sorted(candidates - {word}):
            if edit_distance(word, other) <= limit:
                pairs.append((word, other, edit_distance(word, other, transpositions=True)))
    return pairs


def suggest_variants(
    tm: TermMatrix,
    *,
    rare_max: int = 3,
    min_ratio: float = 10.0,
    max_distance: int = 2,
    min_length: int = 4,
) -> list[VariantSuggestion]:
    """Rare terms (in at most rare_max verbatims) close to a term at least min_ratio times as frequent."""
    df = tm.df
    labels = tm.labels
    by_label = {label: i for i, label in enumerate(labels)}
    rare_idx = [i for i in np.flatnonzero(df <= rare_max) if len(labels[i]) >= min_length and "_" not in tm.terms[i]]
    freq_idx = [i for i in np.flatnonzero(df >= min_ratio) if len(labels[i]) >= min_length]
    best: dict[int, VariantSuggestion] = {}
    for word, other, dist in close_pairs((labels[i] for i in rare_idx), (labels[i] for i in freq_idx), max_distance):
        i, j = by_label[word], by_label[other]
        if i == j or df[j] < min_ratio * df[i]:
            continue
        candidate = VariantSuggestion(tm.terms[i], word, int(df[i]), tm.terms[j], other, int(df[j]), dist)
        current = best.get(i)
        if current is None or (dist, -candidate.target_verbatims) < (current.distance, -current.target_verbatims):
            best[i] = candidate
    suggestions = sorted(best.values(), key=lambda s: (s.distance, -s.target_verbatims, s.term))
    return suggestions


def format_variants(rows: Sequence[VariantSuggestion]) -> str:
    """An aligned text table of spelling-variant suggestions."""
    return format_table(
        ["rare term", "verbatims", "looks like", "verbatims", "edits"],
        [[r.label, r.verbatims, r.target_label, r.target_verbatims, r.distance] for r in rows],
        align="lrlrr", note="sorted by edits, then the verbatims of the term it looks like (most first)",
    )
