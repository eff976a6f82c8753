"""ThemeFinder: NMF or LDA themes from a docs x terms count matrix, reproducible through random_state.

NMF (Lee & Seung 1999) runs on tf-idf weights computed from the counts (scikit-learn TfidfTransformer),
started from NNDSVD, with the Frobenius loss (coordinate descent) or the Kullback-Leibler loss
(multiplicative updates). LDA (Blei, Ng & Jordan 2003) runs on the raw counts with batch or online
variational Bayes. Verbatims with no terms are left out of the fit and counted; seeded NMF starts chosen
themes from the user's term lists (e.g. an existing code frame).

SHORT_TEXT_NOTE (kept in analysis/choices.py) is the user-facing paragraph on short verbatims, min_df and phrases.
"""

from __future__ import annotations

import warnings

from typing import Sequence

import numpy as np
import scipy.sparse as sp
from sklearn.base import BaseEstimator
from sklearn.decomposition import NMF, LatentDirichletAllocation
from sklearn.exceptions import ConvergenceWarning
from sklearn.feature_extraction.text import TfidfTransformer
from sklearn.utils.extmath import randomized_svd

from opencode.errors import OpenCodeError
from opencode.analysis.choices import SHORT_TEXT_NOTE  # noqa: F401  (the paragraph lives with the CLI's light choices)


METHODS = ("nmf", "lda")
LOSSES = {"frobenius": "frobenius", "kullback-leibler": "kullback-leibler", "kl": "kullback-leibler"}
NMF_INITS = ("nndsvd", "nndsvda", "nndsvdar", "random")
LEARNING_METHODS = ("batch", "online")


def as_count_matrix(counts) -> sp.csr_matrix:
    """The counts as a CSR float matrix, or a clear error for anything that is not docs x terms counts."""
    if sp.issparse(counts):
        matrix = sp.csr_matrix(counts, dtype=np.float64, copy=True)
    else:
        array = np.asarray(counts, dtype=np.float64)
        if array.ndim != 2:
            raise OpenCodeError(f"term matrix: expected a 2-D docs x terms matrix, got {array.ndim} dimension(s)")
        matrix = sp.csr_matrix(array)
    if matrix.nnz and (matrix.data.min() < 0 or not np.isfinite(matrix.data).all()):
        raise OpenCodeError("term matrix: counts must be finite and not negative")
    matrix.eliminate_zeros()
    return matrix


def included_rows(counts: sp.csr_matrix) -> np.ndarray:
    """Mask of verbatims that kept at least one term after the lexicon (the others are counted, not themed)."""
    return np.diff(counts.indptr) > 0


def check_corpus(counts: sp.csr_matrix, k: int) -> np.ndarray:
    """Raise a clear OpenCodeError when k themes cannot be found in these verbatims; return the included mask."""
    if int(k) != k or k < 2:
        raise OpenCodeError(f"number of themes k={k}: must be a whole number of at least 2")
    keep = included_rows(counts)
    n_kept = int(keep.sum())
    n_empty = counts.shape[0] - n_kept
    empty_note = f" ({n_empty} empty verbatim(s) left out)" if n_empty else ""
    if n_kept < k:
        raise OpenCodeError(f"only {n_kept} verbatim(s) with terms{empty_note}: fewer than k={k} themes")
    used_terms = np.unique(counts.indices).size
    if used_terms < k:
        raise OpenCodeError(f"vocabulary too small: {used_terms} term(s) in use, fewer than k={k} themes "
                            "(lower min_df or choose a smaller k)")
    kept = counts if keep.all() else counts[keep]
    fingerprint = kept @ np.random.default_rng(0).random(kept.shape[1])
    n_distinct = np.unique(np.round(fingerprint, 10)).size
    if n_distinct == 1:
        raise OpenCodeError(f"all {n_kept} verbatims with terms are identical: there is nothing to split into themes")
    if n_distinct < k:
        raise OpenCodeError(f"only {n_distinct} distinct verbatims: fewer than k={k} themes")
    return keep


def default_min_share(k: int) -> float:
    """A theme explains a verbatim when it holds more than 1.5 times an even share (at most one half)."""
    return min(0.5, 1.5 / k)


CATCH_ALL_SHARE = 0.30  # common practice (no published source): a theme over 30% of verbatims is read as a lump


def catch_all_limit(k: int) -> float:
    """The share above which one of k themes is a catch-all: 30%, or twice an even share (2/k) when that is
    more (with 4 themes an even split already gives 25% each, so a lump starts above 50%)."""
    return max(CATCH_ALL_SHARE, 2.0 / k)


def largest_share(dominant: np.ndarray, included: np.ndarray, k: int) -> tuple[int, float]:
    """The theme dominating the most verbatims with terms, and its share of them."""
    n_included = int(np.asarray(included, dtype=bool).sum())
    counts = np.bincount(dominant[dominant >= 0], minlength=k)
    if n_included == 0:
        return 0, 0.0
    top = int(counts.argmax())
    return top, float(counts[top] / n_included)


def dominant_themes(shares: np.ndarray, weights: np.ndarray, min_share: float) -> np.ndarray:
    """Each verbatim's strongest theme, or -1 when no theme explains it (weights ~0 or max share too low)."""
    total = weights.sum(axis=1)
    scale = total.max() if total.size and total.max() > 0 else 1.0
    explained = (total > 1e-9 * scale) & (shares.max(axis=1, initial=0.0) > min_share)
    return np.where(explained, shares.argmax(axis=1), -1)


def row_shares(weights: np.ndarray) -> np.ndarray:
    """Rows scaled to sum to one (rows of zeros stay zero)."""
    total = weights.sum(axis=1, keepdims=True)
    return np.divide(weights, total, out=np.zeros_like(weights), where=total > 0)


def nndsvd_start(u: np.ndarray, s: np.ndarray, vt: np.ndarray, variant: str, mean: float,
                 eps: float = 1e-6) -> tuple[np.ndarray, np.ndarray]:
    """NNDSVD start (Boutsidis & Gallopoulos 2008) for NMF from the leading singular triplets u, s, vt.

    Each triplet after the first keeps the larger of its positive and negative parts; "nndsvda" fills zeros
    with the mean of the data, "nndsvd" keeps them. The first k triplets of one SVD give the start for every
    k up to its rank, which spares the k search one SVD per k.
    """
    tiny = np.finfo(float).tiny
    pos_u, neg_u = np.maximum(u, 0), np.maximum(-u, 0)
    pos_v, neg_v = np.maximum(vt, 0), np.maximum(-vt, 0)
    pos_u_norm, neg_u_norm = np.linalg.norm(pos_u, axis=0), np.linalg.norm(neg_u, axis=0)
    pos_v_norm, neg_v_norm = np.linalg.norm(pos_v, axis=1), np.linalg.norm(neg_v, axis=1)
    positive = pos_u_norm * pos_v_norm > neg_u_norm * neg_v_norm
    sigma = np.where(positive, pos_u_norm * pos_v_norm, neg_u_norm * neg_v_norm)
    scale = np.sqrt(s * sigma)
    w = np.where(positive, pos_u / np.maximum(pos_u_norm, tiny), neg_u / np.maximum(neg_u_norm, tiny)) * scale
    h = np.where(positive[:, None], pos_v / np.maximum(pos_v_norm, tiny)[:, None],
                 neg_v / np.maximum(neg_v_norm, tiny)[:, None]) * scale[:, None]
    # The leading singular triplet is non-negative up to sign and is used as it is.
    w[:, 0] = np.sqrt(s[0]) * np.abs(u[:, 0])
    h[0] = np.sqrt(s[0]) * np.abs(vt[0])
    w[w < eps] = 0.0
    h[h < eps] = 0.0
    if variant == "nndsvda":
        w[w == 0] = mean
        h[h == 0] = mean
    return w, h


def leading_svd(matrix: sp.csr_matrix, rank: int, random_state: int | None) -> tuple[np.ndarray, ...]:
    """Randomized truncated SVD (Halko, Martinsson & Tropp 2011), as scikit-learn's NNDSVD computes it."""
    return randomized_svd(matrix, rank, random_state=random_state)


class ThemeFinder(BaseEstimator):
    """Find k themes in a docs x terms count matrix with NMF (on tf-idf) or LDA (on counts).

    Learned: components_ (themes x terms), weights_ (docs x themes, raw), doc_theme_ (rows as shares),
    dominant_theme_ (-1: empty or unexplained), included_ (mask of verbatims with terms), n_empty_,
    n_unexplained_, seed_columns_ (term columns each seeded theme started from; seeded themes come first),
    model_ (the fitted scikit-learn estimator) and, for NMF, tfidf_.
    """

    def __init__(self, method: str = "nmf", n_themes: int = 10, *, loss: str = "frobenius",
                 init: str | None = None, learning_method: str = "batch",
                 seed_terms: Sequence[Sequence[str]] | None = None, min_share: float | None = None,
                 max_iter: int | None = None, tol: float = 1e-4, doc_topic_prior: float | None = None,
                 topic_word_prior: float | None = None, random_state: int | None = 0):
        self.method = method
        self.n_themes = n_themes
        self.loss = loss
        self.init = init
        self.learning_method = learning_method
        self.seed_terms = seed_terms
        self.min_share = min_share
        self.max_iter = max_iter
        self.tol = tol
        self.doc_topic_prior = doc_topic_prior
        self.topic_word_prior = topic_word_prior
        self.random_state = random_state

    def _check_params(self) -> None:
        """Clear errors for unknown options before any work is done."""
        if self.method not in METHODS:
            raise OpenCodeError(f"theme method {self.method!r}: choose one of {', '.join(METHODS)}")
        if self.method == "nmf":
            if self.loss not in LOSSES:
                raise OpenCodeError(f"NMF loss {self.loss!r}: choose frobenius or kullback-leibler")
            if self.init is not None and self.init not in NMF_INITS:
                raise OpenCodeError(f"NMF init {self.init!r}: choose one of {', '.join(NMF_INITS)}")
            if LOSSES[self.loss] == "kullback-leibler" and self.init == "nndsvd":
                raise OpenCodeError("NMF init 'nndsvd' leaves zeros the Kullback-Leibler solver cannot move: "
                                    "use 'nndsvda'")
        else:
            if self.learning_method not in LEARNING_METHODS:
                raise OpenCodeError(f"LDA learning method {self.learning_method!r}: choose batch or online")
            if self.seed_terms:
                raise OpenCodeError("seeded themes are available with method='nmf' only; "
                                    "drop the seed terms or switch to NMF")
        if self.min_share is not None and not 0.0 <= self.min_share < 1.0:
            raise OpenCodeError(f"min_share={self.min_share}: must be between 0 and 1")

    def _nmf_init(self) -> str:
        """The NNDSVD variant used: nndsvd for Frobenius, nndsvda (no stuck zeros) for Kullback-Leibler."""
        if self.init is not None:
            return self.init
        return "nndsvd" if LOSSES[self.loss] == "frobenius" else "nndsvda"

    def _estimator(self, k: int, init: str | None = None, max_iter: int | None = None, tol: float | None = None):
        """The scikit-learn estimator these parameters describe."""
        if self.method == "nmf":
            kl = LOSSES[self.loss] == "kullback-leibler"
            return NMF(n_components=k, init=init or self._nmf_init(), solver="mu" if kl else "cd",
                       beta_loss=LOSSES[self.loss], max_iter=max_iter or self.max_iter or 200,
                       tol=self.tol if tol is None else tol, random_state=self.random_state)
        return LatentDirichletAllocation(n_components=k, learning_method=self.learning_method,
                                         max_iter=max_iter or self.max_iter or 10,
                                         doc_topic_prior=self.doc_topic_prior,
                                         topic_word_prior=self.topic_word_prior,
                                         random_state=self.random_state)

    def _seed_columns(self, terms: Sequence[str] | None, model_input: sp.csr_matrix) -> list[np.ndarray]:
        """Term columns for each seed list, with clear errors for unknown or absent terms."""
        if not self.seed_terms:
            return []
        if terms is None:
            raise OpenCodeError("seed terms need the term labels: pass terms= to fit")
        if len(self.seed_terms) >= self.n_themes:
            raise OpenCodeError(f"{len(self.seed_terms)} seeded themes leave no room to find new ones with "
                                f"k={self.n_themes}: choose k larger than the number of seed lists")
        position = {term: j for j, term in enumerate(terms)}
        in_use = np.asarray((model_input > 0).sum(axis=0)).ravel() > 0
        columns = []
        for number, seed in enumerate(self.seed_terms, start=1):
            seed = list(seed)
            if not seed:
                raise OpenCodeError(f"seed list {number} is empty")
            unknown = [term for term in seed if term not in position]
            if unknown:
                raise OpenCodeError(f"seed list {number}: term(s) not in the vocabulary: {', '.join(unknown)}")
            absent = [term for term in seed if not in_use[position[term]]]
            if absent:
                raise OpenCodeError(f"seed list {number}: term(s) in no verbatim with terms: {', '.join(absent)}")
            columns.append(np.unique([position[term] for term in seed]))
        return columns

    def _seeded_init(self, matrix: sp.csr_matrix, seed_columns: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
        """W0, H0: seeded H rows concentrated on their seed terms, the rest NNDSVD of the unseeded terms."""
        k, n_terms = self.n_themes, matrix.shape[1]
        n_seeded = len(seed_columns)
        background = np.sqrt(matrix.mean() / k) * 0.01
        h_seed = np.full((n_seeded, n_terms), background)
        for row, cols in enumerate(seed_columns):
            h_seed[row, cols] = 1.0 / np.sqrt(cols.size)
        w_seed = np.asarray(matrix @ h_seed.T) / (h_seed ** 2).sum(axis=1)
        unseeded = np.ones(n_terms)
        unseeded[np.concatenate(seed_columns)] = 0.0
        rest = matrix @ sp.diags(unseeded)
        variant = "nndsvd" if self._nmf_init() == "nndsvd" else "nndsvda"
        w_rest, h_rest = nndsvd_start(*leading_svd(rest, k - n_seeded, self.random_state), variant, rest.mean())
        w0 = np.hstack([np.maximum(w_seed, background), w_rest])
        h0 = np.vstack([h_seed, h_rest])
        return w0, h0

    def model_input(self, counts: sp.csr_matrix) -> tuple[sp.csr_matrix, TfidfTransformer | None]:
        """What the model is fitted on: tf-idf of the counts for NMF, the counts themselves for LDA."""
        if self.method == "nmf":
            tfidf = TfidfTransformer()
            return sp.csr_matrix(tfidf.fit_transform(counts)), tfidf
        return counts, None

    def fit(self, X, y=None, terms: Sequence[str] | None = None) -> "ThemeFinder":
        """Fit on a docs x terms count matrix; `terms` (column labels) are needed only for seed_terms."""
        self._check_params()
        counts = as_count_matrix(X)
        if terms is not None and len(terms) != counts.shape[1]:
            raise OpenCodeError(f"term labels: {len(terms)} given for a matrix with {counts.shape[1]} columns")
        keep = check_corpus(counts, self.n_themes)
        model_input, self.tfidf_ = self.model_input(counts if keep.all() else counts[keep])
        self.seed_columns_ = self._seed_columns(terms, model_input)
        return self._fit_input(model_input, keep)

    def _fit_input(self, model_input: sp.csr_matrix, keep: np.ndarray, max_iter: int | None = None,
                   tol: float | None = None, start: tuple[np.ndarray, np.ndarray] | None = None) -> "ThemeFinder":
        """Fit the model on prepared input rows (the included verbatims) and derive the per-verbatim results.

        start: an NMF (W, H) start computed elsewhere (the k search shares one SVD across k).
        """
        seed_columns = getattr(self, "seed_columns_", [])
        if seed_columns and start is None:
            start = self._seeded_init(model_input, seed_columns)
        if start is not None:
            w0, h0 = (np.array(part, dtype=np.float64) for part in start)
            model = self._estimator(self.n_themes, init="custom", max_iter=max_iter, tol=tol)
            fit = lambda: model.fit_transform(model_input, W=w0, H=h0)  # noqa: E731
        else:
            model = self._estimator(self.n_themes, max_iter=max_iter, tol=tol)
            fit = lambda: model.fit_transform(model_input)  # noqa: E731
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ConvergenceWarning)
            kept_weights = fit()
        stalled = [w for w in caught if issubclass(w.category, ConvergenceWarning)]
        for other in caught:  # anything else goes on as it came
            if other not in stalled:
                warnings.warn_explicit(other.message, other.category, other.filename, other.lineno)
        #: One plain sentence instead of scikit-learn's ConvergenceWarning (empty when the model converged).
        self.convergence_note_ = "" if not stalled else (
            f"the theme model stopped at its iteration limit ({model.max_iter}) before converging; the themes are "
            "usable but may shift a little with another seed or a higher limit")
        self.model_ = model
        self.components_ = model.components_
        self.n_iter_ = model.n_iter_
        self.included_ = keep
        self.weights_ = np.zeros((keep.size, self.n_themes))
        self.weights_[keep] = kept_weights
        self.doc_theme_ = row_shares(self.weights_)
        self.min_share_ = default_min_share(self.n_themes) if self.min_share is None else self.min_share
        self.dominant_theme_ = np.where(keep, dominant_themes(self.doc_theme_, self.weights_, self.min_share_), -1)
        self.n_empty_ = int((~keep).sum())
        self.n_unexplained_ = int((keep & (self.dominant_theme_ < 0)).sum())
        return self

    def transform(self, X) -> np.ndarray:
        """Theme shares (rows sum to one; zero rows for verbatims with no terms) of new verbatims."""
        counts = as_count_matrix(X)
        model_input = self.tfidf_.transform(counts) if self.tfidf_ is not None else counts
        return row_shares(self.model_.transform(model_input))
