"""Themes of a study's question: fitted from the study's term matrix, kept, reloaded, seeded and promoted.

Outside checks: the themes equal scikit-learn's NMF fitted on the tf-idf of the same term matrix (Lee & Seung
1999; scikit-learn's NMF as the reference, same NNDSVD init and seed); prevalence p-values adjusted as
statsmodels' Benjamini-Hochberg (1995) does; chi-square per theme as scipy's chi2_contingency.
"""

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy.stats import chi2_contingency
from sklearn.decomposition import NMF, LatentDirichletAllocation
from sklearn.exceptions import ConvergenceWarning
from sklearn.feature_extraction.text import TfidfTransformer
from statsmodels.stats.multitest import multipletests

from opencode.analysis.themes import study as sth
from opencode.analysis.themes.format import p_value_text
from opencode.coding.frame_io import import_frame
from opencode.coding.frames import edit_code, load_frame
from opencode.coding.history import undo
from opencode.coding.rules import parse_rule, rule_hits
from opencode.demo_job import build_demo_study
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.resources import demo_dir
from opencode.study.store import Study
from opencode.study.survey_data import analysis_values, respondent_keys, verbatims
from opencode.text.study_text import analyzer_for, get_lexicon, term_matrix

pytestmark = pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")
K = 6


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    path = build_demo_study(tmp_path_factory.mktemp("themes") / "wrenfield.study")
    with Study.open(path) as opened:
        import_frame(opened, "why", demo_dir() / "frame-why.csv")
        yield opened


@pytest.fixture(scope="module")
def fitted(study):
    return sth.question_themes(study, "why", k=K, by="support", random_state=3)


@pytest.fixture(scope="module")
def searched(study):
    return sth.question_theme_search(study, "why", "4:6", n_resamples=2)


def _tiny_study(folder, name, answers):
    csv = folder / f"{name}.csv"
    pd.DataFrame({"id": [f"t{i}" for i in range(len(answers))], "answer": answers}).to_csv(csv, index=False)
    path = folder / f"{name}.study"
    import_survey(path, csv, ImportOptions("id", ["answer"]))
    return path


def test_run_is_kept_and_reloads_identically(study, fitted):
    loaded = sth.load_theme_run(study, fitted.run_id)
    assert isinstance(loaded, sth.QuestionThemes) and loaded.question == "why"
    meta_a, arrays_a = fitted.run.to_record()
    meta_b, arrays_b = loaded.run.to_record()
    assert json.dumps(meta_a, sort_keys=True) == json.dumps(meta_b, sort_keys=True)
    assert arrays_a.keys() == arrays_b.keys()
    for name in arrays_a:
        assert_array_equal(arrays_a[name], arrays_b[name])
    assert loaded.settings == json.loads(json.dumps(fitted.settings))
    assert loaded.created_at == fitted.created_at
    assert loaded.settings["lexicon_version"] == get_lexicon(study, "why").version_hash()
    assert loaded.settings["random_state"] == 3 and loaded.settings["k"] == K


def test_non_answers_and_empty_rows_are_left_out_and_counted(study, fitted):
    frame = verbatims(study, "why")
    answers = frame[~frame["nonanswer"]]
    assert fitted.settings["n_nonanswers"] == int(frame["nonanswer"].sum()) > 0
    assert fitted.run.n_docs == len(answers)
    assert set(fitted.run.doc_ids.tolist()) == set(answers["respondent"])
    tm, _ = term_matrix(study, "why", min_df=sth.DEFAULT_MIN_DF)
    assert fitted.run.n_empty == len(tm.empty_doc_ids)
    assert sorted(fitted.run.doc_ids[fitted.run.empty_rows].tolist()) == sorted(map(str, tm.empty_doc_ids))
    assert any("non-answers" in note for note in fitted.run.notes)


def test_themes_equal_scikit_learn_nmf_on_the_same_matrix(study, fitted):
    # Outside check: Lee & Seung (1999) NMF as scikit-learn fits it, on the tf-idf of the study's term
    # matrix (verbatims with terms only), NNDSVD start, coordinate descent, same seed.
    tm, _ = term_matrix(study, "why", min_df=sth.DEFAULT_MIN_DF)
    keep = np.diff(tm.counts.indptr) > 0
    tfidf = TfidfTransformer().fit_transform(tm.counts[keep].astype(float))
    reference = NMF(n_components=K, init="nndsvd", solver="cd", beta_loss="frobenius", max_iter=200, tol=1e-4,
                    random_state=3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        weights = reference.fit_transform(tfidf)
    stored = sth.load_themes(study, fitted.run_id).run
    assert_allclose(stored.components, reference.components_, rtol=1e-7, atol=1e-10)
    shares = weights / np.where(weights.sum(axis=1, keepdims=True) > 0, weights.sum(axis=1, keepdims=True), 1)
    assert_allclose(stored.doc_theme[stored.included], shares, rtol=1e-7, atol=1e-10)
    top = np.argsort(-reference.components_[0], kind="stable")[:5]
    assert stored.themes[0].top_terms[:5] == [sth._display_terms(tm)[j] for j in top]


def test_lda_run_equals_scikit_learn_lda_and_reloads(study):
    # Outside check: Blei, Ng & Jordan (2003) LDA as scikit-learn fits it (batch variational Bayes) on the
    # raw counts of the verbatims with terms, same seed.
    result = sth.question_themes(study, "why", k=4, method="lda", random_state=5)
    tm, _ = term_matrix(study, "why", min_df=sth.DEFAULT_MIN_DF)
    keep = np.diff(tm.counts.indptr) > 0
    reference = LatentDirichletAllocation(n_components=4, learning_method="batch", max_iter=10, random_state=5)
    reference.fit(tm.counts[keep].astype(float))
    loaded = sth.load_themes(study, result.run_id)
    assert loaded.settings["method"] == "lda" and loaded.settings["loss"] is None
    assert_allclose(loaded.run.components, reference.components_, rtol=1e-7)
    with pytest.raises(OpenCodeError, match="LDA has no loss"):
        sth.question_themes(study, "why", k=4, method="lda", loss="kl", save=False)


def test_prevalence_uses_value_labels_without_missing_codes(study, fitted):
    prevalence = fitted.run.prevalence
    labels = ["Strongly oppose", "Oppose", "Neither support nor oppose", "Support", "Strongly support"]
    assert list(prevalence.shares.columns) == labels  # value order; 9 = Refused is a missing code
    support = analysis_values(study, "support")
    position = {key: i for i, key in enumerate(respondent_keys(study))}
    values = support[[position[d] for d in fitted.run.doc_ids]]
    counted = fitted.run.included & ~np.isnan(values)
    assert int(prevalence.bases.sum()) == int(counted.sum())
    # Outside checks: scipy's chi-square for theme 1, statsmodels' Benjamini-Hochberg across themes.
    codes = [1.0, 2.0, 3.0, 4.0, 5.0]
    hit = fitted.run.dominant == 0
    table = np.array([[int((hit & counted & (values == c)).sum()) for c in codes],
                      [int((~hit & counted & (values == c)).sum()) for c in codes]])
    chi2, p, _, _ = chi2_contingency(table, correction=False)
    assert prevalence.tests.loc[0, "chi2"] == pytest.approx(chi2)
    assert prevalence.tests.loc[0, "p"] == pytest.approx(p)
    assert_allclose(prevalence.tests["p_adjusted"], multipletests(prevalence.tests["p"], method="fdr_bh")[1])
    text = sth.format_question_themes(fitted, width=200)  # wide enough for every group label on one line
    assert all(label in text for label in labels) and p_value_text(prevalence.tests.loc[0, 'p_adjusted']) in text


def test_seeded_run_from_typed_terms(study):
    result = sth.question_themes(study, "why", k=5, seed_terms="safe,Staff;hours,late", save=False)
    assert result.run_id is None
    seeded = [t.seed_terms for t in result.run.themes[:2]]
    assert seeded == [["safe", "staff"], ["hours", "late"]]  # typed in any case
    assert result.run.themes[2].seed_terms is None
    assert {"safe", "staff"} & set(result.run.themes[0].top_terms[:5])
    assert result.settings["seed_lists"] == seeded
    with pytest.raises(OpenCodeError, match="seed list 2: 'zebra' is not a term"):
        sth.question_themes(study, "why", k=5, seed_terms="safe;zebra", save=False)
    with pytest.raises(OpenCodeError, match="write lists of terms"):
        sth.question_themes(study, "why", k=5, seed_terms="safe;;", save=False)


def test_seeded_run_from_the_frame_uses_rules_then_labels(study):
    edit_code(study, "why", 8, rule="study OR (space AND NOT quiet)")
    try:
        result = sth.question_themes(study, "why", k=5, seed_from_frame=[8, 1], save=False)
    finally:
        edit_code(study, "why", 8, rule="")
    assert result.settings["seed_lists"][0] == ["study", "space"]  # the NOT part does not seed
    assert result.settings["seed_sources"][0].startswith("code 8") and "(rule)" in result.settings["seed_sources"][0]
    label_terms = analyzer_for(study, "why").tokens(load_frame(study, "why").by_number()[1].label)
    assert "(label)" in result.settings["seed_sources"][1]
    assert len(result.settings["seed_lists"][1]) == len(label_terms)
    with pytest.raises(OpenCodeError, match="the frame has no code 77"):
        sth.question_themes(study, "why", k=5, seed_from_frame=[77], save=False)
    with pytest.raises(OpenCodeError, match="leave no room"):
        sth.question_themes(study, "why", k=5, seed_from_frame=True, save=False)
    with pytest.raises(OpenCodeError, match="not both"):
        sth.question_themes(study, "why", k=5, seed_terms="safe", seed_from_frame=True, save=False)


def test_promote_adds_a_draft_code_with_the_rule(study, fitted):
    theme = fitted.run.themes[1]
    code = sth.promote_theme(study, fitted.run_id, 2, question="why", hotkey="%", actor="ash")
    assert code.label == theme.label and code.hotkey == "%" and code.kind == "code"
    analyzer = analyzer_for(study, "why")
    assert code.rule == sth.theme_rule(theme.top_terms, analyzer)
    assert code.rule.split(" OR ")[0] == theme.top_terms[0] and code.rule.count(" OR ") == sth.RULE_TERMS - 1
    parse_rule(code.rule, analyzer)
    hits = rule_hits(study, "why", code.rule)
    dominated = set(fitted.run.doc_ids[fitted.run.dominant == 1].tolist())
    frame = verbatims(study, "why").set_index("verbatim_id")
    assert dominated & set(frame.loc[hits.verbatim_ids, "respondent"])
    audit = study._db.execute("SELECT payload FROM audit WHERE action = 'promote-theme' AND entity_id = ?",
                             (code.id,)).fetchone()
    assert json.loads(audit[0])["run"] == fitted.run_id and json.loads(audit[0])["theme"] == 2
    assert undo(study, "ash") == "add-code"  # the code is an ordinary undoable change
    assert code.number not in load_frame(study, "why").by_number()


def test_promote_with_a_label_and_bad_promotions(study, fitted, searched):
    code = sth.promote_theme(study, fitted.run_id, 1, label="  My own label ", number=60)
    assert code.label == "My own label" and code.number == 60
    with pytest.raises(OpenCodeError, match=f"has themes 1-{K}: there is no theme {K + 1}"):
        sth.promote_theme(study, fitted.run_id, K + 1)
    with pytest.raises(OpenCodeError, match="there is no theme 0"):
        sth.promote_theme(study, fitted.run_id, 0)
    with pytest.raises(OpenCodeError, match="belongs to question 'why', not 'improve'"):
        sth.promote_theme(study, fitted.run_id, 1, question="improve")
    with pytest.raises(OpenCodeError, match="is a k search"):
        sth.promote_theme(study, searched.run_id, 1)
    with pytest.raises(OpenCodeError, match="no theme run 9999"):
        sth.promote_theme(study, 9999, 1)


def test_theme_rule_skips_placeholders_and_quotes_phrases(study):
    analyzer = analyzer_for(study, "why")
    assert sth.theme_rule(["#number", "opening hours", "staff", "staff"], analyzer) == '"opening hours" OR staff'
    with pytest.raises(OpenCodeError, match="no word"):
        sth.theme_rule(["#number", "the"], analyzer)


def test_k_search_is_kept_and_reloads(study, searched):
    loaded = sth.load_theme_run(study, searched.run_id)
    assert isinstance(loaded, sth.QuestionKSearch)
    pd.testing.assert_frame_equal(loaded.search.table, searched.search.table, check_dtype=False)
    assert loaded.search.recommended_k == searched.search.recommended_k
    assert loaded.settings["ks"] == [4, 5, 6]
    text = sth.format_question_k_search(loaded)
    assert "final test" in text and f"Recommended k = {searched.search.recommended_k}" in text
    runs = sth.list_theme_runs(study, "why")
    assert runs.set_index("run").loc[searched.run_id, "kind"] == "k-search"
    with pytest.raises(OpenCodeError, match="k search, not a theme run"):
        sth.load_themes(study, searched.run_id)


def test_list_compare_unexplained_delete(study, fitted):
    other = sth.question_themes(study, "why", k=K, random_state=3)
    table = sth.compare_theme_runs(study, fitted.run_id, other.run_id)
    assert (table["jaccard"] == 1.0).all()  # same data, same seed: the grouping does not change the themes
    unexplained = sth.unexplained_in_run(study, fitted.run_id)
    assert len(unexplained) == fitted.run.n_unexplained
    texts = verbatims(study, "why").set_index("respondent")["text"]
    assert unexplained["text"].tolist() == texts.loc[unexplained["doc_id"]].tolist()
    runs = sth.list_theme_runs(study, "why")
    assert {fitted.run_id, other.run_id} <= set(runs["run"])
    assert sth.list_theme_runs(study, "improve").empty
    sth.delete_theme_run(study, other.run_id, actor="bryn")
    assert other.run_id not in set(sth.list_theme_runs(study)["run"])
    with pytest.raises(OpenCodeError, match=f"no theme run {other.run_id}"):
        sth.load_theme_run(study, other.run_id)
    with pytest.raises(OpenCodeError, match=f"no theme run {other.run_id}"):
        sth.delete_theme_run(study, other.run_id)


def test_chart_for_the_report(study, tmp_path):
    result, chart = sth.themes_with_chart(study, "why", tmp_path / "themes.png", k=4, save=False)
    assert chart.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and len(result.run.themes) == 4


def test_bad_grouping_and_options(study):
    with pytest.raises(OpenCodeError, match="no variable named 'nope'"):
        sth.question_themes(study, "why", k=4, by="nope", save=False)
    with pytest.raises(OpenCodeError, match="'improve' is an open question|'improve' is text"):
        sth.question_themes(study, "why", k=4, by="improve", save=False)
    with pytest.raises(OpenCodeError, match="theme method 'pca'"):
        sth.question_themes(study, "why", k=4, method="pca", save=False)
    with pytest.raises(OpenCodeError, match="no open question named 'nope'"):
        sth.question_themes(study, "nope", k=4, save=False)


@pytest.mark.parametrize("k, match", [(1, "at least 2"), (0, "at least 2"), (2.5, "whole number")])
def test_k_out_of_range(study, k, match):
    with pytest.raises(OpenCodeError, match=match):
        sth.question_themes(study, "why", k=k, save=False)


@pytest.mark.parametrize("spec, match", [("1:5", "at least 2"), ("9:4", "must not exceed"), ("four", "FROM:TO")])
def test_bad_k_range(study, spec, match):
    with pytest.raises(OpenCodeError, match=match):
        sth.question_theme_search(study, "why", spec, save=False)


@pytest.mark.parametrize("answers, k, match", [
    (["late opening please", "more books", "safer car park"], 5, "fewer than k=5"),
    (["cats dogs", "dogs", "cats", "dogs cats dogs", "cats cats"] * 4, 3, "vocabulary too small: 2 term"),
    (["The opening hours are too short"] * 12, 3, "all 12 verbatims with terms are identical"),
])
def test_corpora_that_cannot_give_k_themes(tmp_path, answers, k, match):
    with Study.open(_tiny_study(tmp_path, "tiny", answers)) as tiny:
        with pytest.raises(OpenCodeError, match=match):
            sth.question_themes(tiny, "answer", k=k, min_df=1)
        assert sth.list_theme_runs(tiny).empty  # nothing half-kept
