"""Significance tests for banner tables, vectorised over code rows and column pairs.

Two-proportion pooled z-test for column proportions, a chi-square per code row (code present / absent by a
banner variable's columns) and the Kish (1965) effective base for weighted data.
"""

from __future__ import annotations

import numpy as np
from scipy import stats

CHI_SQUARE_STATISTICS = ("pearson", "likelihood-ratio")


def kish_effective_base(weights) -> float:
    """Kish (1965) effective sample size n_eff = (sum w)^2 / sum(w^2); 0 when all weights are zero."""
    w = np.asarray(weights, dtype=float)
    return float(effective_bases(w.sum(), (w * w).sum()))


def effective_bases(weight_sums, weight_square_sums) -> np.ndarray:
    """Kish effective bases from per-column sums of weights and of squared weights (0 where the sum is 0)."""
    total = np.asarray(weight_sums, dtype=float)
    squares = np.asarray(weight_square_sums, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(squares > 0, total * total / np.where(squares > 0, squares, 1.0), 0.0)


def two_proportion_z(p1, n1, p2, n2) -> tuple[np.ndarray, np.ndarray]:
    """Pooled two-proportion z-test of p1 against p2 on bases n1, n2; returns (z, two-sided p).

    Arrays broadcast, so one call tests every code row against every column pair. With survey weights pass
    the weighted proportions and the Kish effective bases: the pooled variance then uses n_eff, which
    allows for the loss of precision the weights cause (a design-effect approximation). Equal proportions
    at 0 or 1 (no variance) give z = 0, p = 1. Bases of zero give NaN.
    """
    p1, n1, p2, n2 = (np.asarray(a, dtype=float) for a in (p1, n1, p2, n2))
    with np.errstate(divide="ignore", invalid="ignore"):
        pooled = (p1 * n1 + p2 * n2) / (n1 + n2)
        se = np.sqrt(pooled * (1.0 - pooled) * (1.0 / n1 + 1.0 / n2))
        z = np.where(se > 0, (p1 - p2) / np.where(se > 0, se, 1.0), 0.0)
    usable = (n1 > 0) & (n2 > 0) & np.isfinite(p1) & np.isfinite(p2)
    z = np.where(usable, z, np.nan)
    p = np.where(usable, 2.0 * stats.norm.sf(np.abs(z)), np.nan)
    return z, p


def chi_square_rows(present, base, statistic: str = "pearson") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Chi-square test of each row's 2 x k table (present, base - present) by columns; returns (stat, df, p).

    `present` is rows x columns, `base` the column bases (one per column, or rows x columns). Columns with a
    base of zero are left out of that row's test; fewer than two columns left gives NaN. A row with no
    variation (present nowhere, or everywhere) gives stat 0, p 1. `statistic` is "pearson" (X2) or
    "likelihood-ratio" (G2). This is the per-row test of Bilder & Loughin (2004): never one chi-square
    over a whole multiple-response table, whose rows overlap.
    """
    if statistic not in CHI_SQUARE_STATISTICS:
        raise ValueError(f"statistic must be one of {CHI_SQUARE_STATISTICS}, got {statistic!r}")
    present = np.atleast_2d(np.asarray(present, dtype=float))
    base = np.broadcast_to(np.asarray(base, dtype=float), present.shape)
    in_test = base > 0
    present = np.where(in_test, present, 0.0)
    base = np.where(in_test, base, 0.0)
    observed = np.stack([present, base - present])
    total = base.sum(axis=1)
    row_share = np.divide(present.sum(axis=1), total, out=np.zeros_like(total), where=total > 0)
    shares = np.stack([row_share, 1.0 - row_share])[:, :, None]
    expected = shares * base[None, :, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        if statistic == "pearson":
            cells = np.where(expected > 0, (observed - expected) ** 2 / np.where(expected > 0, expected, 1.0), 0.0)
        else:
            cells = np.where((observed > 0) & (expected > 0),
                             2.0 * observed * np.log(np.where(observed > 0, observed, 1.0) / np.where(expected > 0, expected, 1.0)),
                             0.0)
    stat = cells.sum(axis=(0, 2))
    df = in_test.sum(axis=1) - 1.0
    testable = df >= 1
    stat = np.where(testable, stat, np.nan)
    p = np.where(testable, stats.chi2.sf(stat, np.where(testable, df, 1.0)), np.nan)
    no_variation = testable & ((row_share <= 0) | (row_share >= 1))
    stat = np.where(no_variation, 0.0, stat)
    p = np.where(no_variation, 1.0, p)
    return stat, np.where(testable, df, np.nan), p
