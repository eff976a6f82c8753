"""Per-term evidence beside the drivers model: 2x2 tables, odds ratios, chi-square / Fisher p, BH q, Monroe z.

Everything is vectorised over all terms at once. The tests use unweighted document counts (a survey weight
changes the effective sample size, which a plain 2x2 test cannot honour); weights enter the model instead.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy import stats

from opencode.analysis.multiple_testing import bh_adjust

#: Fisher's exact test replaces the chi-square when any expected cell count is below this (Cochran's rule).
MIN_EXPECTED = 5.0

#: Relative tolerance when collecting tables "as or less likely" than the observed one in Fisher's test.
_FISHER_TOLERANCE = 1 + 1e-7


def presence(X) -> sp.csr_matrix:
    """0/1 CSR matrix: does each verbatim contain each term (counts above zero)."""
    X = sp.csr_matrix(X, copy=True)
    X.eliminate_zeros()
    X.data = np.ones_like(X.data, dtype=np.float64)
    return X


def two_by_two(X, y) -> dict[str, np.ndarray]:
    """Cells of each term's 2x2 table with a 0/1 outcome: a = term & y=1, b = term & y=0, c, d = without."""
    y = np.asarray(y).astype(bool)
    P = presence(X)
    a = np.asarray(P[y].sum(axis=0)).ravel().astype(np.int64)
    b = np.asarray(P[~y].sum(axis=0)).ravel().astype(np.int64)
    return {"a": a, "b": b, "c": y.sum() - a, "d": (~y).sum() - b}


def woolf_odds_ratio(a, b, c, d, level: float = 0.95) -> dict[str, np.ndarray]:
    """Odds ratio ad/bc with Woolf's log-scale CI; Haldane's +0.5 to all four cells where a cell is zero."""
    cells = np.vstack([a, b, c, d]).astype(float)
    haldane = (cells == 0).any(axis=0)
    cells[:, haldane] += 0.5
    a_, b_, c_, d_ = cells
    log_or = np.log(a_) + np.log(d_) - np.log(b_) - np.log(c_)
    se = np.sqrt((1.0 / cells).sum(axis=0))
    z = stats.norm.ppf(0.5 + level / 2)
    return {
        "odds_ratio": np.exp(log_or),
        "or_low": np.exp(log_or - z * se),
        "or_high": np.exp(log_or + z * se),
        "haldane": haldane,
    }


def expected_counts(a, b, c, d) -> np.ndarray:
    """Expected cell counts under independence, shape (4, n_terms) in the order a, b, c, d."""
    a, b, c, d = (np.asarray(v, dtype=float) for v in (a, b, c, d))
    n = a + b + c + d
    row_t, row_n = a + b, c + d
    col_1, col_0 = a + c, b + d
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.vstack([row_t * col_1, row_t * col_0, row_n * col_1, row_n * col_0]) / n


def chi_square_p(a, b, c, d, correction: bool = True) -> np.ndarray:
    """Pearson chi-square p (1 df) per term, with Yates' correction as scipy.stats.chi2_contingency applies it."""
    observed = np.vstack([a, b, c, d]).astype(float)
    expected = expected_counts(a, b, c, d)
    if correction:
        diff = expected - observed
        observed = observed + np.sign(diff) * np.minimum(0.5, np.abs(diff))
    with np.errstate(invalid="ignore", divide="ignore"):
        statistic = ((observed - expected) ** 2 / expected).sum(axis=0)
    p = stats.chi2.sf(statistic, 1)
    degenerate = (expected == 0).any(axis=0)
    p[degenerate] = 1.0
    return p


def fisher_p(a, b, c, d) -> np.ndarray:
    """Two-sided Fisher exact p per term; terms sharing margins share one hypergeometric pmf (vectorised)."""
    a, b, c, d = (np.asarray(v, dtype=np.int64) for v in (a, b, c, d))
    p = np.ones(a.shape, dtype=float)
    n = a + b + c + d
    row_t, col_1 = a + b, a + c
    margins = np.vstack([n, row_t, col_1]).T
    unique, inverse = np.unique(margins, axis=0, return_inverse=True)
    for group, (total, terms_with, positives) in enumerate(unique):
        members = np.flatnonzero(inverse.ravel() == group)
        if terms_with in (0, total) or positives in (0, total):
            continue
        low, high = max(0, terms_with + positives - total), min(terms_with, positives)
        support = np.arange(low, high + 1)
        pmf = stats.hypergeom.pmf(support, total, positives, terms_with)
        order = np.argsort(pmf)
        cumulative = np.cumsum(pmf[order])
        at_most = np.searchsorted(pmf[order], pmf * _FISHER_TOLERANCE, side="right")
        p_support = np.minimum(cumulative[at_most - 1], 1.0)
        p[members] = p_support[a[members] - low]
    return p


def monroe_z(counts_1, counts_0, prior) -> np.ndarray:
    """Monroe, Colaresi & Quinn (2008) log-odds ratio with a Dirichlet prior, divided by its standard error.

    counts_1 / counts_0: term counts in group 1 / group 0; prior: alpha per term (a scalar means uniform).
    Positive z: the term leans to group 1.
    """
    y1 = np.asarray(counts_1, dtype=float)
    y0 = np.asarray(counts_0, dtype=float)
    alpha = np.broadcast_to(np.asarray(prior, dtype=float), y1.shape)
    alpha0 = alpha.sum()
    n1, n0 = y1.sum(), y0.sum()
    delta = (np.log(y1 + alpha) - np.log(n1 + alpha0 - y1 - alpha)
             - np.log(y0 + alpha) + np.log(n0 + alpha0 - y0 - alpha))
    variance = 1.0 / (y1 + alpha) + 1.0 / (y0 + alpha)
    return delta / np.sqrt(variance)


def informative_prior(counts_1, counts_0, scale: float = 0.1) -> np.ndarray:
    """Dirichlet prior from the pooled counts of both groups, times `scale` (the paper uses a background corpus)."""
    pooled = np.asarray(counts_1, dtype=float) + np.asarray(counts_0, dtype=float)
    return np.maximum(pooled * scale, 1e-3)


def univariate_table(X, y, terms, *, prior_scale: float = 0.1, correction: bool = True) -> pd.DataFrame:
    """One row per term: 2x2 cells, group shares, Woolf OR + CI, chi-square or Fisher p, BH q, Monroe z."""
    X = sp.csr_matrix(X)
    y = np.asarray(y).astype(bool)
    cells = two_by_two(X, y)
    a, b, c, d = cells["a"], cells["b"], cells["c"], cells["d"]
    small = (expected_counts(a, b, c, d) < MIN_EXPECTED).any(axis=0)
    p = chi_square_p(a, b, c, d, correction=correction)
    if small.any():
        p[small] = fisher_p(a[small], b[small], c[small], d[small])
    counts_1 = np.asarray(X[y].sum(axis=0)).ravel()
    counts_0 = np.asarray(X[~y].sum(axis=0)).ravel()
    odds = woolf_odds_ratio(a, b, c, d)
    with np.errstate(invalid="ignore", divide="ignore"):
        share_1 = a / max(int(y.sum()), 1)
        share_0 = b / max(int((~y).sum()), 1)
    return pd.DataFrame({
        "term": list(terms),
        "docs_1": a, "docs_0": b, "share_1": share_1, "share_0": share_0,
        "uni_or": odds["odds_ratio"], "uni_or_low": odds["or_low"], "uni_or_high": odds["or_high"],
        "haldane": odds["haldane"],
        "test": np.where(small, "fisher", "chi2"),
        "p": p, "q": bh_adjust(p),
        "monroe_z": monroe_z(counts_1, counts_0, informative_prior(counts_1, counts_0, prior_scale)),
    })
