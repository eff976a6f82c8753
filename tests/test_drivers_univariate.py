"""Per-term evidence: 2x2 tables, Woolf odds ratios, chi-square / Fisher p, BH q and the Monroe et al. z-score."""

import numpy as np
import pytest
import scipy.sparse as sp
from scipy import stats
from sklearn.feature_extraction.text import CountVectorizer
from statsmodels.stats.contingency_tables import Table2x2
from statsmodels.stats.multitest import multipletests

from opencode.analysis.multiple_testing import bh_adjust
from opencode.analysis.drivers.univariate import (chi_square_p, fisher_p, informative_prior, monroe_z, two_by_two,
                                          univariate_table, woolf_odds_ratio)


def test_monroe_toy_z_scores():
    # Monroe, Colaresi & Quinn (2008), Political Analysis 16(4); toy check and values from CHECKS.md:
    # uniform prior 0.05 per word -> z(brown) = +0.689, z(donkey) = -0.689, words in both sides = 0.
    texts = ["the quick brown fox jumps over the lazy pig", "the lazy purple pig jumps over the lazier donkey"]
    vectorizer = CountVectorizer(token_pattern=r"\S+")
    counts = vectorizer.fit_transform(texts).toarray()
    z = dict(zip(vectorizer.get_feature_names_out(), monroe_z(counts[0], counts[1], 0.05)))
    assert z["brown"] == pytest.approx(0.689, abs=5e-4)
    assert z["donkey"] == pytest.approx(-0.689, abs=5e-4)
    for word in ("the", "jumps", "over", "lazy", "pig"):
        assert z[word] == pytest.approx(0.0, abs=1e-12)


def random_tables(seed, n=400, high=12):
    rng = np.random.default_rng(seed)
    tables = rng.integers(0, high, size=(n, 4))
    tables[:6] = [[3, 3, 3, 3], [0, 5, 5, 0], [2, 0, 2, 0], [0, 7, 1, 9], [10, 10, 0, 1], [1, 0, 0, 1]]
    return tables


def test_fisher_matches_scipy():
    # Reference: scipy.stats.fisher_exact (two-sided), table [[a, b], [c, d]].
    tables = random_tables(1)
    expected = [stats.fisher_exact(t.reshape(2, 2)).pvalue for t in tables]
    np.testing.assert_allclose(fisher_p(*tables.T), expected, rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("correction", [True, False])
def test_chi_square_matches_scipy(correction):
    # Reference: scipy.stats.chi2_contingency (Yates' correction on 2x2 tables when correction=True).
    tables = random_tables(2, high=40) + 1
    expected = [stats.chi2_contingency(t.reshape(2, 2), correction=correction)[1] for t in tables]
    np.testing.assert_allclose(chi_square_p(*tables.T, correction=correction), expected, rtol=1e-9)


def test_woolf_interval_and_haldane_match_statsmodels():
    # Reference: statsmodels Table2x2 (log odds ratio with normal CI = Woolf 1955). Haldane (1956, Annals of
    # Human Genetics 20; from memory) adds 0.5 to all four cells when one is zero; statsmodels' own
    # shift_zeros only replaces the zero cells, so the corrected table is passed to it directly.
    tables = random_tables(3)
    result = woolf_odds_ratio(*tables.T)
    for k, t in enumerate(tables[:80]):
        corrected = t + 0.5 if (t == 0).any() else t
        ref = Table2x2(corrected.reshape(2, 2).astype(float), shift_zeros=False)
        low, high = ref.oddsratio_confint(0.05)
        assert result["odds_ratio"][k] == pytest.approx(ref.oddsratio, rel=1e-10)
        assert (result["or_low"][k], result["or_high"][k]) == pytest.approx((low, high), rel=1e-10)
        assert result["haldane"][k] == bool((t == 0).any())


def corpus(seed=5, n_docs=300, n_terms=40):
    rng = np.random.default_rng(seed)
    y = (rng.random(n_docs) < 0.4).astype(int)
    rates = rng.uniform(0.01, 0.3, n_terms)
    rates[:5] = 0.12
    lift = np.where(np.arange(n_terms) < 5, 3.0, 1.0)
    p = np.clip(np.outer(np.where(y == 1, 1.0, 0.0), lift) * rates + np.outer(y == 0, np.ones(n_terms)) * rates, 0, 1)
    X = sp.csr_matrix(rng.binomial(2, p))
    return X, y, [f"w{j}" for j in range(n_terms)]


def test_two_by_two_counts_documents_not_tokens():
    X, y, _ = corpus()
    cells = two_by_two(X, y)
    dense = X.toarray() > 0
    np.testing.assert_array_equal(cells["a"], dense[y == 1].sum(axis=0))
    np.testing.assert_array_equal(cells["b"], dense[y == 0].sum(axis=0))
    np.testing.assert_array_equal(cells["a"] + cells["c"], np.full(X.shape[1], (y == 1).sum()))
    np.testing.assert_array_equal(cells["b"] + cells["d"], np.full(X.shape[1], (y == 0).sum()))


def test_univariate_table_uses_fisher_for_small_expected_counts_and_bh_for_q():
    X, y, terms = corpus()
    X = sp.hstack([X, sp.csr_matrix(np.eye(300)[:, :1])], format="csr")  # a term used once: Fisher territory
    table = univariate_table(X, y, terms + ["once"])
    for row in table.itertuples():
        t = np.array([[row.docs_1, row.docs_0], [(y == 1).sum() - row.docs_1, (y == 0).sum() - row.docs_0]])
        small = (stats.chi2_contingency(t)[3] < 5).any()  # Cochran's rule (common practice)
        expected_p = stats.fisher_exact(t).pvalue if small else stats.chi2_contingency(t)[1]
        assert row.test == ("fisher" if small else "chi2")
        assert row.p == pytest.approx(expected_p, rel=1e-9)
    assert table.loc[table.term == "once", "test"].item() == "fisher"
    # BH q: the project's bh_adjust, itself checked against statsmodels multipletests(method="fdr_bh").
    np.testing.assert_allclose(table["q"], bh_adjust(table["p"]))
    np.testing.assert_allclose(table["q"], multipletests(table["p"], method="fdr_bh")[1])
    # The planted terms w0..w4 lean to side 1 on every measure.
    planted = table[table.term.isin([f"w{j}" for j in range(5)])]
    assert (planted.uni_or > 1).all() and (planted.monroe_z > 0).all()
    assert (planted.q < 0.05).all()


def test_informative_prior_is_scaled_pooled_counts():
    prior = informative_prior(np.array([4, 0, 1]), np.array([2, 0, 3]), scale=0.5)
    np.testing.assert_allclose(prior, [3.0, 1e-3, 2.0])
