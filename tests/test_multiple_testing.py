"""Benjamini-Hochberg checks against the 1995 paper and statsmodels."""

import numpy as np
from statsmodels.stats.multitest import multipletests

from opencode.analysis.multiple_testing import bh_adjust, bh_reject

# Benjamini & Hochberg (1995), JRSS B 57(1): the paper's 15 p-values; at q = 0.05 the first 4 are rejected.
PAPER_P = [0.0001, 0.0004, 0.0019, 0.0095, 0.0201, 0.0278, 0.0298, 0.0344, 0.0459,
           0.3240, 0.4262, 0.5719, 0.6528, 0.7590, 1.0000]


def test_paper_example_rejects_first_four():
    rejected = bh_reject(PAPER_P, 0.05)
    assert rejected.tolist() == [True] * 4 + [False] * 11


def test_adjusted_values_match_statsmodels():
    # Reference: statsmodels.stats.multitest.multipletests(method="fdr_bh").
    rng = np.random.default_rng(7)
    p = rng.uniform(size=200) ** 3
    _, expected, _, _ = multipletests(p, method="fdr_bh")
    np.testing.assert_allclose(bh_adjust(p), expected)


def test_nan_pvalues_are_left_out():
    p = np.array([0.01, np.nan, 0.04])
    q = bh_adjust(p)
    _, expected, _, _ = multipletests([0.01, 0.04], method="fdr_bh")
    assert np.isnan(q[1])
    np.testing.assert_allclose(q[[0, 2]], expected)
