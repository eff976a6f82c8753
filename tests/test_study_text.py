"""Lexicons kept in the study, the analyzer built from them, and the cached term matrix."""

import json
import shutil

import numpy as np
import pandas as pd
import pytest
from sklearn.feature_extraction.text import CountVectorizer

from opencode.demo_job import build_demo_study
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.matrix_cache_store import KEEP_PER_QUESTION, cached_keys
from opencode.study.store import Study
from opencode.study.survey_data import add_variable, analysis_values, get_question, get_variable, raw_values, verbatims
from opencode.text import study_text as st
from opencode.text.analyzer import Analyzer, Vocabulary
from opencode.text.lexicon import Lexicon
from opencode.text.matrix import build_matrix


@pytest.fixture(scope="module")
def demo_template(tmp_path_factory):
    return build_demo_study(tmp_path_factory.mktemp("demo") / "template.study")


@pytest.fixture
def study(demo_template, tmp_path):
    path = tmp_path / "demo.study"
    shutil.copy(demo_template, path)
    with Study.open(path) as s:
        yield s


@pytest.fixture
def stream_calls(monkeypatch):
    """Counts calls of the analyzer's tokenizing step (a cache hit must make none)."""
    calls = []
    original = Vocabulary.stream_chunk

    def counted(self, texts):
        calls.append(len(texts))
        return original(self, texts)

    monkeypatch.setattr(Vocabulary, "stream_chunk", counted)
    return calls


def audit_rows(study):
    return [(actor, action, entity, entity_id, json.loads(payload)) for actor, action, entity, entity_id, payload in
            study._db.execute("SELECT actor, action, entity, entity_id, payload FROM audit WHERE entity = 'lexicon' "
                             "ORDER BY id")]


# -- lexicons -------------------------------------------------------------------------------------------------------
def test_fallback_builtin_then_study_default_then_own(study):
    assert st.get_lexicon(study, "why") == Lexicon()
    assert st.lexicon_origin(study, "why") == st.BUILT_IN
    st.set_lexicon(study, None, Lexicon(stop_add=["town"]), actor="ash")
    assert st.get_lexicon(study, "why").stop_add == ["town"]
    assert st.lexicon_origin(study, "why") == st.STUDY_DEFAULT
    st.add_stop_words(study, "why", ["council"], actor="ash")
    assert st.get_lexicon(study, "why").stop_add == ["council", "town"]  # copied from the default, then edited
    assert st.lexicon_origin(study, "why") == st.OWN
    assert st.get_lexicon(study, "improve").stop_add == ["town"]  # the other question still uses the default


def test_every_edit_is_audited_with_before_and_after(study):
    st.add_stop_words(study, "why", ["council", "town"], actor="ash")
    st.remove_stop_words(study, "why", ["town", "not"], actor="ash")
    st.add_phrases(study, "why", ["Opening  Hours"], actor="bryn")
    st.remove_phrases(study, "why", ["opening hours"], actor="bryn")
    st.add_merge(study, "why", ["libary", "liberry"], "library", actor="ash")
    st.remove_merges(study, "why", ["liberry"], actor="ash")
    st.set_stemmer(study, "why", "porter", actor="ash")
    st.set_language(study, "why", "en", actor="ash")
    st.set_stem_exception(study, "why", "news", actor="ash")
    rows = audit_rows(study)
    assert [r[1] for r in rows] == [
        "lexicon-stop-add", "lexicon-stop-remove", "lexicon-phrase-add", "lexicon-phrase-remove",
        "lexicon-merge-add", "lexicon-merge-remove", "lexicon-stemmer", "lexicon-exception"]  # 'en' = english: no change
    question_id = get_question(study, "why").id
    assert all(r[2] == "lexicon" and r[3] == question_id for r in rows)
    assert rows[0][0] == "ash" and rows[2][0] == "bryn"
    assert rows[0][4]["change"] == {"added": ["council", "town"]}
    assert rows[1][4]["change"] == {"removed": ["town", "not"]}  # 'not' is on the bundled list: taken off it
    assert rows[4][4]["after"]["merges"] == {"libary": "library", "liberry": "library"}
    for _, _, _, _, payload in rows:  # each row can be undone: before and after are whole lexicons
        Lexicon.from_dict(payload["before"])
        Lexicon.from_dict(payload["after"])
    final = st.get_lexicon(study, "why")
    assert final == Lexicon(stemmer="porter", stop_add=["council"], stop_remove=["not"],
                            merges={"libary": "library"}, stem_exceptions={"news": "news"})


def test_noop_edit_writes_nothing(study):
    change = st.remove_stop_words(study, "why", ["wrenfield"])
    assert not change.changed and "not a stop word" in change.notes[0]
    assert audit_rows(study) == []
    assert st.lexicon_origin(study, "why") == st.BUILT_IN


def test_failed_edit_leaves_no_trace(study):
    st.add_merge(study, "why", ["a1"], "b1")
    with pytest.raises(OpenCodeError, match="loop"):
        st.add_merge(study, "why", ["b1"], "a1")
    assert st.get_lexicon(study, "why").merges == {"a1": "b1"}
    assert len(audit_rows(study)) == 1


def test_language_without_stemmer_needs_stem_off(study):
    with pytest.raises(OpenCodeError, match=r"no stemmer for language 'welsh'.*stem off"):
        st.set_language(study, "why", "welsh")
    assert st.get_lexicon(study, "why").language == "english"
    st.set_stemmer(study, "why", None)
    change = st.set_language(study, "why", "welsh")
    assert change.lexicon.language == "welsh" and change.lexicon.stemmer is None
    assert any("no bundled stop list" in note for note in change.notes)
    with pytest.raises(OpenCodeError, match="Porter stemmer is for English only"):
        st.set_stemmer(study, "why", "porter")


def test_bad_removals_name_what_exists(study):
    st.add_phrases(study, "why", ["opening hours"])
    with pytest.raises(OpenCodeError, match=r"phrase 'late nights' is not in the lexicon \(phrases: 'opening hours'\)"):
        st.remove_phrases(study, "why", ["late nights"])
    with pytest.raises(OpenCodeError, match="'libary' is not merged into anything"):
        st.remove_merges(study, "why", ["libary"])
    with pytest.raises(OpenCodeError, match="a phrase needs at least two words"):
        st.add_phrases(study, "why", ["hours"])
    with pytest.raises(OpenCodeError, match="no open question named 'nope'"):
        st.get_lexicon(study, "nope")


def test_parse_merge():
    assert st.parse_merge("libary, liberry -> library") == (["libary", "liberry"], "library")
    for bad in ("libary library", "->library", "libary->"):
        with pytest.raises(OpenCodeError, match="merge"):
            st.parse_merge(bad)


def test_export_import_round_trip_and_bad_line(study, tmp_path):
    st.add_phrases(study, "why", ["opening hours"])
    st.add_merge(study, "why", ["libary"], "library")
    path = st.export_lexicon(study, "why", tmp_path / "why.lexicon")
    st.import_lexicon(study, "improve", path, actor="bryn")
    assert st.get_lexicon(study, "improve") == st.get_lexicon(study, "why")
    assert audit_rows(study)[-1][1] == "lexicon-import"
    bad = tmp_path / "bad.lexicon"
    bad.write_text("[language]\nenglish\n[merges]\nlibary library\n", encoding="utf-8")
    with pytest.raises(OpenCodeError, match=r"bad.lexicon, line 4"):
        st.import_lexicon(study, "improve", bad)
    with pytest.raises(OpenCodeError, match="no such lexicon file"):
        st.import_lexicon(study, "improve", tmp_path / "missing.lexicon")


def test_analyzer_for_uses_the_lexicon(study):
    st.add_stop_words(study, "why", ["staff"])
    analyzer = st.analyzer_for(study, "why", join_negations=True)
    assert analyzer.to_dict() == Analyzer.from_lexicon(st.get_lexicon(study, "why"), join_negations=True).to_dict()
    assert "staff" not in analyzer.tokens("no staff after six")
    assert "staff" in st.analyzer_for(study, "improve").tokens("no staff after six")


# -- term matrix ----------------------------------------------------------------------------------------------------
def test_counts_equal_countvectorizer_without_nonanswers(study):
    st.add_phrases(study, "why", ["opening hours", "self service"])
    tm, frame = st.term_matrix(study, "why")
    analyzer = st.analyzer_for(study, "why")
    answers = frame.loc[~frame["nonanswer"], "text"].tolist()
    # Reference: scikit-learn CountVectorizer fed our token stream, on the same non-answer-free texts.
    cv = CountVectorizer(analyzer=analyzer.tokens)
    reference = cv.fit_transform(answers)
    assert tm.terms == list(cv.get_feature_names_out())
    assert (tm.counts != reference).nnz == 0
    assert len(tm.excluded_doc_ids) == int(frame["nonanswer"].sum()) > 0
    assert tm.excluded_doc_ids == frame.loc[frame["nonanswer"], "respondent"].tolist()


def test_frame_rows_line_up_with_matrix_rows(study):
    tm, frame = st.term_matrix(study, "why")
    assert tm.n_input == len(frame) == len(verbatims(study, "why"))
    kept = frame[frame["matrix_row"] >= 0]
    assert kept["matrix_row"].tolist() == list(range(tm.counts.shape[0]))
    assert kept["respondent"].tolist() == tm.doc_ids
    assert (frame.loc[frame["matrix_row"] < 0, "nonanswer"]).all()


def test_cache_hit_is_identical_and_does_not_tokenize(study, stream_calls):
    first, _ = st.term_matrix(study, "why")
    built = len(stream_calls)
    assert built > 0
    second, frame = st.term_matrix(study, "why")
    assert len(stream_calls) == built  # no tokenizer call on a hit
    assert (first.counts != second.counts).nnz == 0
    assert first.counts.dtype == second.counts.dtype
    assert (first.terms, first.labels, first.surfaces, first.doc_ids) == (second.terms, second.labels,
                                                                          second.surfaces, second.doc_ids)
    assert np.array_equal(first.rows_source, second.rows_source)
    assert first.warnings == second.warnings and first.empty_doc_ids == second.empty_doc_ids
    assert len(cached_keys(study, get_question(study, "why").id)) == 1


def test_lexicon_change_invalidates(study, stream_calls):
    before, _ = st.term_matrix(study, "why")
    st.add_stop_words(study, "why", ["staff"])
    calls = len(stream_calls)
    after, _ = st.term_matrix(study, "why")
    assert len(stream_calls) > calls
    assert "staff" in before.terms and "staff" not in after.terms


def test_verbatim_change_invalidates(study, stream_calls):
    before, _ = st.term_matrix(study, "why")
    with study.transaction():  # edit one verbatim's text in place (as a correction would)
        study._db.execute("UPDATE verbatims SET text = 'quokka quokka' WHERE id = "
                         "(SELECT MIN(id) FROM verbatims WHERE question_id = ? AND nonanswer = 0)",
                         (get_question(study, "why").id,))
    calls = len(stream_calls)
    after, _ = st.term_matrix(study, "why")
    assert len(stream_calls) > calls
    assert "quokka" not in before.terms
    assert after.counts[0, after.terms.index("quokka")] == 2


def test_new_wave_invalidates(study, tmp_path, stream_calls):
    before, _ = st.term_matrix(study, "why")
    wave = tmp_path / "wave2.csv"
    wave.write_text("resp_id,why,improve\nNEW001,The wombat display is lovely,more wombats\n", encoding="utf-8")
    import_survey(study.path, wave, ImportOptions("resp_id", ["why", "improve"]))
    after, frame = st.term_matrix(study, "why")
    assert after.counts.shape[0] == before.counts.shape[0] + 1
    assert "wombat" in after.terms and frame["respondent"].iloc[-1] == "NEW001"


def test_other_limits_read_the_one_cached_matrix(study, stream_calls):
    # themes (min_df 2) and drivers (min_df 5) after words: no second analysis, one cache entry, and the same
    # matrix a build with those limits gives (build_matrix with min_df is checked against CountVectorizer).
    plain, frame = st.term_matrix(study, "why")
    for limits in ({"min_df": 2}, {"min_df": 5}, {"min_df": 2, "max_df": 0.5, "weighting": "tfidf"}):
        calls = len(stream_calls)
        served, served_frame = st.term_matrix(study, "why", **limits)
        assert len(stream_calls) == calls
        built = build_matrix(frame["text"].tolist(), st.analyzer_for(study, "why"), doc_ids=frame["respondent"],
                             exclude=frame["nonanswer"].to_numpy(dtype=bool), **limits)
        assert served.terms == built.terms and (served.counts != built.counts).nnz == 0
        assert served.empty_doc_ids == built.empty_doc_ids
        assert served_frame["matrix_row"].tolist() == frame["matrix_row"].tolist()
    assert len(cached_keys(study, get_question(study, "why").id)) == 1


def test_options_change_key_and_cache_stays_bounded(study):
    plain, _ = st.term_matrix(study, "why")
    frequent, _ = st.term_matrix(study, "why", min_df=5)
    assert set(frequent.terms) < set(plain.terms)
    assert np.all(frequent.df >= 5)
    tfidf, _ = st.term_matrix(study, "why", weighting="tfidf")
    assert tfidf.weighting == "tfidf"
    for word in ("alpha", "beta", "gamma", "delta", "epsilon"):
        st.add_stop_words(study, "why", [word])
        st.term_matrix(study, "why")
    assert len(cached_keys(study, get_question(study, "why").id)) == KEEP_PER_QUESTION


def test_fingerprint_sees_every_change():
    base = st.verbatims_fingerprint(["ab", "c"], ["R1", "R2"], np.array([False, False]))
    assert base == st.verbatims_fingerprint(["ab", "c"], ["R1", "R2"], np.array([False, False]))
    for texts, ids, mask in ((["a", "bc"], ["R1", "R2"], [False, False]),   # same characters, other boundary
                             (["c", "ab"], ["R1", "R2"], [False, False]),   # order
                             (["ab", "c"], ["R2", "R1"], [False, False]),   # respondents
                             (["ab", "c"], ["R1", "R2"], [False, True]),    # non-answer flag
                             (["ab", "C"], ["R1", "R2"], [False, False])):  # case
        assert st.verbatims_fingerprint(texts, ids, np.array(mask)) != base


def test_subset_by_mask_and_ids(study):
    full, frame = st.term_matrix(study, "why")
    support = analysis_values(study, "support")
    mask, label = st.group_mask(study, frame, "support=1")
    positions = frame["respondent_id"].to_numpy() - 1  # respondents are numbered 1.. in study order here
    assert np.array_equal(mask, support[positions] == 1)
    assert label == "support = Strongly oppose"
    sub, sub_frame = st.term_matrix(study, "why", subset=mask)
    assert len(sub_frame) == mask.sum()
    by_ids, _ = st.term_matrix(study, "why", subset=frame.loc[mask, "verbatim_id"].tolist())
    assert by_ids.terms == sub.terms and (by_ids.counts != sub.counts).nnz == 0
    answers = sub_frame.loc[~sub_frame["nonanswer"], "text"].tolist()
    reference = CountVectorizer(analyzer=st.analyzer_for(study, "why").tokens).fit(answers)
    assert sub.terms == list(reference.get_feature_names_out())
    with pytest.raises(OpenCodeError, match="subset mask has 3 entries"):
        st.term_matrix(study, "why", subset=np.array([True, False, True]))
    with pytest.raises(OpenCodeError, match="verbatim id.* 999999"):
        st.term_matrix(study, "why", subset=[999999])


# -- bad input ------------------------------------------------------------------------------------------------------
def test_empty_corpus_and_unknown_question(study):
    with study.transaction():
        add_variable(study, "later", label="Asked later", kind="text", role="question")
    with pytest.raises(OpenCodeError, match="question 'later' has no verbatims"):
        st.term_matrix(study, "later")
    with pytest.raises(OpenCodeError, match="no verbatims in the subset"):
        st.term_matrix(study, "why", subset=[])
    with pytest.raises(OpenCodeError, match=r"no open question named 'whyy' \(questions: why, improve, later\)"):
        st.term_matrix(study, "whyy")


def test_every_verbatim_a_nonanswer(tmp_path):
    source = tmp_path / "s.csv"
    source.write_text("rid,why,other\nA,n/a,fine idea\nB,dont know,good\nC,,great stuff\n", encoding="utf-8")
    import_survey(tmp_path / "s.study", source, ImportOptions("rid", ["why", "other"]))
    with Study.open(tmp_path / "s.study") as s:
        with pytest.raises(OpenCodeError, match="all 3 verbatims of question 'why' are non-answers"):
            st.term_matrix(s, "why")
        with pytest.raises(OpenCodeError, match="non-answers"):
            st.suggest_question_phrases(s, "why")


def test_phrase_that_never_occurs_is_a_warning(study):
    st.add_phrases(study, "why", ["opening hours", "purple elephant"])
    tm, _ = st.term_matrix(study, "why")
    assert st.missing_phrases(tm, st.analyzer_for(study, "why")) == ["purple elephant"]
    assert st.missing_phrases(tm, st.analyzer_for(study, "why"), ["Opening Hours"]) == []
    assert tm.absent_phrases == ["purple elephant"]
    assert not any("purple elephant" in w for w in tm.warnings)  # shown by the lexicon verb, not every command


def test_stop_words_that_empty_verbatims_are_reported_by_respondent(study):
    tm, frame = st.term_matrix(study, "why")
    before = st.get_lexicon(study, "why")
    st.add_stop_words(study, "why", ["work", "go", "staff"])
    emptied = st.stop_word_effect(study, "why", before)
    assert emptied
    old, new = Analyzer.from_lexicon(before), st.analyzer_for(study, "why")
    text_of = dict(zip(frame["respondent"], frame["text"]))
    for respondent in emptied:
        assert old.tokens(text_of[respondent]) and not new.tokens(text_of[respondent])
    after, _ = st.term_matrix(study, "why")
    assert set(emptied) <= set(after.empty_doc_ids)


def test_phrase_suggestions_accepted_by_rank(study):
    rows = st.suggest_question_phrases(study, "why", min_count=10, top=5)
    assert len(rows) == 5
    change = st.accept_phrase_suggestions(study, "why", [2], actor="ash")
    assert change.lexicon.phrases == [rows[1].phrase.lower()]
    with pytest.raises(OpenCodeError, match="no suggestion number 6: the last list for question 'why' has 5"):
        st.accept_phrase_suggestions(study, "why", [6])
    with pytest.raises(OpenCodeError, match="no phrase suggestions saved for question 'improve'"):
        st.accept_phrase_suggestions(study, "improve", [1])


def test_group_mask_by_label_and_bad_specs(study):
    _, frame = st.term_matrix(study, "why")
    by_code, _ = st.group_mask(study, frame, "neighbourhood=3")
    by_label, text = st.group_mask(study, frame, "neighbourhood=saltmarrow")
    assert np.array_equal(by_code, by_label) and by_code.any() and text == "neighbourhood = Saltmarrow"
    with pytest.raises(OpenCodeError, match="has no code or label 'Atlantis'.*Saltmarrow"):
        st.group_mask(study, frame, "neighbourhood=Atlantis")
    with pytest.raises(OpenCodeError, match="VARIABLE=CODE"):
        st.group_mask(study, frame, "neighbourhood")
    with pytest.raises(OpenCodeError, match="no variable named 'shoe_size'"):
        st.group_mask(study, frame, "shoe_size=3")


def test_kwic_with_closed_ended_labels(study):
    lines, columns = st.question_kwic(study, "why", "staff", width=30, limit=20, show=["support", "neighbourhood"])
    assert len(lines) == 20
    support = get_variable(study, "support")
    raw = pd.Series(raw_values(study, "support"))  # missing codes kept: 9 shows as "Refused"
    keys = verbatims(study, "why").set_index("respondent")["respondent_id"]
    for line, label in zip(lines, columns["support"]):
        assert "staff" in line.match.lower()
        code = raw[keys[line.doc_id] - 1]
        assert label == support.value_labels[code]
    table = st.format_question_kwic(lines, columns, width=30)
    assert table.splitlines()[0].split()[:3] == ["respondent", "support", "neighbourhood"]
    with pytest.raises(OpenCodeError, match="term 'zzzyx' is not in the vocabulary"):
        st.question_kwic(study, "why", "zzzyx")


def test_coding_features_use_the_question_lexicon(study):
    from opencode.coding.features import default_analyzer

    st.add_stop_words(study, "why", ["staff"])
    assert "staff" not in default_analyzer(study, "why").tokens("no staff after six")
    assert "staff" in default_analyzer().tokens("no staff after six")
