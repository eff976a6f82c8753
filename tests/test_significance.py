"""Significance tests for banner tables against published examples, scipy and statsmodels."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import chi2_contingency
from statsmodels.stats.proportion import proportions_ztest

from opencode.analysis.tables.significance import chi_square_rows, effective_bases, kish_effective_base, two_proportion_z

# Agresti, A. (2007) An Introduction to Categorical Data Analysis, 2nd ed.: party identification by gender,
# Democrat / Independent / Republican. Published: Pearson X2 = 30.07, G2 = 30.02, df = 2.
AGRESTI = np.array([[762, 327, 468], [484, 239, 477]])


def test_agresti_pearson_and_likelihood_ratio():
    present, base = AGRESTI[:1], AGRESTI.sum(axis=0)
    x2, df, p = chi_square_rows(present, base)
    g2, _, _ = chi_square_rows(present, base, statistic="likelihood-ratio")
    assert round(float(x2[0]), 2) == 30.07
    assert round(float(g2[0]), 2) == 30.02
    assert df[0] == 2
    # Reference: scipy.stats.chi2_contingency on the same table.
    ref = chi2_contingency(AGRESTI, correction=False)
    ref_g = chi2_contingency(AGRESTI, correction=False, lambda_="log-likelihood")
    assert x2[0] == pytest.approx(ref.statistic)
    assert p[0] == pytest.approx(ref.pvalue)
    assert g2[0] == pytest.approx(ref_g.statistic)


def test_two_proportion_textbook_example():
    # CHECKS.md: 45/150 vs 30/150 -> z = 2.000, p = 0.0455 (pooled variance).
    z, p = two_proportion_z(45 / 150, 150, 30 / 150, 150)
    assert round(float(z), 3) == 2.000
    assert round(float(p), 4) == 0.0455


def test_two_proportion_matches_statsmodels_vectorised():
    # Reference: statsmodels.stats.proportion.proportions_ztest (pooled, two-sided), one call per pair.
    rng = np.random.default_rng(11)
    n1, n2 = rng.integers(30, 500, 60), rng.integers(30, 500, 60)
    c1, c2 = rng.binomial(n1, rng.uniform(0.05, 0.95, 60)), rng.binomial(n2, rng.uniform(0.05, 0.95, 60))
    z, p = two_proportion_z(c1 / n1, n1, c2 / n2, n2)
    for i in range(60):
        ref_z, ref_p = proportions_ztest([c1[i], c2[i]], [n1[i], n2[i]])
        assert z[i] == pytest.approx(ref_z)
        assert p[i] == pytest.approx(ref_p)


def test_two_proportion_edge_cases():
    z, p = two_proportion_z(np.array([0.0, 1.0, 0.3]), np.array([50, 50, 0]), np.array([0.0, 1.0, 0.2]), 50)
    assert z[:2].tolist() == [0.0, 0.0] and p[:2].tolist() == [1.0, 1.0]
    assert np.isnan(z[2]) and np.isnan(p[2])


def test_chi_square_rows_match_scipy_for_many_rows():
    # Reference: scipy.stats.chi2_contingency on each row's present / absent table.
    rng = np.random.default_rng(3)
    base = np.array([120, 80, 200, 55])
    present = rng.binomial(base, rng.uniform(0.1, 0.9, (25, 1)))
    stat, df, p = chi_square_rows(present, base)
    for r in range(25):
        ref = chi2_contingency(np.vstack([present[r], base - present[r]]), correction=False)
        assert stat[r] == pytest.approx(ref.statistic)
        assert p[r] == pytest.approx(ref.pvalue)
        assert df[r] == ref.dof


def test_chi_square_leaves_out_empty_columns_and_handles_no_variation():
    stat, df, p = chi_square_rows([[10, 0, 20], [0, 0, 0], [5, 0, 0]], [50, 0, 40])
    ref = chi2_contingency([[10, 20], [40, 20]], correction=False)
    assert stat[0] == pytest.approx(ref.statistic) and df[0] == 1
    assert stat[1] == 0.0 and p[1] == 1.0
    one_column = chi_square_rows([[5, 0]], [20, 0])
    assert np.isnan(one_column[0][0]) and np.isnan(one_column[2][0])
    with pytest.raises(ValueError):
        chi_square_rows([[1, 2]], [3, 4], statistic="exact")


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.integers(1, 200), st.floats(0.05, 0.95)), min_size=2, max_size=6), st.integers(0, 10_000))
def test_chi_square_property_matches_scipy(columns, seed):
    # Reference: scipy.stats.chi2_contingency (Pearson and log-likelihood).
    base = np.array([b for b, _ in columns])
    present = np.random.default_rng(seed).binomial(base, [s for _, s in columns])
    table = np.vstack([present, base - present])
    if (table.sum(axis=1) == 0).any():
        return
    for name, lam in (("pearson", None), ("likelihood-ratio", "log-likelihood")):
        stat, _, p = chi_square_rows(present[None, :], base, statistic=name)
        ref = chi2_contingency(table, correction=False, lambda_=lam)
        assert stat[0] == pytest.approx(ref.statistic, abs=1e-9)
        assert p[0] == pytest.approx(ref.pvalue, abs=1e-6)  # scipy releases differ in the far tail


def test_kish_effective_base_hand_computed():
    # Kish (1965): n_eff = (sum w)^2 / sum w^2. Weights 1, 1, 2, 4: (8)^2 / (1 + 1 + 4 + 16) = 64 / 22 = 2.909.
    assert kish_effective_base([1, 1, 2, 4]) == pytest.approx(64 / 22)
    assert kish_effective_base([0.7] * 10) == pytest.approx(10)
    assert kish_effective_base([0, 0]) == 0.0
    np.testing.assert_allclose(effective_bases([8, 0], [22, 0]), [64 / 22, 0.0])
