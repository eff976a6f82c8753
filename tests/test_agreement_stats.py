"""Agreement statistics against published worked examples and reference libraries (sklearn, statsmodels, krippendorff)."""

import krippendorff
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa

from opencode.analysis.agreement.bands import krippendorff_band, landis_koch_band
from opencode.analysis.agreement.stats import (
    cohen_kappa_table,
    fleiss_kappa,
    gwet_ac1,
    gwet_ac1_table,
    krippendorff_alpha_nominal,
    pabak_table,
)

# Cohen (1960) textbook 2x2 example (CHECKS.md, from memory): both yes 20, A yes B no 5, A no B yes 10, both no 15.
COHEN_TABLE = [[20, 5], [10, 15]]
# The widely reproduced 10 subjects x 14 raters x 5 categories table (CHECKS.md). It is not Fleiss (1971)'s
# own example: that paper's data are 30 patients x 6 psychiatrists x 5 diagnoses, kappa 0.430 (from memory);
# irrCAC ships 15 patients with those diagnoses (distrib_6raters), checked in tests/test_agreement_weighted.py.
FLEISS_TABLE = [[0, 0, 0, 0, 14], [0, 2, 6, 4, 2], [0, 0, 3, 5, 6], [0, 3, 9, 2, 0], [2, 2, 8, 1, 1],
                [7, 7, 0, 0, 0], [3, 2, 6, 3, 0], [2, 5, 3, 2, 2], [6, 5, 2, 1, 0], [0, 2, 2, 3, 7]]
N = np.nan
# Krippendorff (2011) "Computing Krippendorff's Alpha-Reliability": 4 observers x 12 units, NaN = missing.
KRIPP_2011 = [[1, 2, 3, 3, 2, 1, 4, 1, 2, N, N, N],
              [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, N, 3],
              [N, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, N],
              [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, N]]
# Gwet (2008), BJMSP 61:29-48: two raters, three categories.
GWET_TABLE = [[13, 0, 0], [0, 20, 7], [0, 4, 56]]


def _table_to_labels(table):
    """Expand a two-coder table into per-unit label pairs (for sklearn)."""
    t = np.asarray(table)
    rows, cols = np.indices(t.shape)
    return np.repeat(rows.ravel(), t.ravel()), np.repeat(cols.ravel(), t.ravel())


def test_cohen_published_example():
    # Cohen (1960) textbook example, CHECKS.md: p_o 0.70, p_e 0.50, kappa 0.40.
    assert cohen_kappa_table(COHEN_TABLE) == pytest.approx(0.40)
    a, b = _table_to_labels(COHEN_TABLE)
    assert cohen_kappa_table(COHEN_TABLE) == pytest.approx(cohen_kappa_score(a, b))


def test_fleiss_published_example():
    # The 10 x 14 table -> 0.210 (CHECKS.md); reference statsmodels.stats.inter_rater.fleiss_kappa.
    assert fleiss_kappa(FLEISS_TABLE) == pytest.approx(0.210, abs=5e-4)
    assert fleiss_kappa(FLEISS_TABLE) == pytest.approx(sm_fleiss_kappa(np.array(FLEISS_TABLE), method="fleiss"))


def test_krippendorff_2011_example():
    # Krippendorff (2011): nominal alpha 0.743 (CHECKS.md); reference: the `krippendorff` package.
    assert krippendorff_alpha_nominal(KRIPP_2011) == pytest.approx(0.743, abs=5e-4)
    ref = krippendorff.alpha(reliability_data=np.array(KRIPP_2011), level_of_measurement="nominal")
    assert krippendorff_alpha_nominal(KRIPP_2011) == pytest.approx(ref)


def test_gwet_ac1_published_example():
    # Gwet (2008): p_o 0.89, chance 0.2699, AC1 0.849; Cohen's kappa on the same table 0.796 (CHECKS.md).
    assert gwet_ac1_table(GWET_TABLE) == pytest.approx(0.849, abs=5e-4)
    assert cohen_kappa_table(GWET_TABLE) == pytest.approx(0.796, abs=5e-4)
    # The same data as units x categories counts (two raters per unit) through the multi-rater form.
    a, b = _table_to_labels(GWET_TABLE)
    counts = np.zeros((a.size, 3))
    np.add.at(counts, (np.arange(a.size), a), 1)
    np.add.at(counts, (np.arange(b.size), b), 1)
    assert gwet_ac1(counts) == pytest.approx(0.849, abs=5e-4)


def test_pabak_formula():
    # Byrt, Bishop & Carlin (1993): PABAK = 2 p_o - 1, prevalence index (a - d)/N, bias index (b - c)/N,
    # applied to Cohen's example table: p_o = 0.70 -> 0.40; (20 - 15)/50 = 0.1; (5 - 10)/50 = -0.1.
    pabak, prevalence, bias = pabak_table(COHEN_TABLE)
    assert (pabak, prevalence, bias) == pytest.approx((0.40, 0.10, -0.10))


def test_undefined_is_nan_not_error():
    # Nobody used the category: chance agreement is 1, kappa undefined (0/0).
    assert np.isnan(cohen_kappa_table([[0, 0], [0, 12]]))
    assert np.isnan(krippendorff_alpha_nominal([[1, 1, 1], [1, 1, 1]]))


def test_bands_landis_koch_and_krippendorff():
    # Landis & Koch (1977) bands and Krippendorff (2004) thresholds (CHECKS.md).
    assert [landis_koch_band(v) for v in (-0.1, 0.1, 0.3, 0.5, 0.7, 0.9)] == [
        "poor", "slight", "fair", "moderate", "substantial", "almost perfect"]
    assert landis_koch_band(0.20) == "slight" and landis_koch_band(0.81) == "almost perfect"
    assert krippendorff_band(0.80).startswith("reliable")
    assert krippendorff_band(0.70).startswith("tentative")
    assert krippendorff_band(0.5).startswith("unreliable")
    assert landis_koch_band(None) == "" and krippendorff_band(float("nan")) == ""


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), q=st.integers(2, 5), n=st.integers(5, 60))
def test_cohen_matches_sklearn_on_random_tables(seed, q, n):
    # Reference: sklearn.metrics.cohen_kappa_score.
    rng = np.random.default_rng(seed)
    a = rng.integers(0, q, n)
    b = np.where(rng.random(n) < 0.6, a, rng.integers(0, q, n))
    table = np.zeros((q, q))
    np.add.at(table, (a, b), 1)
    ref = cohen_kappa_score(a, b)
    assume(np.isfinite(ref))
    assert cohen_kappa_table(table) == pytest.approx(ref, abs=1e-10)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # statsmodels divides 0/0 on degenerate tables
@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), q=st.integers(2, 5), raters=st.integers(2, 8), n=st.integers(3, 40))
def test_fleiss_matches_statsmodels_on_random_tables(seed, q, raters, n):
    # Reference: statsmodels.stats.inter_rater.fleiss_kappa (complete data, same raters per subject).
    rng = np.random.default_rng(seed)
    table = rng.multinomial(raters, rng.dirichlet(np.ones(q)), size=n)
    ref = sm_fleiss_kappa(table, method="fleiss")
    assume(np.isfinite(ref))
    assert fleiss_kappa(table) == pytest.approx(ref, abs=1e-10)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # krippendorff divides 0/0 on degenerate data
@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), q=st.integers(2, 5), coders=st.integers(2, 5), n=st.integers(3, 40))
def test_krippendorff_matches_package_with_missing(seed, q, coders, n):
    # Reference: krippendorff.alpha(reliability_data=..., level_of_measurement="nominal").
    rng = np.random.default_rng(seed)
    truth = rng.integers(1, q + 1, n)
    data = np.where(rng.random((coders, n)) < 0.7, truth, rng.integers(1, q + 1, (coders, n))).astype(float)
    data[rng.random((coders, n)) < 0.2] = np.nan
    assume(np.unique(data[~np.isnan(data)]).size > 1)
    assume(((~np.isnan(data)).sum(axis=0) >= 2).any())
    ref = krippendorff.alpha(reliability_data=data, level_of_measurement="nominal")
    ours = krippendorff_alpha_nominal(data)
    assert ours == pytest.approx(ref, abs=1e-9) or (np.isnan(ours) and np.isnan(ref))
