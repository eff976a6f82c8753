"""Benjamini & Hochberg (1995) false discovery rate control, shared by drivers, themes and tables."""

from __future__ import annotations

import numpy as np


def bh_adjust(pvalues) -> np.ndarray:
    """Benjamini-Hochberg adjusted p-values (q-values); NaN p-values stay NaN and are not counted."""
    p = np.asarray(pvalues, dtype=float)
    q = np.full(p.shape, np.nan)
    valid = ~np.isnan(p)
    m = int(valid.sum())
    if m == 0:
        return q
    pv = p[valid]
    order = np.argsort(pv)
    ranked = pv[order] * m / np.arange(1, m + 1)
    adjusted = np.minimum.accumulate(ranked[::-1])[::-1]
    out = np.empty(m)
    out[order] = np.clip(adjusted, 0.0, 1.0)
    q[valid] = out
    return q


def bh_reject(pvalues, q: float = 0.05) -> np.ndarray:
    """Which hypotheses the Benjamini-Hochberg step-up procedure rejects at false discovery rate q."""
    adjusted = bh_adjust(pvalues)
    return np.where(np.isnan(adjusted), False, adjusted <= q)
