"""Agreement on categories with agreement weights (nominal, ordinal, interval, ratio) and analytic standard errors.

The input is a one-hot array `ratings[u, r, b, k]`: coder r put unit u in category k of batch b (a batch is
a code's present/absent pair, or one scale); a coder who did not rate the unit has all zeros. Agreement
weights w[k, l] (1 on the diagonal) give partial credit to near misses on an ordered scale.

- Fleiss' kappa, Gwet's AC1/AC2, Brennan-Prediger and Conger's kappa follow Gwet (2014), Handbook of
  Inter-Rater Reliability, 4th ed., ch. 2-3 (observed agreement over units with two or more ratings, category
  shares over every rated unit), with the linearised variances given there (Gwet 2008 for AC1); t intervals
  with n - 1 degrees of freedom as in the handbook.
- Cohen's weighted kappa: Cohen (1968) on the units both coders rated, with the large-sample variance of
  Fleiss, Cohen & Everitt (1969) and a normal interval.
- Krippendorff's alpha with the difference functions of Krippendorff (2011) for nominal, ordinal, interval
  and ratio data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats as sps

from opencode.analysis.agreement.stats import _ratio
from opencode.errors import OpenCodeError
from opencode.analysis.choices import AGREEMENT_LEVELS as LEVELS  # noqa: F401

WEIGHTS = ("identity", "linear", "quadratic")


def agreement_weights(values, kind: str = "identity") -> np.ndarray:
    """Agreement weights between categories with these values (Cohen 1968; Gwet 2014 ch. 3).

    identity: 1 on the diagonal, 0 elsewhere; linear: 1 - |a - b| / (max - min); quadratic:
    1 - (a - b)^2 / (max - min)^2.
    """
    v = np.asarray(values, dtype=float)
    if kind not in WEIGHTS:
        raise OpenCodeError(f"unknown weights {kind!r}; choose one of {', '.join(WEIGHTS)}")
    if kind == "identity" or v.size < 2:
        return np.eye(v.size)
    span = v.max() - v.min()
    diff = np.abs(v[:, None] - v[None, :]) / span
    return 1.0 - (diff if kind == "linear" else diff**2)


def one_hot(codes, n_categories: int) -> np.ndarray:
    """Integer category indices (units x coders [x batch], -1 = not rated) as a one-hot float array."""
    codes = np.asarray(codes)
    out = np.zeros(codes.shape + (n_categories,))
    rated = codes >= 0
    index = np.nonzero(rated)
    out[index + (codes[rated],)] = 1.0
    return out


@dataclass(frozen=True)
class Coefficient:
    """A coefficient per batch with its observed and chance agreement, analytic standard error and interval."""

    value: np.ndarray
    observed: np.ndarray
    chance: np.ndarray
    se: np.ndarray
    low: np.ndarray
    high: np.ndarray


def _last_sum(array: np.ndarray) -> np.ndarray:
    """Sum over a short last axis (the categories) as element-wise additions: numpy's reduction over a last axis
    of length 2 or 3 is several times slower on large arrays."""
    out = array[..., 0].copy()
    for k in range(1, array.shape[-1]):
        out += array[..., k]
    return out


def _times(array: np.ndarray, matrix: np.ndarray) -> np.ndarray:
    """array @ matrix over the last axis as one BLAS call (much faster than a stack of tiny products)."""
    if np.array_equal(matrix, np.eye(matrix.shape[0])):
        return array
    return np.tensordot(array, matrix, axes=([-1], [0]))


def _as_batches(ratings) -> np.ndarray:
    r = np.asarray(ratings, dtype=float)
    if r.ndim == 3:
        r = r[:, :, None, :]
    if r.ndim != 4:
        raise OpenCodeError(f"agreement ratings must be units x coders [x batch] x categories, got shape {r.shape}")
    return r


def _t_interval(value, se, n_rated, confidence: float) -> tuple[np.ndarray, np.ndarray]:
    """value -/+ t(n - 1) * se with the upper limit capped at 1 (Gwet 2014)."""
    df = np.maximum(np.asarray(n_rated, dtype=float) - 1.0, 1.0)
    t = sps.t.ppf(0.5 + confidence / 2.0, df)
    low, high = value - t * se, np.minimum(value + t * se, 1.0)
    bad = ~np.isfinite(se)
    return np.where(bad, np.nan, low), np.where(bad, np.nan, high)


def gwet_family(ratings, weights, kind: str, confidence: float = 0.95) -> Coefficient:
    """Fleiss' kappa ('fleiss'), Gwet's AC1/AC2 ('gwet') or Brennan-Prediger ('bp') with linearised variance,
    from one-hot ratings (units, coders, batch, q); see `gwet_family_counts`."""
    return gwet_family_counts(_as_batches(ratings).sum(axis=1), weights, kind, confidence)


def gwet_family_counts(counts, weights, kind: str, confidence: float = 0.95) -> Coefficient:
    """The same from category counts per unit (units, batch, q): how many coders put the unit in each category.

    Formulas of Gwet (2014) as implemented by the irrCAC package: observed agreement p_a over units with two
    or more ratings, category shares pi_k over every rated unit, and the variance
    (1 / (n (n - 1))) sum_i (c*_i - c)^2 of the per-unit linearised terms c*_i.
    """
    counts = np.asarray(counts, dtype=float)
    w = np.asarray(weights, dtype=float)
    q = counts.shape[-1]
    ri = _last_sum(counts)
    rated, pair = ri >= 1, ri >= 2
    n, n2 = rated.sum(axis=0).astype(float), pair.sum(axis=0).astype(float)
    weighted = _times(counts, w.T)
    pa_i = np.where(pair, _last_sum(counts * (weighted - 1.0)) / np.where(pair, ri * (ri - 1.0), 1.0), 0.0)
    observed = _ratio(pa_i.sum(axis=0), n2)
    share = np.where(rated[..., None], counts / np.where(rated, ri, 1.0)[..., None], 0.0)
    pi = _ratio(share.sum(axis=0), n[:, None])
    total_w = w.sum()
    if kind == "fleiss":
        chance = np.einsum("bk,kl,bl->b", pi, w, pi)
        pe_i = _last_sum(share * ((pi @ w.T + pi @ w) / 2.0)[None])
    elif kind == "gwet":
        factor = total_w / (q * (q - 1)) if q > 1 else np.nan
        chance = factor * (pi * (1.0 - pi)).sum(axis=-1)
        pe_i = factor * _last_sum(share * (1.0 - pi)[None])
    elif kind == "bp":
        chance = np.full(n.shape, total_w / q**2)
        pe_i = None
    else:
        raise OpenCodeError(f"unknown coefficient {kind!r}")
    one_minus = 1.0 - chance
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.where(np.isclose(one_minus, 0.0), np.nan, (observed - chance) / one_minus)
        c_i = (n / n2) * (pa_i - chance * pair) / one_minus
        if pe_i is not None:
            c_i = c_i - 2.0 * (1.0 - value) * (pe_i - chance) / one_minus
        var = np.where(rated, (c_i - value) ** 2, 0.0).sum(axis=0) / (n * (n - 1.0))
    se = np.where((n > 1) & np.isfinite(value), np.sqrt(var), np.nan)
    low, high = _t_interval(value, se, n, confidence)
    return Coefficient(value, observed, chance, se, low, high)


def conger_kappa(ratings, weights, confidence: float = 0.95) -> Coefficient:
    """Conger's (1980) kappa with Gwet's (2014) linearised variance (as in the irrCAC package).

    Chance agreement sum_kl w_kl (pbar_k pbar_l - s_kl / r), with p_gk coder g's share of category k over every
    unit g rated, pbar_k their mean over the r coders and s_kl their covariance across coders.
    """
    r = _as_batches(ratings)
    w = np.asarray(weights, dtype=float)
    n_coders = r.shape[1]
    counts = r.sum(axis=1)
    ri = _last_sum(counts)
    rated, pair = ri >= 1, ri >= 2
    n, n2 = rated.sum(axis=0).astype(float), pair.sum(axis=0).astype(float)
    weighted = _times(counts, w.T)
    pa_i = np.where(pair, _last_sum(counts * (weighted - 1.0)) / np.where(pair, ri * (ri - 1.0), 1.0), 0.0)
    observed = _ratio(pa_i.sum(axis=0), n2)
    classified = r.sum(axis=0)  # (coders, batch, q)
    n_g = classified.sum(axis=-1)  # (coders, batch)
    p_gk = _ratio(classified, n_g[..., None])
    p_mean = p_gk.mean(axis=0)  # (batch, q)
    s_kl = (np.einsum("gbk,gbl->bkl", p_gk, p_gk) - n_coders * p_mean[:, :, None] * p_mean[:, None, :]) / (n_coders - 1)
    chance = (w[None] * (p_mean[:, :, None] * p_mean[:, None, :] - s_kl / n_coders)).sum(axis=(-2, -1))
    one_minus = 1.0 - chance
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.where(np.isclose(one_minus, 0.0), np.nan, (observed - chance) / one_minus)
        coder_rated = _last_sum(r)  # (units, coders, batch) 0/1
        spread = coder_rated - (n_g / n)[None]  # epsilon_ig - n_g / n
        others = n_coders * p_mean[None] - p_gk  # (coders, batch, q): sum over the other coders of p_hk
        # lambda_ig = (n / n_g) sum_k sum_l w_kl (delta_igl - spread_ig p_gl) others_gk, summed over l first
        weighted_others = _times(others, w)  # (coders, batch, q): sum_k w_kl others_gk
        rated_term = np.einsum("ugbl,gbl->ugb", r, weighted_others)
        share_term = (p_gk * weighted_others).sum(axis=-1)  # (coders, batch)
        lam = (n / n_g)[None] * (rated_term - spread * share_term[None])  # (units, coders, batch)
        pe_i = lam.sum(axis=1) / (n_coders * (n_coders - 1))
        c_i = (n / n2) * (pa_i - chance * pair) / one_minus
        c_i = c_i - 2.0 * (1.0 - value) * (pe_i - chance) / one_minus
        var = np.where(rated, (c_i - value) ** 2, 0.0).sum(axis=0) / (n * (n - 1.0))
    se = np.where((n > 1) & np.isfinite(value), np.sqrt(var), np.nan)
    low, high = _t_interval(value, se, n, confidence)
    return Coefficient(value, observed, chance, se, low, high)


def cohen_weighted(table, weights, confidence: float = 0.95) -> Coefficient:
    """Cohen's (1968) weighted kappa from two coders' q x q table(s) (..., q, q), with the large-sample standard
    error of Fleiss, Cohen & Everitt (1969) and a normal interval; identity weights give Cohen's (1960) kappa."""
    t = np.asarray(table, dtype=float)
    w = np.asarray(weights, dtype=float)
    n = t.sum(axis=(-2, -1))
    p = _ratio(t, n[..., None, None])
    rows, cols = p.sum(axis=-1), p.sum(axis=-2)
    observed = (w * p).sum(axis=(-2, -1))
    chance = (w * rows[..., :, None] * cols[..., None, :]).sum(axis=(-2, -1))
    one_minus = 1.0 - chance
    with np.errstate(divide="ignore", invalid="ignore"):
        value = np.where(np.isclose(one_minus, 0.0), np.nan, (observed - chance) / one_minus)
        w_row = (w * cols[..., None, :]).sum(axis=-1)  # wbar_i. = sum_j p_.j w_ij
        w_col = (w * rows[..., :, None]).sum(axis=-2)  # wbar_.j = sum_i p_i. w_ij
        v = value[..., None, None]
        term = (p * (w - (w_row[..., :, None] + w_col[..., None, :]) * (1.0 - v)) ** 2).sum(axis=(-2, -1))
        var = (term - (value - chance * (1.0 - value)) ** 2) / (n * one_minus**2)
    se = np.where((n > 0) & np.isfinite(value), np.sqrt(np.maximum(var, 0.0)), np.nan)
    z = sps.norm.ppf(0.5 + confidence / 2.0)
    return Coefficient(value, observed, chance, se, value - z * se, np.minimum(value + z * se, 1.0))


def difference_squared(values, level: str, marginals=None) -> np.ndarray:
    """Krippendorff's (2011) squared difference delta^2 between categories at a level of measurement.

    nominal: 0 if equal else 1; ordinal: (sum of the marginals n_g from c to k minus (n_c + n_k) / 2)^2, the
    categories in value order; interval: (c - k)^2; ratio: ((c - k) / (c + k))^2.
    """
    v = np.asarray(values, dtype=float)
    if level not in LEVELS:
        raise OpenCodeError(f"unknown level of measurement {level!r}; choose one of {', '.join(LEVELS)}")
    if level == "nominal":
        return 1.0 - np.eye(v.size)
    if level == "interval":
        return (v[:, None] - v[None, :]) ** 2
    if level == "ratio":
        total = v[:, None] + v[None, :]
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(total == 0, 0.0, ((v[:, None] - v[None, :]) / np.where(total == 0, 1.0, total)) ** 2)
    n_g = np.asarray(marginals, dtype=float)
    order = np.argsort(v)
    cum = np.cumsum(n_g[order])
    rank = np.empty_like(order)
    rank[order] = np.arange(v.size)
    lo, hi = np.minimum(rank[:, None], rank[None, :]), np.maximum(rank[:, None], rank[None, :])
    between = cum[hi] - np.where(lo > 0, cum[np.maximum(lo - 1, 0)], 0.0)
    return (between - (n_g[:, None] + n_g[None, :]) / 2.0) ** 2


def krippendorff_alpha_level(coincidence, values, level: str) -> np.ndarray:
    """Krippendorff's alpha from coincidence matrices (..., q, q) at a level of measurement:
    1 - (n - 1) sum o_ck delta_ck / sum n_c n_k delta_ck."""
    o = np.asarray(coincidence, dtype=float)
    n_c = o.sum(axis=-1)
    n = n_c.sum(axis=-1)
    if level == "ordinal":
        flat_n = n_c.reshape(-1, n_c.shape[-1])
        delta = np.stack([difference_squared(values, level, m) for m in flat_n]).reshape(o.shape)
    else:
        delta = np.broadcast_to(difference_squared(values, level), o.shape)
    observed = (o * delta).sum(axis=(-2, -1))
    expected = (n_c[..., :, None] * n_c[..., None, :] * delta).sum(axis=(-2, -1))
    return 1.0 - _ratio((n - 1.0) * observed, expected)


def coincidence_matrix(ratings) -> np.ndarray:
    """Krippendorff's coincidence matrix per batch (batch, q, q) from one-hot ratings (units, coders, batch, q)."""
    counts = _as_batches(ratings).sum(axis=1)
    m = counts.sum(axis=-1)
    pairable = m >= 2
    scale = np.where(pairable, 1.0 / np.where(pairable, m - 1.0, 1.0), 0.0)[..., None, None]
    q = counts.shape[-1]
    pairs = counts[..., :, None] * counts[..., None, :] - counts[..., None] * np.eye(q)
    return (pairs * scale).sum(axis=0)
