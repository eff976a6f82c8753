"""Chance-corrected agreement statistics computed from summed per-unit counts, vectorised over leading axes.

Every statistic here is a function of totals (sums over units of per-unit quantities), so the same code
serves one point estimate or a thousand bootstrap resamples at once. Undefined values come back as NaN;
the result layer turns them into words.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _ratio(num, den) -> np.ndarray:
    """num / den with NaN where den is zero (an undefined statistic, not an error)."""
    num = np.asarray(num, dtype=float)
    den = np.asarray(den, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = num / den
    return np.where(den == 0, np.nan, out)


def _chance_corrected(observed, chance) -> np.ndarray:
    """(observed - chance) / (1 - chance): the common form of kappa-like statistics."""
    chance = np.asarray(chance, dtype=float)
    return _ratio(np.asarray(observed, dtype=float) - chance, np.where(np.isclose(chance, 1.0), 0.0, 1.0 - chance))


def cohen_kappa_table(table) -> np.ndarray:
    """Cohen (1960) kappa from a two-coder q x q table (rows coder A, columns coder B); any leading axes."""
    t = np.asarray(table, dtype=float)
    n = t.sum(axis=(-2, -1))
    observed = _ratio(np.trace(t, axis1=-2, axis2=-1), n)
    chance = _ratio((t.sum(axis=-1) * t.sum(axis=-2)).sum(axis=-1), n * n)
    return _chance_corrected(observed, chance)


def fleiss_kappa_totals(agree_sum, n_pairable, share_sum, n_rated) -> np.ndarray:
    """Fleiss (1971) kappa from totals: summed pair agreement over the n_pairable units with two or more
    coders, and summed per-category shares (..., q) over the n_rated units with one or more coders.

    With missing ratings the category shares pi_k come from every rated unit and the observed agreement from
    the units with two or more ratings (Gwet 2014, Handbook of Inter-Rater Reliability, ch. 2); with complete
    data this is Fleiss' formula.
    """
    observed = _ratio(agree_sum, n_pairable)
    shares = _ratio(np.asarray(share_sum, dtype=float), np.asarray(n_rated, dtype=float)[..., None])
    return _chance_corrected(observed, (shares**2).sum(axis=-1))


def gwet_ac1_totals(agree_sum, n_pairable, share_sum, n_rated) -> np.ndarray:
    """Gwet (2008) AC1 from the same totals as Fleiss' kappa; chance = sum_k pi_k (1 - pi_k) / (q - 1)."""
    share_sum = np.asarray(share_sum, dtype=float)
    q = share_sum.shape[-1]
    observed = _ratio(agree_sum, n_pairable)
    pi = _ratio(share_sum, np.asarray(n_rated, dtype=float)[..., None])
    return _chance_corrected(observed, (pi * (1.0 - pi)).sum(axis=-1) / (q - 1))


def gwet_ac1_table(table) -> np.ndarray:
    """Gwet (2008) AC1 from a two-coder q x q table; pi_k is the mean of the two coders' marginal shares."""
    t = np.asarray(table, dtype=float)
    n = t.sum(axis=(-2, -1))
    share_sum = (t.sum(axis=-1) + t.sum(axis=-2)) / 2.0
    return gwet_ac1_totals(np.trace(t, axis1=-2, axis2=-1), n, share_sum, n)


def pabak_table(table) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Byrt, Bishop & Carlin (1993): PABAK = 2 p_o - 1, prevalence index (a - d)/N, bias index (b - c)/N.

    The 2 x 2 table is [[a, b], [c, d]] with a = both present, d = both absent; any leading axes.
    """
    t = np.asarray(table, dtype=float)
    a, b, c, d = t[..., 0, 0], t[..., 0, 1], t[..., 1, 0], t[..., 1, 1]
    n = a + b + c + d
    return 2.0 * _ratio(a + d, n) - 1.0, _ratio(a - d, n), _ratio(b - c, n)


def krippendorff_alpha_coincidence(coincidence) -> np.ndarray:
    """Krippendorff's nominal alpha from a coincidence matrix (..., q, q): 1 - (n - 1) D / sum_{c!=k} n_c n_k."""
    o = np.asarray(coincidence, dtype=float)
    n_c = o.sum(axis=-1)
    n = n_c.sum(axis=-1)
    disagree = o.sum(axis=(-2, -1)) - np.trace(o, axis1=-2, axis2=-1)
    expected = n * n - (n_c**2).sum(axis=-1)
    return 1.0 - _ratio((n - 1.0) * disagree, expected)


@dataclass(frozen=True)
class UnitSummary:
    """Per-unit quantities whose sums over units give every multi-coder statistic above."""

    rated: np.ndarray  # unit has one or more coders (0/1)
    pairable: np.ndarray  # unit has two or more coders (0/1)
    agree: np.ndarray  # share of agreeing coder pairs on the unit (0 if not pairable)
    share: np.ndarray  # (..., q) share of the unit's coders choosing each category (0 if not rated)
    coincidence: np.ndarray  # (..., q, q) Krippendorff coincidence contributions (0 if not pairable)


def summarise_units(counts) -> UnitSummary:
    """Summarise category counts per unit (..., q): how many coders put the unit in each category."""
    n_uk = np.asarray(counts, dtype=float)
    m = n_uk.sum(axis=-1)
    rated = m >= 1
    pairable = m >= 2
    pair_den = np.where(pairable, m * (m - 1.0), 1.0)
    agree = np.where(pairable, (n_uk * (n_uk - 1.0)).sum(axis=-1) / pair_den, 0.0)
    share = np.where(rated[..., None], n_uk / np.where(rated, m, 1.0)[..., None], 0.0)
    scale = np.where(pairable, 1.0 / np.where(pairable, m - 1.0, 1.0), 0.0)[..., None, None]
    q = n_uk.shape[-1]
    pairs = n_uk[..., :, None] * n_uk[..., None, :] - n_uk[..., None] * np.eye(q)
    return UnitSummary(rated.astype(float), pairable.astype(float), agree, share, pairs * scale)


def _totals(counts) -> tuple:
    s = summarise_units(counts)
    return s.agree.sum(), s.pairable.sum(), s.share.sum(axis=0), s.rated.sum()


def fleiss_kappa(counts) -> float:
    """Fleiss' kappa from a units x categories table of rating counts (Fleiss 1971 layout; Gwet 2014 with
    units rated once: they count towards the category shares only)."""
    return float(fleiss_kappa_totals(*_totals(counts)))


def gwet_ac1(counts) -> float:
    """Gwet's AC1 from a units x categories table of rating counts (any number of coders per unit)."""
    return float(gwet_ac1_totals(*_totals(counts)))


def category_counts(reliability_data) -> tuple[np.ndarray, np.ndarray]:
    """Turn coders x units data (NaN or None = missing) into units x categories counts and the categories."""
    data = np.asarray(reliability_data, dtype=float)
    observed = ~np.isnan(data)
    categories, codes = np.unique(data[observed], return_inverse=True)
    unit_of = np.nonzero(observed)[1]
    counts = np.zeros((data.shape[1], categories.size))
    np.add.at(counts, (unit_of, codes), 1.0)
    return counts, categories


def krippendorff_alpha_nominal(reliability_data) -> float:
    """Krippendorff's alpha for nominal data from a coders x units array with NaN for missing values."""
    counts, _ = category_counts(reliability_data)
    return float(krippendorff_alpha_coincidence(summarise_units(counts).coincidence.sum(axis=0)))
