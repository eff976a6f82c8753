"""Theme runs: representatives without near-duplicates, prevalence tests, records, comparison, labels, output."""

import io
import json

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.stats import chi2_contingency
from sklearn.preprocessing import normalize
from statsmodels.stats.multitest import multipletests

from opencode.analysis.themes.charts import plot_k_curve, plot_theme_terms
from opencode.analysis.themes.format import format_comparison, format_k_search, format_prevalence, format_themes
from opencode.analysis.themes.search import KSearch
from opencode.analysis.themes.summary import (ThemeRun, compare_runs, find_themes, propose_code_label,
                                             theme_prevalence, unexplained_verbatims)
from opencode.errors import OpenCodeError
from synthetic_themes import planted_corpus


@pytest.fixture(scope="module")
def data():
    corpus = planted_corpus(n_docs=500, n_themes=4, n_terms=200, core_size=12, random_state=8)
    # Duplicate the first 40 verbatims (same terms, text differing only in case and punctuation) and add
    # three verbatims with no terms.
    counts = sp.vstack([corpus.counts, corpus.counts[:40], sp.csr_matrix((3, 200))]).tocsr()
    texts = [f"answer number {i}" for i in range(500)] + [f"Answer number {i}!!" for i in range(40)] + [""] * 3
    ids = [f"r{i:04d}" for i in range(len(texts))]
    rng = np.random.default_rng(0)
    groups = np.where(np.concatenate([corpus.doc_theme, corpus.doc_theme[:40], [0, 0, 0]]) == 0, "north", "south")
    groups = groups.astype(object)
    groups[rng.choice(len(groups), 10, replace=False)] = None
    return corpus, counts, texts, ids, groups


@pytest.fixture(scope="module")
def run(data):
    corpus, counts, texts, ids, groups = data
    return find_themes(counts, corpus.terms, k=4, texts=texts, doc_ids=ids, groups=groups, n_representatives=6)


def test_run_counts_empty_and_unexplained(run):
    assert run.n_docs == 543 and run.n_empty == 3
    assert run.empty_rows.tolist() == [540, 541, 542]
    assert sum(t.n_dominant for t in run.themes) + run.n_unexplained == 540
    assert sum(t.share for t in run.themes) + run.n_unexplained / 540 == pytest.approx(1.0)
    assert any("3 of 543 verbatims have no terms" in note for note in run.notes)
    assert "final test" in run.notes[-1]


def test_representatives_are_the_heaviest_distinct_verbatims(data, run):
    corpus, counts, texts, ids, groups = data
    unit = normalize(counts)
    for theme in run.themes:
        reps = theme.representatives
        assert len(reps) == 6
        rows = [r.row for r in reps]
        assert all(run.dominant[r] == theme.index for r in rows)
        assert [r.score for r in reps] == sorted((r.score for r in reps), reverse=True)
        similarity = (unit[rows] @ unit[rows].T).toarray()
        assert similarity[np.triu_indices(6, 1)].max() <= 0.9
        keys = {" ".join(t.lower().replace("!", "").split()) for t in (r.text for r in reps)}
        assert len(keys) == 6
        assert reps[0].doc_id == ids[reps[0].row] and reps[0].text == texts[reps[0].row]
        # The heaviest verbatim of the theme is always shown (or its earlier duplicate is).
        weight = run.doc_theme[:, theme.index]
        assert reps[0].share >= 0.5 and reps[0].share == pytest.approx(weight[rows[0]])


@pytest.mark.filterwarnings("ignore::sklearn.exceptions.ConvergenceWarning")
def test_duplicates_are_skipped_even_when_heaviest():
    # Five copies of the same verbatim top theme 0: only one of them is shown.
    counts = sp.csr_matrix(np.array([[3, 0, 0, 0]] * 5 + [[2, 1, 0, 0], [1, 2, 0, 0], [0, 0, 2, 1], [0, 0, 1, 2],
                                                         [0, 0, 1, 1], [1, 1, 0, 0]]))
    texts = ["Same."] * 5 + [f"text {i}" for i in range(6)]
    found = find_themes(counts, ["a", "b", "c", "d"], k=2, texts=texts, n_representatives=3,
                        max_iter=300)
    for theme in found.themes:
        shown = [r.text for r in theme.representatives]
        assert shown.count("Same.") <= 1


def test_prevalence_matches_scipy_and_statsmodels(data, run):
    corpus, counts, texts, ids, groups = data
    prevalence = run.prevalence
    valid = np.array([g is not None for g in groups]) & run.included
    for theme in range(4):
        table = np.array([[np.sum(valid & (groups == g) & (run.dominant == theme)) for g in ("north", "south")],
                          [np.sum(valid & (groups == g) & (run.dominant != theme)) for g in ("north", "south")]])
        # Reference: scipy.stats.chi2_contingency on the 2 x groups table (no continuity correction).
        chi2, p, dof, _ = chi2_contingency(table, correction=False)
        assert prevalence.tests.loc[theme, "chi2"] == pytest.approx(chi2)
        assert prevalence.tests.loc[theme, "p"] == pytest.approx(p)
        assert prevalence.counts.loc[theme].tolist() == table[0].tolist()
    # Reference: statsmodels multipletests(method="fdr_bh") (Benjamini & Hochberg 1995).
    _, expected, _, _ = multipletests(prevalence.tests["p"], method="fdr_bh")
    np.testing.assert_allclose(prevalence.tests["p_adjusted"], expected)
    assert prevalence.bases.sum() == valid.sum()


def test_small_groups_are_shown_but_not_tested():
    dominant = np.array([0, 1] * 50 + [0] * 10)
    groups = ["a"] * 50 + ["b"] * 50 + ["c"] * 10
    prevalence = theme_prevalence(dominant, np.ones(110, dtype=bool), groups, n_themes=2)
    assert prevalence.tested_groups == ["a", "b"]
    assert "c" in prevalence.note and "under 30" in prevalence.note
    assert prevalence.counts["c"].tolist() == [10, 0]
    alone = theme_prevalence(dominant[:60], np.ones(60, dtype=bool), ["a"] * 50 + ["c"] * 10, n_themes=2)
    assert alone.tests["p"].isna().all() and "no tests" in alone.note
    with pytest.raises(OpenCodeError, match="3 values for 110 verbatims"):
        theme_prevalence(dominant, np.ones(110, dtype=bool), ["a", "b", "c"], n_themes=2)


def test_record_round_trip_without_pickle(run):
    meta, arrays = run.to_record()
    meta_back = json.loads(json.dumps(meta, allow_nan=False))
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    buffer.seek(0)
    with np.load(buffer, allow_pickle=False) as stored:
        back = ThemeRun.from_record(meta_back, dict(stored))
    assert back.themes == run.themes
    np.testing.assert_array_equal(back.components, run.components)
    np.testing.assert_array_equal(back.dominant, run.dominant)
    assert back.doc_ids.tolist() == list(run.doc_ids)
    pd.testing.assert_frame_equal(back.prevalence.tests, run.prevalence.tests, check_dtype=False)
    pd.testing.assert_frame_equal(back.prevalence.shares, run.prevalence.shares)
    assert back.unexplained_rows.tolist() == run.unexplained_rows.tolist()
    assert format_themes(back) == format_themes(run)
    with pytest.raises(OpenCodeError, match="unknown format"):
        ThemeRun.from_record({**meta, "format": "other"}, arrays)


def test_compare_runs_matches_themes(data, run):
    corpus, counts, texts, ids, groups = data
    same = compare_runs(run, run)
    assert (same["jaccard"] == 1.0).all() and (same["theme_a"] == same["theme_b"]).all()
    bigger = find_themes(counts, corpus.terms, k=5, random_state=1)
    table = compare_runs(run, bigger)
    assert len(table) == 5
    assert table["theme_a"].isna().sum() == 1
    assert (table["jaccard"].iloc[:4] > 0.5).all()
    text = format_comparison(table)
    assert text.count("\n") == 8 and text.endswith("\n\nbest match first (by Jaccard)")  # 5 rows, then the order


def test_unexplained_listing(data):
    corpus, counts, texts, ids, groups = data
    strict = find_themes(counts, corpus.terms, k=4, texts=texts, doc_ids=ids, min_share=0.97)
    listing = unexplained_verbatims(strict, texts)
    assert len(listing) == strict.n_unexplained > 0
    assert (listing["best_share"] <= 0.97).all()
    assert listing["text"].iloc[0] == texts[listing["row"].iloc[0]]


def test_propose_code_label():
    # Common practice (no published source): a draft label is the first few top-weighted terms, as they are.
    assert propose_code_label(["staff", "staffing", "safety", "evenings", "late"]) == "staff / staffing / safety"
    assert propose_code_label(["opening_hours", "open", "weekend", "staff"]) == "opening hours / open / weekend"
    assert propose_code_label(["dog", "dog", "food"], n_words=2) == "dog / food"
    assert propose_code_label([]) == "Unnamed theme"
    # A negation and a short word are kept: "no" before "damage" is the theme's meaning, "ce" an abbreviation.
    assert propose_code_label(["no", "damage", "ce", "#number"]) == "no / damage / ce"
    assert propose_code_label(["no damage", "#number", "ce"]) == "no damage / #number / ce"


def test_text_tables_and_charts(tmp_path, run):
    text = format_themes(run)
    assert run.themes[0].label in text and "NPMI" in text and "r0" in text
    assert "north" in format_prevalence(run) and "base" in format_prevalence(run)
    table = pd.DataFrame({"k": [3, 4, 5], "npmi": [0.1, 0.3, 0.2], "umass": [-2.0, -1.5, -1.8],
                          "stability": [0.7, 0.9, 0.8], "unexplained": [0.0, 0.01, 0.02],
                          "rank_npmi": [3.0, 1.0, 2.0], "rank_stability": [3.0, 1.0, 2.0],
                          "combined_rank": [3.0, 1.0, 2.0], "seconds": [0.1, 0.1, 0.1]})
    search = KSearch(table=table, recommended_k=4, note="note")
    assert "*  4" in format_k_search(search)  # a search kept before the largest share was measured
    flagged = KSearch(table=table.assign(largest=[0.6, 0.2, 0.1], catch_all=[True, False, False]),
                      recommended_k=4, note="note")
    assert "catch-all" in format_k_search(flagged).splitlines()[2] and "60%" in format_k_search(flagged)
    for path in (plot_theme_terms(run, tmp_path / "terms.png"), plot_k_curve(search, tmp_path / "k.png")):
        assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["k.png", "terms.png"]
    with pytest.raises(OpenCodeError, match="does not exist"):
        plot_theme_terms(run, tmp_path / "missing" / "terms.png")


def test_summary_input_checks(data):
    corpus, counts, texts, ids, groups = data
    with pytest.raises(OpenCodeError, match="texts: 2 values for 543 verbatims"):
        find_themes(counts, corpus.terms, k=4, texts=["a", "b"])
    with pytest.raises(OpenCodeError, match="term labels: 3 given"):
        find_themes(counts, ["a", "b", "c"], k=4)
