"""ThemeFinder: identical to scikit-learn's NMF / LDA, planted-theme recovery, seeding, empty rows, bad input."""

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.decomposition import NMF, LatentDirichletAllocation
from sklearn.feature_extraction.text import TfidfTransformer

from opencode.analysis.themes.coherence import top_term_indices
from opencode.analysis.themes.stability import depth_jaccard, match_themes
from opencode.analysis.themes.finder import ThemeFinder
from opencode.errors import OpenCodeError
from synthetic_themes import planted_corpus


@pytest.fixture(scope="module")
def corpus():
    return planted_corpus(n_docs=600, n_themes=5, n_terms=300, core_size=12, random_state=4)


@pytest.fixture(scope="module")
def small():
    # LDA's E-step visits documents one by one, so its checks use a smaller corpus to stay fast.
    return planted_corpus(n_docs=200, n_themes=4, n_terms=120, core_size=10, random_state=5)


def recovery(components, theme_terms, n_top=12):
    """Mean Jaccard of Hungarian-matched top-term sets against the planted core sets."""
    found = top_term_indices(components, n_top)
    planted = np.array([t[:n_top] for t in theme_terms])
    jaccard = depth_jaccard(found, planted)[:, :, -1]
    rows, cols = match_themes(jaccard)
    return jaccard[rows, cols].sum() / len(theme_terms)


# Reference: scikit-learn NMF (Lee & Seung 1999 model; Cichocki & Phan 2009 coordinate descent; Fevotte &
# Idier 2011 multiplicative updates) fitted in the test on the same tf-idf matrix, init and seed.
@pytest.mark.parametrize("loss, solver, init", [("frobenius", "cd", "nndsvd"),
                                                ("kullback-leibler", "mu", "nndsvda")])
def test_nmf_matches_scikit_learn(corpus, loss, solver, init):
    finder = ThemeFinder("nmf", n_themes=5, loss=loss, init=init, max_iter=300, random_state=3).fit(corpus.counts)
    tfidf = TfidfTransformer().fit_transform(corpus.counts)
    reference = NMF(n_components=5, init=init, solver=solver, beta_loss=loss, max_iter=300, random_state=3)
    w = reference.fit_transform(tfidf)
    np.testing.assert_allclose(finder.components_, reference.components_)
    np.testing.assert_allclose(finder.weights_, w)
    np.testing.assert_allclose(finder.doc_theme_.sum(axis=1)[w.sum(axis=1) > 0], 1.0)


# Reference: scikit-learn LatentDirichletAllocation (Blei, Ng & Jordan 2003; online VB of Hoffman et al. 2010).
@pytest.mark.parametrize("learning_method", ["batch", "online"])
def test_lda_matches_scikit_learn(small, learning_method):
    finder = ThemeFinder("lda", n_themes=4, learning_method=learning_method, max_iter=5, random_state=2)
    finder.fit(small.counts)
    reference = LatentDirichletAllocation(n_components=4, learning_method=learning_method, max_iter=5,
                                          random_state=2).fit(small.counts)
    np.testing.assert_allclose(finder.components_, reference.components_)
    np.testing.assert_allclose(finder.doc_theme_, reference.transform(small.counts), rtol=1e-6)


@pytest.mark.parametrize("params", [{"method": "nmf", "init": "random"}, {"method": "lda", "max_iter": 3}])
def test_same_random_state_same_result(small, params):
    a = ThemeFinder(n_themes=4, random_state=9, **params).fit(small.counts)
    b = ThemeFinder(n_themes=4, random_state=9, **params).fit(small.counts)
    c = ThemeFinder(n_themes=4, random_state=10, **params).fit(small.counts)
    np.testing.assert_array_equal(a.components_, b.components_)
    assert not np.allclose(a.components_, c.components_)


def test_planted_themes_are_recovered_by_nmf(corpus):
    # Property check on a synthetic corpus (not the outside check): each planted theme's core terms come back.
    finder = ThemeFinder("nmf", n_themes=5, random_state=0).fit(corpus.counts)
    assert recovery(finder.components_, corpus.theme_terms) >= 0.8
    assert (finder.dominant_theme_ >= 0).mean() > 0.9
    assert (finder.dominant_theme_ == finder.doc_theme_.argmax(axis=1)).mean() > 0.9


def test_planted_themes_are_recovered_by_lda(small):
    finder = ThemeFinder("lda", n_themes=4, max_iter=20, random_state=0).fit(small.counts)
    assert recovery(finder.components_, small.theme_terms, n_top=10) >= 0.8


def test_empty_rows_are_left_out_and_counted(corpus):
    counts = sp.vstack([sp.csr_matrix((3, corpus.counts.shape[1])), corpus.counts, sp.csr_matrix((2, 300))]).tocsr()
    finder = ThemeFinder(n_themes=5).fit(counts)
    plain = ThemeFinder(n_themes=5).fit(corpus.counts)
    assert finder.n_empty_ == 5
    assert finder.included_.sum() == corpus.counts.shape[0]
    assert (finder.dominant_theme_[[0, 1, 2, -2, -1]] == -1).all()
    np.testing.assert_array_equal(finder.doc_theme_[:3], 0.0)
    np.testing.assert_allclose(finder.components_, plain.components_)


def test_unexplained_verbatims_follow_min_share(corpus):
    loose = ThemeFinder("nmf", n_themes=5, random_state=0).fit(corpus.counts)
    strict = ThemeFinder("nmf", n_themes=5, min_share=0.95, random_state=0).fit(corpus.counts)
    assert loose.min_share_ == pytest.approx(0.3)  # 1.5 x the even share 1/5
    assert strict.n_unexplained_ > loose.n_unexplained_
    assert strict.n_unexplained_ == int((strict.doc_theme_.max(axis=1) <= 0.95).sum())


def test_transform_gives_shares(corpus):
    finder = ThemeFinder(n_themes=5).fit(corpus.counts)
    shares = finder.transform(corpus.counts[:10])
    np.testing.assert_allclose(shares.sum(axis=1), 1.0)


def test_seeded_themes_start_from_the_seed_terms(corpus):
    seed_a = [corpus.terms[j] for j in corpus.theme_terms[3][:3]]
    seed_b = [corpus.terms[j] for j in corpus.theme_terms[1][:2]]
    finder = ThemeFinder(n_themes=5, seed_terms=[seed_a, seed_b], random_state=0).fit(corpus.counts, terms=corpus.terms)
    top = [[corpus.terms[j] for j in row] for row in top_term_indices(finder.components_, 12)]
    assert set(seed_a) <= set(top[0])
    assert set(seed_b) <= set(top[1])
    assert recovery(finder.components_, corpus.theme_terms) >= 0.8
    assert [c.size for c in finder.seed_columns_] == [3, 2]


def test_seeding_steers_a_theme_the_plain_fit_does_not_make():
    # Two planted themes only; seeding three terms from theme 0's core with k = 3 makes theme 0 of the
    # fit exactly those terms' theme (the seeded theme comes first).
    corpus = planted_corpus(n_docs=300, n_themes=2, n_terms=120, core_size=10, random_state=1)
    seed = [corpus.terms[j] for j in corpus.theme_terms[0][:3]]
    finder = ThemeFinder(n_themes=3, seed_terms=[seed]).fit(corpus.counts, terms=corpus.terms)
    top = top_term_indices(finder.components_, 10)[0]
    assert len(set(top) & set(corpus.theme_terms[0])) >= 7


@pytest.mark.parametrize("make, params, message", [
    (lambda c: c.counts[:3], {"n_themes": 5}, "fewer than k=5"),
    (lambda c: sp.csr_matrix(np.tile([[1, 2, 0, 0]], (20, 1))), {"n_themes": 2}, "identical"),
    (lambda c: sp.csr_matrix(np.eye(30, 3) + np.eye(30, 3, k=-3)), {"n_themes": 4}, "vocabulary too small"),
    (lambda c: sp.csr_matrix(np.tile(np.repeat(np.eye(3), 2, axis=1), (10, 1))), {"n_themes": 4}, "only 3 distinct"),
    (lambda c: c.counts, {"n_themes": 1}, "at least 2"),
    (lambda c: c.counts, {"n_themes": 2.5}, "whole number"),
    (lambda c: c.counts, {"method": "pca"}, "theme method 'pca'"),
    (lambda c: c.counts, {"loss": "hinge"}, "NMF loss 'hinge'"),
    (lambda c: c.counts, {"loss": "kullback-leibler", "init": "nndsvd"}, "nndsvda"),
    (lambda c: c.counts, {"method": "lda", "learning_method": "fast"}, "learning method 'fast'"),
    (lambda c: c.counts, {"method": "lda", "seed_terms": [["w001"]]}, "method='nmf' only"),
    (lambda c: -c.counts, {}, "not negative"),
    (lambda c: np.zeros(5), {}, "2-D"),
])
def test_bad_input_raises_clear_errors(corpus, make, params, message):
    with pytest.raises(OpenCodeError, match=message):
        ThemeFinder(**params).fit(make(corpus))


@pytest.mark.parametrize("seeds, message", [
    ([["nonsense"]], "seed list 1: term\\(s\\) not in the vocabulary: nonsense"),
    ([["w001"], []], "seed list 2 is empty"),
    ([["w001"]] * 5, "5 seeded themes leave no room"),
])
def test_bad_seeds_raise_clear_errors(corpus, seeds, message):
    with pytest.raises(OpenCodeError, match=message):
        ThemeFinder(n_themes=5, seed_terms=seeds).fit(corpus.counts, terms=corpus.terms)


def test_seed_term_absent_from_verbatims(corpus):
    counts = corpus.counts.tolil()
    counts[:, 7] = 0
    with pytest.raises(OpenCodeError, match="in no verbatim with terms: w007"):
        ThemeFinder(n_themes=5, seed_terms=[["w007"]]).fit(counts.tocsr(), terms=corpus.terms)


def test_seeds_need_term_labels(corpus):
    with pytest.raises(OpenCodeError, match="pass terms="):
        ThemeFinder(n_themes=5, seed_terms=[["w001"]]).fit(corpus.counts)
    with pytest.raises(OpenCodeError, match="4 given for a matrix with 300 columns"):
        ThemeFinder(n_themes=5).fit(corpus.counts, terms=["a", "b", "c", "d"])


def test_a_model_stopped_by_its_iteration_limit_gives_one_plain_note_not_a_raw_warning(corpus):
    import warnings
    from opencode.analysis.themes.summary import find_themes
    counts, terms = corpus.counts, list(corpus.terms)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        run = find_themes(counts, terms, k=5, max_iter=1, tol=1e-12)
    assert not [w for w in caught if "Convergence" in w.category.__name__]
    assert sum("iteration limit (1)" in note for note in run.notes) == 1
    calm = find_themes(counts, terms, k=5)
    assert not any("iteration limit" in note for note in calm.notes)
