"""Topic coherence of each theme's top terms, measured on the study's own verbatims.

Both measures count documents: a term "occurs" in a verbatim when its count is above zero, and two terms
co-occur when both occur in the same verbatim (verbatims are short, so the verbatim is the window).

- UMass (Mimno, Wallach, Talley, Leenders & McCallum 2011, EMNLP): for top terms v_1..v_N ordered by weight,
  the pairs (v_m, v_l) with l < m score log((D(v_m, v_l) + 1) / D(v_l)). Mimno et al. sum the pairs; we
  report the mean over the N(N-1)/2 pairs so values compare across N. Higher (closer to 0) is better.
- NPMI (Bouma 2009; used for topic coherence by Lau, Newman & Baldwin 2014, EACL): for each unordered pair,
  log(P(wi, wj) / (P(wi) P(wj))) / -log P(wi, wj) with P = document frequency / number of documents; -1 when
  the pair never co-occurs, +1 when it co-occurs in every document. Mean over pairs; range -1..1.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp


def top_term_indices(components: np.ndarray, n_top: int) -> np.ndarray:
    """Column indices of each theme's n_top heaviest terms, heaviest first (themes x n_top)."""
    components = np.asarray(components)
    n_top = min(n_top, components.shape[1])
    part = np.argpartition(-components, n_top - 1, axis=1)[:, :n_top]
    order = np.argsort(-np.take_along_axis(components, part, axis=1), axis=1, kind="stable")
    return np.take_along_axis(part, order, axis=1)


def _document_counts(counts, top: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Document frequencies (themes x N) and co-document frequencies (themes x N x N) of the top terms."""
    top = np.asarray(top)
    columns, inverse = np.unique(top, return_inverse=True)
    occurs = (sp.csr_matrix(counts)[:, columns] > 0).astype(np.float64)
    joint = np.asarray((occurs.T @ occurs).todense())
    local = inverse.reshape(top.shape)
    doc_freq = np.diag(joint)[local]
    co_freq = joint[local[:, :, None], local[:, None, :]]
    return doc_freq, co_freq, counts.shape[0]


def _umass(doc_freq: np.ndarray, co_freq: np.ndarray) -> np.ndarray:
    """UMass per theme from document and co-document frequencies."""
    m_idx, l_idx = np.tril_indices(doc_freq.shape[1], k=-1)
    earlier = np.maximum(doc_freq[:, l_idx], 1.0)
    return np.log((co_freq[:, m_idx, l_idx] + 1.0) / earlier).mean(axis=1)


def _npmi(doc_freq: np.ndarray, co_freq: np.ndarray, n_docs: int) -> np.ndarray:
    """NPMI per theme from document and co-document frequencies."""
    i_idx, j_idx = np.triu_indices(doc_freq.shape[1], k=1)
    p_joint = co_freq[:, i_idx, j_idx] / n_docs
    p_i = doc_freq[:, i_idx] / n_docs
    p_j = doc_freq[:, j_idx] / n_docs
    with np.errstate(divide="ignore", invalid="ignore"):
        npmi = np.log(p_joint / (p_i * p_j)) / -np.log(p_joint)
    npmi = np.where(p_joint <= 0, -1.0, npmi)
    return np.where(p_joint >= 1, 1.0, npmi).mean(axis=1)


def umass_coherence(counts, top: np.ndarray) -> np.ndarray:
    """UMass coherence of each theme's ordered top terms (mean over term pairs), one value per theme."""
    return _umass(*_document_counts(counts, top)[:2])


def npmi_coherence(counts, top: np.ndarray) -> np.ndarray:
    """NPMI coherence of each theme's top terms (mean over term pairs), one value per theme."""
    return _npmi(*_document_counts(counts, top))


def coherence(counts, top: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(NPMI, UMass) per theme, counting the documents once for both."""
    doc_freq, co_freq, n_docs = _document_counts(counts, top)
    return _npmi(doc_freq, co_freq, n_docs), _umass(doc_freq, co_freq)
