"""A synthetic count matrix with planted themes: ground truth for recovery checks and benchmarks."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp


@dataclass
class PlantedCorpus:
    """Counts (docs x terms), term labels, each document's planted theme and each theme's core term columns."""

    counts: sp.csr_matrix
    terms: list[str]
    doc_theme: np.ndarray
    theme_terms: list[np.ndarray]


def planted_corpus(n_docs: int = 2000, n_themes: int = 6, n_terms: int = 600, core_size: int = 15,
                   min_len: int = 3, max_len: int = 30, theme_mix: float = 0.8,
                   random_state: int = 0) -> PlantedCorpus:
    """Short documents, each drawn mostly from one theme's core terms and partly from a Zipf background.

    Theme t owns `core_size` term columns; a token comes from the document's theme with probability
    `theme_mix`, otherwise from all terms with Zipf-like frequencies (a realistic long tail).
    """
    rng = np.random.default_rng(random_state)
    if n_themes * core_size > n_terms:
        raise ValueError("n_themes * core_size must not exceed n_terms")
    columns = rng.permutation(n_terms)
    theme_terms = [np.sort(columns[t * core_size:(t + 1) * core_size]) for t in range(n_themes)]
    core_p = 1.0 / np.arange(1, core_size + 1) ** 0.7
    core_p /= core_p.sum()
    background_p = 1.0 / np.arange(1, n_terms + 1) ** 1.05
    background_p = background_p[rng.permutation(n_terms)]
    background_p /= background_p.sum()

    doc_theme = rng.integers(0, n_themes, size=n_docs)
    lengths = rng.integers(min_len, max_len + 1, size=n_docs)
    token_doc = np.repeat(np.arange(n_docs), lengths)
    from_theme = rng.random(token_doc.size) < theme_mix
    token_term = np.empty(token_doc.size, dtype=np.int64)
    background = ~from_theme
    token_term[background] = rng.choice(n_terms, size=int(background.sum()), p=background_p)
    token_theme = doc_theme[token_doc]
    for t in range(n_themes):
        picks = from_theme & (token_theme == t)
        token_term[picks] = theme_terms[t][rng.choice(core_size, size=int(picks.sum()), p=core_p)]
    counts = sp.coo_matrix((np.ones(token_doc.size, dtype=np.int64), (token_doc, token_term)),
                           shape=(n_docs, n_terms)).tocsr()
    counts.sum_duplicates()
    width = len(str(n_terms))
    terms = [f"w{j:0{width}d}" for j in range(n_terms)]
    return PlantedCorpus(counts=counts, terms=terms, doc_theme=doc_theme, theme_terms=theme_terms)
