"""Lexicon: dict round trip, plain-text exchange, stable hash, bad input."""

import pytest
from hypothesis import given, settings, strategies as st

from opencode.errors import OpenCodeError
from opencode.text.lexicon import Lexicon

words = st.text(alphabet="abcdefghijklmnopqrstuvwxyzé", min_size=1, max_size=8)


@settings(max_examples=40, deadline=None)
@given(stop_add=st.lists(words, max_size=5), phrases=st.lists(st.tuples(words, words), max_size=4),
       merges=st.dictionaries(words, words, max_size=4), stems=st.dictionaries(words, words, max_size=3),
       stemmer=st.sampled_from(["snowball", "porter", None]))
def test_text_and_dict_round_trip(stop_add, phrases, merges, stems, stemmer):
    lex = Lexicon(stop_add=stop_add, phrases=[" ".join(p) for p in phrases], merges=merges,
                  stem_exceptions=stems, stemmer=stemmer)
    assert Lexicon.from_text(lex.to_text()) == lex
    assert Lexicon.from_dict(lex.to_dict()) == lex
    assert Lexicon.from_text(lex.to_text()).version_hash() == lex.version_hash()


def test_hash_is_stable_and_sensitive():
    a = Lexicon(stop_add=["b", "a"], phrases=["opening hours"])
    b = Lexicon(stop_add=["a", "b"], phrases=["opening  hours"])
    assert a.version_hash() == b.version_hash()
    assert a.version_hash() != Lexicon(stop_add=["a"], phrases=["opening hours"]).version_hash()


def test_text_format_parses_comments_and_keep_as_is():
    text = "# ours\n[language]\nenglish\n[stemmer]\nnone\n[stop+]\nwrenfield\n[merges]\nlibary -> library\n[stems]\nnews ->\n"
    lex = Lexicon.from_text(text)
    assert lex.stemmer is None and lex.stop_add == ["wrenfield"]
    assert lex.merges == {"libary": "library"} and lex.stem_exceptions == {"news": "news"}


@pytest.mark.parametrize("text,message", [
    ("[colours]\nred\n", "unknown section"),
    ("wrenfield\n", "before any"),
    ("[merges]\nlibary library\n", "line 2"),
    ("[merges]\nlibary ->\n", "both sides"),
    ("[phrases]\nhours\n", "at least two words"),
])
def test_bad_text_names_the_line(text, message):
    with pytest.raises(OpenCodeError, match=message):
        Lexicon.from_text(text, source="study.lex")
