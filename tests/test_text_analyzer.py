"""Analyzer: normalisation, tokenization, placeholders, negations, phrases, merges, exceptions."""

import json

import pytest

from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer
from opencode.text.lexicon import Lexicon


def test_normalisation_case_folding_and_placeholders():
    a = Analyzer(stemmer=None, stop_words=False)
    # NFKC folds the ligature and full-width digits; case folding turns ß into ss.
    assert a.tokens("ﬁne STRAẞE ２２") == ["fine", "strasse", "#number"]
    assert a.tokens("see https://wren.example/hours?x=1, or mail desk@wren.example at 22:00") == [
        "see", "#url", "or", "mail", "#email", "at", "#number"]


def test_placeholder_options_keep_and_drop():
    keep = Analyzer(stemmer=None, stop_words=False, urls="keep", emails="drop", numbers="keep")
    assert keep.tokens("www.wren.example mail a@b.example 22:00") == ["www.wren.example", "mail", "22:00"]
    with pytest.raises(OpenCodeError, match="urls"):
        Analyzer(urls="mask").tokens("x")


def test_apostrophes_hyphens_digits_emoji():
    a = Analyzer(stemmer=None, stop_words=False)
    assert a.tokens("People’s self-service isn't open 24h 👍🏽👍") == [
        "people", "self_service", "isn't", "open", "24h", "👍🏽"]
    b = Analyzer(stemmer=None, stop_words=False, digits="drop", emoji="drop")
    assert b.tokens("open 24h covid19 👍 ok") == ["open", "ok"]


def test_negations_survive_stop_list_and_join():
    a = Analyzer()
    assert a.tokens("It is not safe and I never go") == ["not", "safe", "never", "go"]
    j = Analyzer(join_negations=True)
    # Negation tagging (Das & Chen 2001; Pang, Lee & Vaithyanathan 2002): the cue joins the next term.
    assert j.tokens("It is not safe. I don't like it, no.") == ["not_safe", "not_like", "no"]
    assert j.tokens("not at all safe") == ["not_safe"]
    dropped = Analyzer(keep_negations=False)
    assert dropped.tokens("It is not safe") == ["safe"]


def test_phrases_longest_match_first_and_hyphen_forms():
    a = Analyzer(phrases=["opening hours", "late opening hours", "self service"], stop_words=False, stemmer=None)
    assert a.tokens("late opening hours and opening hours") == ["late_opening_hours", "and", "opening_hours"]
    assert a.tokens("self-service or self service") == ["self_service", "or", "self_service"]
    s = Analyzer(phrases=["opening hours"])  # phrases match on stems
    assert s.tokens("the opening hour") == ["opening_hours"]


def test_phrases_do_not_cross_sentences():
    a = Analyzer(phrases=["opening hours"], stemmer=None)
    assert a.tokens("late opening. hours vary") == ["late", "opening", "hours", "vary"]


def test_merges_stop_add_and_stem_exceptions():
    a = Analyzer(merges={"libary": "library", "lib": "library"}, stop_add=["wrenfield"],
                 stem_exceptions={"news": "news"})
    assert a.tokens("libary lib library libraries Wrenfield news") == ["librari"] * 4 + ["news"]
    with pytest.raises(OpenCodeError, match="loop"):
        Analyzer(merges={"a1": "b1", "b1": "a1"}).tokens("x")


def test_stop_remove_keeps_a_word():
    assert "about" not in Analyzer().tokens("about parking")
    assert Analyzer(stop_remove=["about"], stemmer=None).tokens("about parking") == ["about", "parking"]


def test_params_round_trip_through_json_and_lexicon():
    lex = Lexicon(phrases=["opening hours"], merges={"libary": "library"}, stop_add=["wrenfield"])
    a = Analyzer.from_lexicon(lex, join_negations=True)
    data = json.loads(json.dumps(a.to_dict()))
    b = Analyzer.from_dict(data)
    text = "Wrenfield libary opening hours are not good"
    assert a.tokens(text) == b.tokens(text) == ["librari", "opening_hours", "not_good"]
    with pytest.raises(OpenCodeError, match="unknown parameter"):
        Analyzer.from_dict({"colour": 1})


def test_overlapping_matches_of_one_phrase_taken_left_to_right():
    a = Analyzer(phrases=["very very", "very very very good"], stemmer=None, stop_words=False)
    assert a.tokens("very very very") == ["very_very", "very"]
    assert a.tokens("very very very very good") == ["very", "very_very_very_good"]
