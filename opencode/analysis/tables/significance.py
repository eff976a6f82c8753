"""Significance tests for banner tables, vectorised over code rows and column pairs.

Two-proportion pooled z-test for column proportions (Fisher's exact test where a column is too small for it),
a chi-square per code row (code present / absent by a banner variable's columns; first-order Rao-Scott
corrected when weighted), Wilson score intervals and the Kish (1965) effective base for weighted data.
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


def wilson_interval(p, n, confidence: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for proportions p on bases n (arrays broadcast); NaN where n is 0.

    With survey weights pass the weighted proportion and the Kish effective base (a design-effect
    approximation, common practice).
    """
    p, n = np.asarray(p, dtype=float), np.asarray(n, dtype=float)
    z = stats.norm.ppf(0.5 + confidence / 2.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        centre = (p + z * z / (2 * n)) / (1 + z * z / n)
        half = z / (1 + z * z / n) * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    ok = (n > 0) & np.isfinite(p)
    return np.where(ok, np.clip(centre - half, 0.0, 1.0), np.nan), np.where(ok, np.clip(centre + half, 0.0, 1.0), np.nan)


def fisher_two_sided(x1, n1, x2, n2) -> np.ndarray:
    """Fisher's exact test (two-sided, scipy.stats.fisher_exact) of x1/n1 against x2/n2, element by element;
    counts are rounded to whole numbers, NaN where a base is 0. Each distinct table is computed once."""
    x1, n1, x2, n2 = (np.atleast_1d(np.rint(np.asarray(a, dtype=float))) for a in np.broadcast_arrays(x1, n1, x2, n2))
    out = np.full(x1.shape, np.nan)
    usable = (n1 > 0) & (n2 > 0) & np.isfinite(x1) & np.isfinite(x2)
    cache: dict[tuple, float] = {}
    for index in zip(*np.nonzero(usable)):
        key = (x1[index], n1[index], x2[index], n2[index])
        if key not in cache:
            a, b = int(key[0]), int(key[2])
            table = [[a, int(key[1]) - a], [b, int(key[3]) - b]]
            cache[key] = float(stats.fisher_exact(table, alternative="two-sided").pvalue)
        out[index] = cache[key]
    return out


def rao_scott_rows(present_w, base_w, present_w2, base_w2, base_n) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """First-order Rao-Scott corrected Pearson chi-square of each row's 2 x k table (code present / absent by
    columns) under survey weights; returns (statistic, df, p, mean design effect).

    Rao & Scott (1981, JASA 76; 1984, Annals of Statistics 12): Pearson's X2 on the weighted cell proportions
    times the unweighted count n, divided by the mean eigenvalue of the generalized design-effect matrix
    Delta = (C' D^-1 C / n)^-1 (C' D^-1 V D^-1 C), with C the interaction contrasts made orthogonal to the main
    effects, D the diagonal of the cell proportions (1 / 0 read as 0 for an empty cell) and V the design
    covariance of the cell proportions: the same algebra as R's survey package (svychisq, statistic "Chisq").
    V is the linearised variance of a weighted proportion with each respondent its own sampling unit,
    sum_i w_i^2 (z_i - p)(z_i - p)' / (sum w)^2, without the with-replacement factor n / (n - 1): equal
    weights then give a design effect of exactly 1 and Pearson's statistic (when no cell is empty).

    Inputs per row and column: summed weights of respondents with the code (`present_w`) and of everyone
    (`base_w`, per column), the same for squared weights, and unweighted column counts (`base_n`). Columns with
    no one are left out; fewer than two columns give NaN; a row with no variation gives 0 and p = 1.
    """
    present_w = np.atleast_2d(np.asarray(present_w, dtype=float))
    present_w2 = np.atleast_2d(np.asarray(present_w2, dtype=float))
    base_w = np.broadcast_to(np.asarray(base_w, dtype=float), present_w.shape)
    base_w2 = np.broadcast_to(np.asarray(base_w2, dtype=float), present_w.shape)
    base_n = np.broadcast_to(np.asarray(base_n, dtype=float), present_w.shape)
    rows = present_w.shape[0]
    stat, df, p, deff = (np.full(rows, np.nan) for _ in range(4))
    contrasts: dict[int, np.ndarray] = {}
    for r in range(rows):
        keep = (base_w[r] > 0) & (base_n[r] > 0)
        k = int(keep.sum())
        if k < 2:
            continue
        total_w, n = base_w[r, keep].sum(), base_n[r, keep].sum()
        cells_w = np.concatenate([present_w[r, keep], base_w[r, keep] - present_w[r, keep]])
        cells_w2 = np.concatenate([present_w2[r, keep], base_w2[r, keep] - present_w2[r, keep]])
        cell_p = np.clip(cells_w / total_w, 0.0, 1.0)
        row_p = np.array([cell_p[:k].sum(), cell_p[k:].sum()])
        df[r] = k - 1
        if row_p.min() <= 0:
            stat[r], p[r] = 0.0, 1.0
            continue
        col_p = cell_p[:k] + cell_p[k:]
        expected = np.concatenate([row_p[0] * col_p, row_p[1] * col_p])
        pearson = n * ((cell_p - expected) ** 2 / expected).sum()
        design = (np.diag(cells_w2) - np.outer(cells_w2, cell_p) - np.outer(cell_p, cells_w2)
                  + cells_w2.sum() * np.outer(cell_p, cell_p)) / total_w**2
        if k not in contrasts:
            is_present = np.repeat([1.0, 0.0], k)
            columns = np.vstack([np.eye(k), np.eye(k)])[:, 1:]
            main = np.column_stack([np.ones(2 * k), is_present, columns])
            inter = columns * is_present[:, None]
            contrasts[k] = inter - main @ np.linalg.lstsq(main, inter, rcond=None)[0]
        contrast = contrasts[k]
        inverse = np.where(cell_p > 0, 1.0 / np.where(cell_p > 0, cell_p, 1.0), 0.0)
        scaled = contrast * inverse[:, None]
        denominator = contrast.T @ scaled / n
        numerator = scaled.T @ design @ scaled
        try:
            delta = np.linalg.solve(denominator, numerator)
        except np.linalg.LinAlgError:
            continue
        mean_deff = float(np.trace(delta)) / (k - 1)
        deff[r] = mean_deff
        if mean_deff > 0:
            stat[r] = pearson / mean_deff
            p[r] = stats.chi2.sf(stat[r], k - 1)
    return stat, df, p, deff
