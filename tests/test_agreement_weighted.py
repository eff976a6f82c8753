"""Weighted agreement and analytic standard errors against irrCAC (Gwet 2014's handbook data sets), sklearn,
statsmodels, the krippendorff package and Krippendorff (2011)'s worked example."""

import irrCAC.datasets as gwet_data
import krippendorff
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from irrCAC.raw import CAC
from sklearn.metrics import cohen_kappa_score
from statsmodels.stats.inter_rater import cohens_kappa
from statsmodels.stats.inter_rater import fleiss_kappa as sm_fleiss_kappa

from opencode.analysis.agreement.codes import CodeFeatures
from opencode.analysis.agreement.core import CodingMatrix
from opencode.analysis.agreement.stats import category_counts, fleiss_kappa, gwet_ac1
from opencode.analysis.agreement.weighted import (
    LEVELS,
    agreement_weights,
    coincidence_matrix,
    cohen_weighted,
    conger_kappa,
    gwet_family,
    krippendorff_alpha_level,
    one_hot,
)
from opencode.errors import OpenCodeError

pytestmark = pytest.mark.filterwarnings("ignore:Starting with pandas version 4.0")  # inside irrCAC's own code


def _indexed(frame: pd.DataFrame):
    """Units x raters category indices (-1 missing) and the sorted categories of a ratings frame."""
    values = frame.to_numpy(dtype=float)
    categories = sorted(np.unique(values[~np.isnan(values)]).tolist())
    index = np.full(values.shape, -1)
    for k, c in enumerate(categories):
        index[values == c] = k
    return index, categories


def _reference(frame, weights, categories):
    # irrCAC is given the categories explicitly: with pandas 3 its own guess (ratings.stack().unique()) keeps
    # NaN as a category, which changes q in AC1's chance agreement.
    return CAC(frame, weights=weights, categories=categories)


@pytest.mark.parametrize("dataset", ["raw_4raters", "raw_5observers"])
@pytest.mark.parametrize("weights", ["identity", "linear", "quadratic"])
def test_gwet_family_and_conger_match_irrcac_with_missing_ratings(dataset, weights):
    # Gwet (2014) handbook data sets bundled with irrCAC (both have units rated by only some raters, some once).
    frame = getattr(gwet_data, dataset)()
    index, categories = _indexed(frame)
    ratings = one_hot(index, len(categories))
    w = agreement_weights(categories, weights)
    cac = _reference(frame, weights, categories)
    ours = {"fleiss": gwet_family(ratings, w, "fleiss"), "gwet": gwet_family(ratings, w, "gwet"),
            "bp": gwet_family(ratings, w, "bp"), "conger": conger_kappa(ratings, w)}
    for name, coefficient in ours.items():
        ref = getattr(cac, name)()["est"]
        assert coefficient.value[0] == pytest.approx(ref["coefficient_value"], abs=6e-6), name
        assert coefficient.se[0] == pytest.approx(ref["se"], abs=6e-6), name
        assert coefficient.observed[0] == pytest.approx(ref["pa"], abs=6e-6), name
        assert coefficient.chance[0] == pytest.approx(float(ref["pe"]), abs=6e-6), name
        low, high = ref["confidence_interval"]
        assert (coefficient.low[0], coefficient.high[0]) == pytest.approx((low, high), abs=6e-6), name


def test_units_rated_once_count_towards_category_shares():
    # Issue: Fleiss and AC1 with some units rated once. Gwet (2014) takes the category shares over every rated
    # unit; irrCAC's raw_4raters has unit 12 rated once. Handbook values (irrCAC's documented output):
    # Fleiss 0.76117, AC1 0.77544.
    frame = gwet_data.raw_4raters()
    counts, categories = category_counts(frame.to_numpy(dtype=float).T)
    assert fleiss_kappa(counts) == pytest.approx(0.76117, abs=5e-6)
    assert gwet_ac1(counts) == pytest.approx(0.77544, abs=5e-6)
    cac = _reference(frame, "identity", categories.tolist())
    assert fleiss_kappa(counts) == pytest.approx(cac.fleiss()["est"]["coefficient_value"], abs=6e-6)
    assert gwet_ac1(counts) == pytest.approx(cac.gwet()["est"]["coefficient_value"], abs=6e-6)
    # Leaving the unit rated once out changes the shares, so the old average (pairable units only) differs.
    pairable = counts.sum(axis=1) >= 2
    assert abs(fleiss_kappa(counts[pairable]) - fleiss_kappa(counts)) > 1e-3


def test_fleiss_on_the_six_psychiatrist_diagnoses():
    # irrCAC's distrib_6raters: 15 patients x 6 psychiatrists x 5 diagnoses (the categories of Fleiss 1971's
    # example, whose full 30 patients give 0.430, from memory). Reference: statsmodels fleiss_kappa.
    table = gwet_data.distrib_6raters().to_numpy()
    assert fleiss_kappa(table) == pytest.approx(sm_fleiss_kappa(table, method="fleiss"), abs=1e-12)


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), coders=st.integers(3, 4), units=st.integers(8, 25))
def test_per_code_statistics_match_irrcac_with_units_rated_once(seed, coders, units):
    # Each code's present/absent ratings through irrCAC (Gwet 2014): Fleiss, AC1, Conger, Brennan-Prediger.
    rng = np.random.default_rng(seed)
    truth = rng.random((units, 3)) < 0.4
    present = np.where(rng.random((units, coders, 3)) < 0.8, truth[:, None, :], rng.random((units, coders, 3)) < 0.3)
    coded = rng.random((units, coders)) < 0.75
    coded[:3] = True
    coded[3, 1:] = False  # a unit rated once
    present &= coded[:, :, None]
    present[0, :, :] = True
    present[1, :, :] = False
    matrix = CodingMatrix(tuple(range(units)), tuple(f"c{r}" for r in range(coders)), (1, 2, 3), present, coded)
    features = CodeFeatures.from_matrix(matrix)
    ours = features.statistics(features.totals())
    for c in range(3):
        frame = pd.DataFrame(np.where(coded, present[:, :, c].astype(float), np.nan))
        cac = _reference(frame, "identity", [0.0, 1.0])
        for name, method in (("fleiss_kappa", "fleiss"), ("gwet_ac1", "gwet"), ("conger_kappa", "conger"),
                             ("brennan_prediger", "bp")):
            ref = getattr(cac, method)()["est"]["coefficient_value"]
            assert ours[name][c] == pytest.approx(ref, abs=6e-6), (name, c)


@pytest.mark.parametrize("weights", [None, "linear", "quadratic"])
def test_cohen_weighted_matches_sklearn_and_statsmodels(weights):
    # Cohen (1968) weighted kappa: sklearn cohen_kappa_score(weights=...); its standard error (Fleiss, Cohen &
    # Everitt 1969): statsmodels.stats.inter_rater.cohens_kappa(wt=...).std_kappa.
    rng = np.random.default_rng(4)
    a = rng.integers(0, 5, 150)
    b = np.clip(a + rng.integers(-1, 2, 150), 0, 4)
    table = np.zeros((5, 5))
    np.add.at(table, (a, b), 1)
    ours = cohen_weighted(table, agreement_weights(np.arange(5), weights or "identity"))
    assert ours.value == pytest.approx(cohen_kappa_score(a, b, weights=weights), abs=1e-12)
    ref = cohens_kappa(table, wt=weights)
    assert ours.value == pytest.approx(ref.kappa, abs=1e-12)
    assert ours.se == pytest.approx(ref.std_kappa, abs=1e-12)
    assert (ours.low, ours.high) == pytest.approx((ref.kappa_low, ref.kappa_upp), abs=1e-12)


def test_cohen_published_example_standard_error():
    # Gwet (2008)'s 3x3 table (CHECKS.md): kappa 0.796; its large-sample standard error against statsmodels.
    table = np.array([[13, 0, 0], [0, 20, 7], [0, 4, 56]])
    ours = cohen_weighted(table, np.eye(3))
    assert ours.value == pytest.approx(0.796, abs=5e-4)
    assert ours.se == pytest.approx(cohens_kappa(table).std_kappa, abs=1e-12)


KRIPP_2011 = np.array([[1, 2, 3, 3, 2, 1, 4, 1, 2, np.nan, np.nan, np.nan],
                       [1, 2, 3, 3, 2, 2, 4, 1, 2, 5, np.nan, 3],
                       [np.nan, 3, 3, 3, 2, 3, 4, 2, 2, 5, 1, np.nan],
                       [1, 2, 3, 3, 2, 4, 4, 1, 2, 5, 1, np.nan]])


@pytest.mark.parametrize("level, published", [("nominal", 0.743), ("ordinal", 0.815), ("interval", 0.849),
                                              ("ratio", 0.797)])
def test_krippendorff_2011_worked_example_at_every_level(level, published):
    # Krippendorff (2011) "Computing Krippendorff's alpha-reliability": nominal 0.743 (CHECKS.md); ordinal
    # 0.815, interval 0.849, ratio 0.797 (from memory). Reference: krippendorff.alpha(level_of_measurement=).
    index, categories = _indexed(pd.DataFrame(KRIPP_2011.T))
    alpha = krippendorff_alpha_level(coincidence_matrix(one_hot(index, len(categories))), categories, level)[0]
    assert alpha == pytest.approx(published, abs=5e-4)
    ref = krippendorff.alpha(reliability_data=KRIPP_2011, level_of_measurement=level, value_domain=categories)
    assert alpha == pytest.approx(ref, abs=1e-12)


@pytest.mark.filterwarnings("ignore::RuntimeWarning")
@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), coders=st.integers(2, 5), units=st.integers(3, 40),
       level=st.sampled_from(LEVELS))
def test_alpha_levels_match_package_on_random_data(seed, coders, units, level):
    # Reference: krippendorff.alpha(level_of_measurement=...) with missing values and uneven category values.
    rng = np.random.default_rng(seed)
    values = np.array([1.0, 2.0, 4.0, 7.0])
    truth = rng.integers(0, 4, units)
    data = np.where(rng.random((coders, units)) < 0.6, truth, rng.integers(0, 4, (coders, units))).astype(float)
    data[rng.random((coders, units)) < 0.2] = np.nan
    data[:, 0] = 0
    data[0, 1], data[1, 1] = 3, 2  # two categories at least, on a unit with two ratings
    index = np.where(np.isnan(data.T), -1, np.nan_to_num(data.T)).astype(int)
    ours = krippendorff_alpha_level(coincidence_matrix(one_hot(index, 4)), values, level)[0]
    valued = np.where(np.isnan(data), np.nan, values[np.nan_to_num(data).astype(int)])
    ref = krippendorff.alpha(reliability_data=valued, level_of_measurement=level, value_domain=values)
    assert ours == pytest.approx(ref, abs=1e-9) or (np.isnan(ours) and np.isnan(ref))


def test_weights_and_errors():
    # Cohen (1968) / Gwet (2014) linear and quadratic agreement weights on values 1..4.
    assert agreement_weights([1, 2, 3, 4], "linear")[0].tolist() == pytest.approx([1, 2 / 3, 1 / 3, 0])
    assert agreement_weights([1, 2, 3, 4], "quadratic")[0].tolist() == pytest.approx([1, 8 / 9, 5 / 9, 0])
    assert agreement_weights([1, 2, 3], "identity").tolist() == np.eye(3).tolist()
    with pytest.raises(OpenCodeError, match="unknown weights 'cubic'"):
        agreement_weights([1, 2], "cubic")
    with pytest.raises(OpenCodeError, match="unknown level of measurement 'fuzzy'"):
        krippendorff_alpha_level(np.eye(2), [1, 2], "fuzzy")
    with pytest.raises(OpenCodeError, match="units x coders"):
        gwet_family(np.zeros((3, 3)), np.eye(3), "fleiss")


def test_undefined_and_degenerate_data_give_nan_not_errors():
    # Every coder always in one category: chance agreement 1, kappa-type statistics undefined (0/0).
    ratings = one_hot(np.zeros((5, 3), dtype=int), 2)
    assert np.isnan(gwet_family(ratings, np.eye(2), "fleiss").value[0])
    assert np.isnan(cohen_weighted(np.array([[7, 0], [0, 0]]), np.eye(2)).value)
    # AC1 stays defined there (Gwet's point: high agreement on a rare category is still agreement).
    assert gwet_family(ratings, np.eye(2), "gwet").value[0] == pytest.approx(1.0)
