"""Drivers on a study file: the demo study end to end, the outside check against scikit-learn, indicators, bad input."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from opencode.analysis.drivers import study as sdr
from opencode.analysis.tables.coded_data import banner_variable
from opencode.analysis.drivers.univariate import presence
from opencode.demo_job import build_demo_study
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The invented Wrenfield study and its drivers of support (top 2 vs bottom 2) for 'why'."""
    path = build_demo_study(tmp_path_factory.mktemp("demo") / "demo.study")
    study = Study.open(path)
    result = sdr.question_drivers(study, "why", "support", split="top2", n_subsamples=10)
    yield study, result
    study.close()


def small_study(folder, rows, name="s.study"):
    """A study from (text, support) rows; support 9 is a declared missing code."""
    csv = folder / "small.csv"
    csv.write_text("rid,why,support\n" + "".join(f"R{i},{t},{'' if s is None else s}\n"
                                                  for i, (t, s) in enumerate(rows)), encoding="utf-8")
    labels = folder / "labels.csv"
    labels.write_text("variable,code,label,missing\nsupport,1,oppose,\nsupport,2,support,\nsupport,9,refused,yes\n",
                      encoding="utf-8")
    path = folder / name
    import_survey(path, csv, ImportOptions("rid", ["why"], labels_file=str(labels)))
    return path


def test_demo_sides_make_sense(demo):
    # Invented data, so a sanity check only (the outside check is on the food reviews in test_drivers_real.py).
    _, result = demo
    table = result.table.set_index("term")
    for term in ("safe", "staff"):
        assert table.loc[term, "coef"] < 0 and table.loc[term, "monroe_z"] < -3, term
    for term in ("studi", "work"):
        assert table.loc[term, "coef"] > 0 and table.loc[term, "monroe_z"] > 3, term
    assert result.outcome.labels[1].startswith("top 2")
    assert result.ranker.quality_note_ == ""


def test_demo_rows_and_exclusions_add_up(demo):
    study, result = demo
    values = survey_data.raw_values(study, "support")
    comparison = result.first
    has_terms = np.diff(result.tm.counts.indptr) > 0
    rows = sdr._rows_of(study, [d for d, k in zip(result.tm.doc_ids, has_terms) if k])
    assert comparison.outcome.n_missing_code == int((np.asarray(values)[rows] == 9).sum()) > 0
    assert any("missing code (Refused)" in note for note in comparison.notes)
    assert any("non-answers" in note for note in result.notes)
    used = sum(comparison.ranker.class_counts_)
    assert used + comparison.outcome.n_excluded + result.n_nonanswers + result.n_no_terms == result.n_verbatims
    assert result.weight == "weight"


def test_coefficients_equal_scikit_learn(demo):
    # Reference: scikit-learn LogisticRegression on the same presence matrix, weights, C and penalty.
    study, result = demo
    has_terms = np.diff(result.tm.counts.indptr) > 0
    X = presence(result.tm.counts[has_terms][result.outcome.mask])
    rows = sdr._rows_of(study, [d for d, k in zip(result.tm.doc_ids, has_terms) if k])
    w = survey_data.analysis_values(study, "weight")[rows][result.outcome.mask]
    ranker = result.ranker
    reference = LogisticRegression(C=ranker.C_, max_iter=1000, tol=1e-4, random_state=0)
    reference.fit(X, result.outcome.y, sample_weight=w)
    np.testing.assert_allclose(ranker.coef_, reference.coef_.ravel(), atol=1e-3)


def test_indicators_are_study_variables_usable_as_banners(demo):
    study, result = demo
    names = sdr.write_indicators(study, "why", result, ["staff", "safe"], actor="ash")
    assert names == ["why_t_staff", "why_t_safe"]
    values = np.asarray(survey_data.raw_values(study, "why_t_staff"))
    column = result.tm.counts[:, result.tm.column("staff")].toarray().ravel() > 0
    np.testing.assert_array_equal(values[sdr._rows_of(study, result.tm.doc_ids)], column)
    frame = survey_data.verbatims(study, "why")
    nonanswers = sdr._rows_of(study, frame.loc[frame["nonanswer"], "respondent"].tolist())
    assert (values[nonanswers] == 0).all()
    words = frame["text"].str.contains(r"\bstaff", case=False, regex=True) & ~frame["nonanswer"]
    assert values.sum() == pytest.approx(words.sum(), rel=0.15)  # the stem also gathers 'staffed', 'staffing'
    banner = banner_variable(study, "why_t_staff")
    assert banner.value_labels == [(0.0, "no"), (1.0, "yes")]
    with pytest.raises(OpenCodeError, match="'zzzz' is not in the vocabulary"):
        sdr.write_indicators(study, "why", result, ["zzzz"])


def test_chart_and_html(demo, tmp_path):
    _, result = demo
    [png] = sdr.drivers_chart(result, tmp_path / "d.png")
    fragment = sdr.drivers_html(result, png)
    assert fragment.startswith("<section") and "data:image/png;base64," in fragment
    strongest = sdr._with_labels(result.ranker.top_terms(0, 1), result.tm)["label"][0]
    assert f"<td>{strongest}</td>" in fragment and "<script" not in fragment
    with pytest.raises(OpenCodeError, match="not a PNG"):
        sdr.drivers_html(result, b"GIF89a")


def test_format_sorts_any_column(demo):
    _, result = demo
    text = sdr.format_drivers(result, sort_by="q", n=5)
    assert "cross-validated AUC" in text and "missing code" in text
    q = sdr.sorted_table(result, result.first, "q")["q"].to_numpy()
    assert (np.diff(q) >= 0).all()
    with pytest.raises(OpenCodeError, match="cannot sort by 'nope'"):
        sdr.format_drivers(result, sort_by="nope")


# -- bad input ---------------------------------------------------------------------------------------------------
def test_unknown_and_text_outcomes(demo):
    study, _ = demo
    with pytest.raises(OpenCodeError, match="no variable named 'nope'"):
        sdr.question_drivers(study, "why", "nope")
    with pytest.raises(OpenCodeError, match="outcome 'improve' is a text variable"):
        sdr.question_drivers(study, "why", "improve")


def test_one_class_all_missing_and_split_needed(tmp_path):
    words = ["staff safety night", "study work evening"]
    one_class = small_study(tmp_path, [(words[i % 2], 1) for i in range(30)], "one.study")
    with Study.open(one_class) as study:
        with pytest.raises(OpenCodeError, match="one class"):
            sdr.question_drivers(study, "why", "support", min_df=1)
    missing = small_study(tmp_path, [(words[i % 2], 9 if i % 3 else None) for i in range(30)], "miss.study")
    with Study.open(missing) as study:
        with pytest.raises(OpenCodeError, match="every row is empty or a missing code"):
            sdr.question_drivers(study, "why", "support", min_df=1)


def test_separation_small_groups_and_zero_variance_are_reported(tmp_path):
    # 'staff' only on side 1, 'study' only on side 2: perfect separation; 'library' in every verbatim.
    rows = [("library staff night", 1)] * 12 + [("library study evening", 2)] * 12
    path = small_study(tmp_path, rows)
    with Study.open(path) as study:
        result = sdr.question_drivers(study, "why", "support", min_df=1, n_subsamples=0)
    notes = " ".join(result.first.notes)
    assert "perfect separation" in notes
    assert "small groups" in notes and "fewer than 20" in notes
    assert "zero variance" in notes
    assert result.table.set_index("term").loc["staff", "coef"] < 0


def test_too_few_for_cross_validation(tmp_path):
    rows = [("staff night", 1)] * 3 + [("study evening", 2)] * 20
    with Study.open(small_study(tmp_path, rows)) as study:
        with pytest.raises(OpenCodeError, match="question 'why', outcome 'support'.*at least 5"):
            sdr.question_drivers(study, "why", "support", min_df=1)


def test_choice_is_remembered(demo):
    study, _ = demo
    assert sdr.drivers_choice(study, "why") == {"outcome": "support", "split": "top2", "one_vs_rest": False}
    sdr.remember_choice(study, "why", "support", split="5 vs 1", actor="ash")
    assert sdr.drivers_choice(study, "why")["split"] == "5 vs 1"
