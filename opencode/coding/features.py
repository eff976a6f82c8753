"""Verbatims as analyzer terms: term lists for keyword rules and a tf-idf matrix for the machine coder.

Everything goes through the text analyzer (opencode.text), so "parking" and "park" are one term and the
study's lexicon (stop words, phrases, merges) applies to rules and models alike.
"""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np
import scipy.sparse as sp

from opencode.study.store import Study


def default_analyzer(study: Study | None = None, question: str | None = None):
    """The analyzer used for a question's rules and models: the question's lexicon (plain default without one)."""
    from opencode.text.analyzer import Analyzer
    from opencode.text.study_text import analyzer_for

    if study is None or question is None:
        return Analyzer()
    return analyzer_for(study, question)


def terms_of(analyzer: Any, text: str) -> list[str]:
    """The terms of one text, in order."""
    method = getattr(analyzer, "tokens", None) or analyzer.analyze
    return list(method(text or ""))


def term_lists(analyzer: Any, texts: Sequence[str]) -> list[list[str]]:
    """The terms of many texts, chunk by chunk when the analyzer can (fast path), else one by one."""
    if hasattr(analyzer, "term_lists"):
        return analyzer.term_lists(list(texts))
    return [terms_of(analyzer, t) for t in texts]


class TermVectorizer:
    """tf-idf over analyzer terms (sublinear tf, smooth idf, l2 rows), vocabulary fixed by `fit`.

    Stored as plain arrays and a JSON list (vocabulary_, idf_), never pickled.
    """

    def __init__(self, min_df: int = 1, sublinear_tf: bool = True):
        self.min_df = min_df
        self.sublinear_tf = sublinear_tf

    def _counts(self, lists: list[list[str]]) -> sp.csr_matrix:
        index = self.index_
        cols = [index.get(t, -1) for terms in lists for t in terms]
        lengths = np.fromiter((len(t) for t in lists), dtype=np.int64, count=len(lists))
        rows = np.repeat(np.arange(len(lists)), lengths)
        cols = np.asarray(cols, dtype=np.int64)
        keep = cols >= 0
        data = np.ones(int(keep.sum()))
        matrix = sp.csr_matrix((data, (rows[keep], cols[keep])), shape=(len(lists), len(self.vocabulary_)))
        matrix.sum_duplicates()
        return matrix

    def fit(self, lists: list[list[str]]) -> "TermVectorizer":
        """Learn the vocabulary and idf weights from term lists."""
        df: dict[str, int] = {}
        for terms in lists:
            for t in set(terms):
                df[t] = df.get(t, 0) + 1
        self.vocabulary_ = sorted(t for t, n in df.items() if n >= self.min_df)
        self.index_ = {t: i for i, t in enumerate(self.vocabulary_)}
        n = len(lists)
        counts = np.array([df[t] for t in self.vocabulary_], dtype=float)
        self.idf_ = np.log((1 + n) / (1 + counts)) + 1.0  # smooth idf, as scikit-learn's TfidfTransformer
        return self

    def transform(self, lists: list[list[str]]) -> sp.csr_matrix:
        """tf-idf rows for term lists (unknown terms ignored)."""
        matrix = self._counts(lists)
        if self.sublinear_tf:
            matrix.data = np.log(matrix.data) + 1.0
        matrix = matrix @ sp.diags(self.idf_)
        norms = np.sqrt(np.asarray(matrix.multiply(matrix).sum(axis=1)).ravel())
        norms[norms == 0] = 1.0
        return sp.csr_matrix(sp.diags(1.0 / norms) @ matrix)

    def fit_transform(self, lists: list[list[str]]) -> sp.csr_matrix:
        """fit, then transform the same lists."""
        return self.fit(lists).transform(lists)

    @classmethod
    def from_state(cls, vocabulary: list[str], idf: np.ndarray, params: dict[str, Any]) -> "TermVectorizer":
        """Rebuild a fitted vectorizer from stored arrays."""
        vectorizer = cls(**params)
        vectorizer.vocabulary_ = list(vocabulary)
        vectorizer.index_ = {t: i for i, t in enumerate(vectorizer.vocabulary_)}
        vectorizer.idf_ = np.asarray(idf, dtype=float)
        return vectorizer
