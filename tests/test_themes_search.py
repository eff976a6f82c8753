"""Choosing k: Greene et al. (2014) stability, the k-range parser, the search table and recommendation."""

import json
from itertools import permutations

import numpy as np
import pytest
from sklearn.decomposition._nmf import _initialize_nmf
from sklearn.feature_extraction.text import TfidfTransformer

from opencode.analysis.themes.search import KSearch, choose_k, parse_k_range
from opencode.analysis.themes.stability import average_jaccard, depth_jaccard, model_agreement, stability
from opencode.analysis.themes.finder import leading_svd, nndsvd_start
from opencode.errors import OpenCodeError
from synthetic_themes import planted_corpus


def test_average_jaccard_worked_example():
    # Greene, O'Callaghan & Cunningham (2014), ECML PKDD, worked example of Average Jaccard (from memory):
    #   R1 = album music best award win, R2 = sport best win medal award
    #   d=1 {album} vs {sport}: 0; d=2: 0; d=3 {album,music,best} vs {sport,best,win}: 1/5 = 0.2;
    #   d=4: {best} shared of 7 -> 1/7 = 0.143; d=5: {best,award,win} of 7 -> 3/7 = 0.429; AJ = 0.154.
    words = {w: i for i, w in enumerate("album music best award win sport medal".split())}
    r1 = np.array([[words[w] for w in "album music best award win".split()]])
    r2 = np.array([[words[w] for w in "sport best win medal award".split()]])
    np.testing.assert_allclose(depth_jaccard(r1, r2)[0, 0], [0, 0, 1 / 5, 1 / 7, 3 / 7])
    assert average_jaccard(r1, r2)[0, 0] == pytest.approx(0.154, abs=5e-4)


def test_depth_jaccard_matches_set_arithmetic():
    rng = np.random.default_rng(1)
    a = np.array([rng.permutation(15)[:6] for _ in range(3)])
    b = np.array([rng.permutation(15)[:6] for _ in range(4)])
    got = depth_jaccard(a, b)
    for i in range(3):
        for j in range(4):
            for d in range(1, 7):
                sa, sb = set(a[i, :d]), set(b[j, :d])
                assert got[i, j, d - 1] == pytest.approx(len(sa & sb) / len(sa | sb))


def test_agreement_ignores_theme_order():
    tops = np.arange(20).reshape(4, 5)
    for order in permutations(range(4)):
        assert model_agreement(tops, tops[list(order)]) == pytest.approx(1.0)
    assert stability(tops, [tops, tops[::-1]]) == pytest.approx(1.0)
    assert model_agreement(tops, tops + 100) == 0.0


def test_nndsvd_start_matches_scikit_learn():
    # Reference: scikit-learn's NNDSVD (Boutsidis & Gallopoulos 2008), same SVD seed.
    corpus = planted_corpus(n_docs=300, n_themes=4, n_terms=150, core_size=10, random_state=2)
    tfidf = TfidfTransformer().fit_transform(corpus.counts)
    for variant in ("nndsvd", "nndsvda"):
        w_ref, h_ref = _initialize_nmf(tfidf, 6, init=variant, random_state=0)
        w, h = nndsvd_start(*leading_svd(tfidf, 6, 0), variant, tfidf.mean())
        np.testing.assert_allclose(w, w_ref, atol=1e-12)
        np.testing.assert_allclose(h, h_ref, atol=1e-12)


@pytest.mark.parametrize("spec, expected", [("4:20", list(range(4, 21))), ("2:10:4", [2, 6, 10]),
                                            (" 3 : 5 ", [3, 4, 5]), ([7, 3, 5, 3], [3, 5, 7])])
def test_parse_k_range(spec, expected):
    assert parse_k_range(spec) == expected


@pytest.mark.parametrize("spec, message", [("20:4", "FROM must not exceed TO"), ("1:5", "at least 2"),
                                           ("four:twenty", "FROM:TO"), ("4-20", "FROM:TO"),
                                           ([2.5, 3], "whole numbers"), ([], "whole numbers"),
                                           ("4:8:0", "STEP")])
def test_parse_k_range_rejects_bad_ranges(spec, message):
    with pytest.raises(OpenCodeError, match=message):
        parse_k_range(spec)


@pytest.fixture(scope="module")
def planted():
    return planted_corpus(n_docs=900, n_themes=5, n_terms=300, core_size=12, random_state=11)


def test_search_recommends_the_planted_k(planted):
    calls = []
    search = choose_k(planted.counts, "3:8", n_resamples=2, progress=lambda *args: calls.append(args))
    assert calls == [(i + 1, 6, k) for i, k in enumerate(range(3, 9))]
    assert search.table["k"].tolist() == list(range(3, 9))
    assert search.recommended_k == 5
    best = search.table.set_index("k").loc[5]
    assert best["stability"] > 0.9 and best["npmi"] == search.table["npmi"].max()
    assert "final test" in search.note and "k = 5" in search.note
    back = KSearch.from_record(json.loads(json.dumps(search.to_record())))
    assert back.recommended_k == 5
    np.testing.assert_allclose(back.table["stability"], search.table["stability"])


def test_search_is_reproducible_and_works_for_lda(planted):
    a = choose_k(planted.counts[:150], [4, 5], method="lda", n_resamples=1, max_iter=3)
    b = choose_k(planted.counts[:150], [4, 5], method="lda", n_resamples=1, max_iter=3)
    np.testing.assert_array_equal(a.table["stability"], b.table["stability"])


def test_search_subsamples_large_corpora(planted):
    search = choose_k(planted.counts, [4, 5], n_resamples=1, max_docs=400)
    assert search.recommended_k in (4, 5)


@pytest.mark.parametrize("kwargs, message", [({"k_range": "2:2000"}, "fewer than k=2000"),
                                             ({"seed_terms": [["w001"]]}, "without seed terms"),
                                             ({"sample_fraction": 1.0}, "sample_fraction"),
                                             ({"n_resamples": 0}, "at least one resample"),
                                             ({"method": "svd"}, "theme method 'svd'")])
def test_search_bad_input(planted, kwargs, message):
    with pytest.raises(OpenCodeError, match=message):
        choose_k(planted.counts, **kwargs)
