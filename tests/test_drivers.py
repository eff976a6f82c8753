"""DriverRanker, unpenalized odds ratios, indicators, text table and chart, checked against reference libraries."""

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
import statsmodels.api as sm
from sklearn.linear_model import LogisticRegression

from opencode.analysis.drivers.chart import chart_bars, write_driver_chart
from opencode.analysis.drivers.ranker import (DriverRanker, format_ranking, hanley_mcneil_ci, make_logistic,
                                       term_indicators, unpenalized_odds_ratios)
from opencode.errors import OpenCodeError
from opencode.files.palette import SIDE_A, SIDE_B


def planted(seed=0, n_docs=400, n_terms=60, n_signal=4, strength=2.0):
    """Small synthetic fixture (property checks only): terms w0..w3 push to side 1, w4..w7 to side 0."""
    rng = np.random.default_rng(seed)
    rates = rng.uniform(0.03, 0.25, n_terms)
    rates[:2 * n_signal] = 0.15
    X = sp.csr_matrix(rng.binomial(1, rates, size=(n_docs, n_terms)).astype(float))
    beta = np.zeros(n_terms)
    beta[:n_signal], beta[n_signal:2 * n_signal] = strength, -strength
    y = (rng.random(n_docs) < 1 / (1 + np.exp(-(X @ beta - 0.2)))).astype(int)
    return X, y, [f"w{j}" for j in range(n_terms)]


@pytest.fixture(scope="module")
def fitted():
    X, y, terms = planted(n_docs=800)
    return X, y, terms, DriverRanker("l1", Cs=8, n_subsamples=20).fit(X, y, terms=terms, labels=("no", "yes"))


@pytest.mark.parametrize("penalty, l1_ratio, solver", [("l1", 1.0, "liblinear"), ("l2", 0.0, "lbfgs")])
def test_coefficients_equal_scikit_learn(penalty, l1_ratio, solver):
    # Reference: scikit-learn LogisticRegression with the same data (0/1 presence), penalty and chosen C.
    X, y, terms = planted(1)
    counts = X.multiply(2)  # counts become presence inside the ranker
    ranker = DriverRanker(penalty, Cs=6, n_subsamples=0, tol=1e-8).fit(counts, y, terms=terms)
    reference = make_logistic(ranker.C_, l1_ratio, solver, max_iter=1000, tol=1e-8, random_state=0).fit(X, y)
    np.testing.assert_allclose(ranker.coef_, reference.coef_.ravel(), atol=1e-6)
    assert ranker.intercept_ == pytest.approx(reference.intercept_[0], abs=1e-6)
    if penalty == "l2":  # an independent solver reaches the same optimum (lbfgs vs newton-cg)
        other = LogisticRegression(C=ranker.C_, solver="newton-cg", tol=1e-10, max_iter=1000).fit(X, y)
        np.testing.assert_allclose(ranker.coef_, other.coef_.ravel(), atol=1e-3)


def test_cv_takes_the_one_standard_error_rule_and_reports_quality(fitted):
    # The one-standard-error rule (Breiman et al. 1984; Hastie, Tibshirani & Friedman 2009, section 7.10):
    # the smallest C (most penalty) whose mean CV score is within one standard error of the best mean.
    X, y, terms, ranker = fitted
    best = int(np.nanargmax(ranker.cv_scores_))
    spread = ranker.cv_fold_scores_[:, best].std(ddof=1) / np.sqrt(ranker.cv_fold_scores_.shape[0])
    within = np.flatnonzero(ranker.cv_scores_ >= ranker.cv_scores_[best] - spread)
    assert ranker.C_ == ranker.Cs_[within.min()] and ranker.C_ <= ranker.Cs_[best]
    plain = DriverRanker("l1", Cs=8, n_subsamples=0, c_rule="best").fit(X, y, terms=terms)
    assert plain.C_ == plain.Cs_[np.nanargmax(plain.cv_scores_)]
    assert ranker.cv_auc_ > 0.7 and ranker.quality_note_ == ""
    low, high = ranker.cv_auc_ci_
    assert low < ranker.cv_auc_ < high
    assert 0 < ranker.cv_log_loss_ < np.log(2)


def test_planted_terms_rank_on_their_sides(fitted):
    _, _, _, ranker = fitted
    assert set(ranker.top_terms(1, 4).term) == {"w0", "w1", "w2", "w3"}
    assert set(ranker.top_terms(0, 4).term) == {"w4", "w5", "w6", "w7"}
    table = ranker.ranking()
    assert table.loc[table.term == "w0", "direction"].item() == "yes"
    assert table.loc[table.term == "w5", "direction"].item() == "no"
    assert table["stability"].between(0, 1).all()
    assert (table.set_index("term").loc[["w0", "w1", "w2", "w3"], "stability"] >= 0.9).all()
    np.testing.assert_allclose(table["odds_ratio"], np.exp(table["coef"]))


def test_ranking_sorts_by_any_column(fitted):
    ranker = fitted[3]
    by_q = ranker.ranking("q", ascending=True)
    assert by_q["q"].is_monotonic_increasing
    assert ranker.ranking("coef")["coef"].is_monotonic_decreasing
    with pytest.raises(OpenCodeError, match="cannot sort by 'nope'"):
        ranker.ranking("nope")


def test_fit_is_reproducible(fitted):
    X, y, terms, ranker = fitted
    again = DriverRanker("l1", Cs=8, n_subsamples=20).fit(X, y, terms=terms, labels=("no", "yes"))
    pd.testing.assert_frame_equal(again.ranking_, ranker.ranking_)


def test_stability_is_share_of_half_sample_fits():
    # Meinshausen & Buhlmann (2010), JRSS B 72(4): selection frequency over random half-samples.
    X, y, terms = planted(2)
    ranker = DriverRanker("l1", Cs=[0.05], n_subsamples=8).fit(X, y, terms=terms)
    assert set(np.unique(ranker.stability_ * 8)) <= set(range(9))
    assert ranker.C_ == 0.05


def test_integer_weights_equal_duplicated_rows():
    # A survey weight of 2 acts like the verbatim appearing twice (scikit-learn sample_weight semantics).
    X, y, terms = planted(3, n_docs=200)
    w = np.where(np.arange(200) % 3 == 0, 2.0, 1.0)
    weighted = DriverRanker("l2", Cs=[0.3], n_subsamples=0, tol=1e-8).fit(X, y, sample_weight=w, terms=terms)
    rows = np.repeat(np.arange(200), w.astype(int))
    duplicated = make_logistic(0.3, 0.0, "lbfgs", max_iter=1000, tol=1e-8).fit(X[rows], y[rows])
    np.testing.assert_allclose(weighted.coef_, duplicated.coef_.ravel(), atol=1e-3)


def test_elasticnet_and_auc_scoring_run():
    X, y, terms = planted(4, n_docs=200, n_terms=20)
    ranker = DriverRanker("elasticnet", l1_ratio=0.5, Cs=3, scoring="auc", n_subsamples=3,
                          class_weight="balanced").fit(X, y, terms=terms)
    assert ranker.model_.solver == "saga" and ranker.cv_auc_ > 0.6


def test_zero_variance_terms_are_dropped_and_counted():
    X, y, terms = planted(5, n_docs=200, n_terms=20)
    X = sp.hstack([X, sp.csr_matrix((200, 1)), sp.csr_matrix(np.ones((200, 1)))], format="csr")
    ranker = DriverRanker("l1", Cs=4, n_subsamples=2).fit(X, y, terms=terms + ["never", "always"])
    assert ranker.n_dropped_constant_ == 2 and ranker.dropped_terms_ == ["never", "always"]
    assert "2 term(s) with zero variance dropped" in " ".join(ranker.warnings_)
    assert not {"never", "always"} & set(ranker.ranking_.term)
    assert ranker.coef_[-2:].tolist() == [0.0, 0.0]
    assert ranker.predict_proba(X).shape == (200, 2)


def test_perfect_separation_is_a_note_not_a_crash():
    X, y, terms = planted(6, n_docs=120, n_terms=10)
    X = sp.hstack([X, sp.csr_matrix(y.reshape(-1, 1).astype(float))], format="csr")
    ranker = DriverRanker("l1", Cs=4, n_subsamples=2).fit(X, y, terms=terms + ["giveaway"])
    assert "perfect separation" in ranker.separation_note_ and "'giveaway'" in ranker.separation_note_
    fit = unpenalized_odds_ratios(X, y, terms + ["giveaway"], ["w0", "giveaway"])
    row = fit.table.set_index("term").loc["giveaway"]
    assert np.isinf(row.odds_ratio) and np.isnan(row.or_low)
    assert "'giveaway'" in fit.note and "perfect separation" in fit.note


def test_small_groups_warn():
    X, y, terms = planted(7, n_docs=200, n_terms=10)
    y = np.zeros(200, int)
    y[:12] = 1
    ranker = DriverRanker("l1", Cs=3, n_subsamples=2).fit(X, y, terms=terms, labels=("rest", "rare"))
    assert any("'rare' has 12" in w and "unstable" in w for w in ranker.warnings_)


def test_text_that_does_not_predict_gets_a_plain_note():
    rng = np.random.default_rng(8)
    X = sp.csr_matrix(rng.binomial(1, 0.1, size=(300, 30)).astype(float))
    y = rng.integers(0, 2, 300)
    ranker = DriverRanker("l1", Cs=5, n_subsamples=2).fit(X, y, labels=("no", "yes"))
    assert "barely predicts 'yes'" in ranker.quality_note_
    text = format_ranking(ranker)
    assert ranker.quality_note_ in text and "leans to" not in text
    assert "leans to" in format_ranking(ranker, force=True)


@pytest.mark.parametrize("y, weights, message", [
    (np.ones(50, int), None, "one class only"),
    (np.r_[np.zeros(25), np.full(25, 2)], None, "coded 0/1"),
    (np.r_[np.zeros(20), np.ones(29)], None, "50 verbatims but the outcome has 49 rows"),
    (np.r_[np.zeros(25), np.ones(25)], np.r_[np.ones(49), -1.0], "survey weight in row 49"),
])
def test_bad_inputs(y, weights, message):
    X = sp.random(50, 5, density=0.3, format="csr", random_state=0)
    with pytest.raises(OpenCodeError, match=message):
        DriverRanker(Cs=2, n_subsamples=0).fit(X, y, sample_weight=weights)


def test_bad_settings():
    X, y, _ = planted(9, n_docs=60, n_terms=5)
    with pytest.raises(OpenCodeError, match="unknown penalty 'l3'"):
        DriverRanker("l3").fit(X, y)
    with pytest.raises(OpenCodeError, match="unknown scoring"):
        DriverRanker(scoring="accuracy").fit(X, y)
    with pytest.raises(OpenCodeError, match="4 term labels"):
        DriverRanker(Cs=2).fit(X, y, terms=["a", "b", "c", "d"])


def test_unpenalized_odds_ratios_match_statsmodels_logit():
    # Reference: statsmodels Logit (maximum likelihood; params, bse, conf_int at 95%).
    X, y, terms = planted(10)
    chosen = ["w0", "w4", "w9", "w12"]
    fit = unpenalized_odds_ratios(X, y, terms, chosen)
    design = sm.add_constant(X[:, [0, 4, 9, 12]].toarray())
    ref = sm.Logit(y, design).fit(disp=0)
    np.testing.assert_allclose(fit.table["coef"], ref.params[1:], rtol=1e-5)
    np.testing.assert_allclose(fit.table["se"], ref.bse[1:], rtol=1e-5)
    np.testing.assert_allclose(fit.table[["or_low", "or_high"]], np.exp(ref.conf_int()[1:]), rtol=1e-5)
    np.testing.assert_allclose(fit.table["p"], ref.pvalues[1:], rtol=1e-4)
    assert fit.intercept == pytest.approx(ref.params[0], rel=1e-5) and fit.note == ""


def test_weighted_unpenalized_matches_statsmodels_glm_frequency_weights():
    # Reference: statsmodels GLM(Binomial, freq_weights): weights as frequencies, inverse Fisher information.
    X, y, terms = planted(11)
    w = np.random.default_rng(11).uniform(0.5, 2.0, len(y))
    fit = unpenalized_odds_ratios(X, y, terms, ["w1", "w5"], sample_weight=w)
    ref = sm.GLM(y, sm.add_constant(X[:, [1, 5]].toarray()), family=sm.families.Binomial(), freq_weights=w).fit()
    np.testing.assert_allclose(fit.table["coef"], ref.params[1:], rtol=1e-5)
    np.testing.assert_allclose(fit.table["se"], ref.bse[1:], rtol=1e-5)


def test_unpenalized_rejects_unknown_terms():
    X, y, terms = planted(12, n_docs=60, n_terms=5)
    with pytest.raises(OpenCodeError, match="term 'zebra' is not in the term list"):
        unpenalized_odds_ratios(X, y, terms, ["w0", "zebra"])


def test_term_indicators_are_presence_columns():
    X, _, terms = planted(13, n_docs=50, n_terms=6)
    X = X.multiply(3).tocsr()
    table = term_indicators(X, terms, ["w2", "w0"])
    assert list(table.columns) == ["w2", "w0"] and table.dtypes.eq(np.int8).all()
    np.testing.assert_array_equal(table["w2"], (X[:, 2].toarray().ravel() > 0).astype(int))
    with pytest.raises(OpenCodeError, match="'nope'"):
        term_indicators(X, terms, ["nope"])


def test_holdout_scores(fitted):
    X, y, terms, ranker = fitted
    X2, y2, _ = planted(14)
    result = ranker.score_holdout(X2, y2)
    assert result["n"] == 400 and 0.6 < result["auc"] <= 1
    assert "held-out: AUC" in format_ranking(ranker)
    with pytest.raises(OpenCodeError, match="3 term columns"):
        ranker.predict_proba(X2[:, :3])


def test_hanley_mcneil_interval():
    # Hanley & McNeil (1982), Radiology 143:29-36, eq. 2: SE(A) with Q1 = A/(2-A), Q2 = 2A^2/(1+A);
    # 1.959964 = the 97.5% normal quantile (from memory).
    auc, n1, n0 = 0.8, 60, 90
    q1, q2 = auc / (2 - auc), 2 * auc**2 / (1 + auc)
    se = np.sqrt((auc * (1 - auc) + (n1 - 1) * (q1 - auc**2) + (n0 - 1) * (q2 - auc**2)) / (n1 * n0))
    low, high = hanley_mcneil_ci(auc, n1, n0)
    assert (low, high) == pytest.approx((auc - 1.959964 * se, auc + 1.959964 * se), rel=1e-6)


def test_format_ranking_lists_terms(fitted):
    text = format_ranking(fitted[3], n=5)
    assert text.splitlines()[0].startswith("outcome: yes (n=")
    assert "w0" in text or "w1" in text


def test_chart_uses_side_colours_and_writes_png(fitted, tmp_path):
    ranker = fitted[3]
    bars = chart_bars(ranker.ranking_, n=3)
    assert len(bars.terms) == 6 and bars.values == sorted(bars.values)
    assert bars.colours == [SIDE_A] * 3 + [SIDE_B] * 3
    target = write_driver_chart(ranker.ranking_, tmp_path / "drivers.png", ranker.labels_, n=3)
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == ["drivers.png"]  # no temporary file left behind
    with pytest.raises(OpenCodeError, match="no term has a non-zero coef"):
        write_driver_chart(ranker.ranking_.assign(coef=0.0), tmp_path / "empty.png", ranker.labels_)


def test_l2_stability_counts_the_largest_coefficients():
    # With L2 nothing is exactly zero, so each half-sample fit selects its stability_top largest |coef|.
    X, y, terms = planted(15, n_docs=200, n_terms=30)
    ranker = DriverRanker("l2", Cs=[0.1], n_subsamples=5, stability_top=8).fit(X, y, terms=terms)
    assert ranker.stability_.sum() == pytest.approx(8.0)
    assert ranker.stability_[:8].mean() > ranker.stability_[8:].mean()


def test_at_scale_c_is_searched_on_a_subsample_and_the_final_fit_uses_every_row():
    # Reference: scikit-learn LogisticRegression on all rows at the chosen C. The C search, the cross-validated
    # figures and the stability half-samples use a stratified subsample of search_rows verbatims only.
    X, y, terms = planted(3, n_docs=1200)
    ranker = DriverRanker("l2", Cs=5, n_subsamples=4, search_rows=400, tol=1e-8).fit(X, y, terms=terms)
    assert ranker.search_rows_used_ == pytest.approx(400, abs=2)
    assert ranker.cv_probabilities_.shape == (ranker.search_rows_used_,)  # out-of-fold over the subsample
    assert sum(ranker.class_counts_) == 1200  # the counts shown are every verbatim's
    reference = LogisticRegression(C=ranker.C_, solver="newton-cg", tol=1e-10, max_iter=1000).fit(X, y)
    np.testing.assert_allclose(ranker.coef_, reference.coef_.ravel(), atol=1e-4)
    on_subsample_only = LogisticRegression(C=ranker.C_, tol=1e-10, max_iter=1000).fit(
        X[ranker._search_rows(y)], y[ranker._search_rows(y)])
    assert np.abs(ranker.coef_ - on_subsample_only.coef_.ravel()).max() > 1e-2
    assert any("stratified random" in w and "1,200" in w for w in ranker.warnings_)
    assert ranker.ranking_["docs_1"].sum() + ranker.ranking_["docs_0"].sum() == (X > 0).sum()  # 2x2 on all rows
    whole = DriverRanker("l2", Cs=5, n_subsamples=0, search_rows=None).fit(X, y, terms=terms)
    assert whole.search_rows_used_ == 1200 and not any("stratified random" in w for w in whole.warnings_)


def test_fits_stopped_by_the_iteration_limit_give_one_plain_note_not_a_raw_warning():
    import warnings as std_warnings
    X, y, terms = planted(4)
    with std_warnings.catch_warnings(record=True) as caught:
        std_warnings.simplefilter("always")
        ranker = DriverRanker("l2", Cs=3, n_subsamples=2, max_iter=1, tol=1e-12).fit(X, y, terms=terms)
    assert not [w for w in caught if "Convergence" in w.category.__name__]
    stalled = [w for w in ranker.warnings_ if "iteration limit" in w]
    assert len(stalled) == 1 and ranker.n_stalled_fits_ > 0
    assert f"{ranker.n_stalled_fits_} of the model fits stopped at the iteration limit (1)" in stalled[0]
    calm = DriverRanker("l2", Cs=3, n_subsamples=2).fit(X, y, terms=terms)
    assert calm.n_stalled_fits_ == 0 and not any("iteration limit" in w for w in calm.warnings_)
