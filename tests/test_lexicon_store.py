"""The SQL of lexicons, phrase-suggestion lists and the term-matrix cache, on real study files."""

import pytest

from opencode.errors import OpenCodeError
from opencode.study import lexicon_store as ls
from opencode.study import matrix_cache_store as mc
from opencode.study.store import Study
from opencode.study.survey_data import add_variable


@pytest.fixture
def study(tmp_path):
    with Study.create(tmp_path / "s.study") as s:
        with s.transaction():
            ids = [add_variable(s, name, label=name, kind="text", role="question") for name in ("why", "improve")]
        s.question_ids = ids
        yield s


def test_lexicon_rows_per_question_and_default(study):
    why, improve = study.question_ids
    assert ls.read_lexicon_data(study, why) is None
    assert ls.read_lexicon_data(study, None) is None
    with study.transaction():
        ls.write_lexicon_data(study, None, {"language": "french"})
        ls.write_lexicon_data(study, why, {"language": "english", "stop_add": ["x"]})
    assert ls.read_lexicon_data(study, None) == {"language": "french"}
    assert ls.read_lexicon_data(study, why)["stop_add"] == ["x"]
    assert ls.read_lexicon_data(study, improve) is None


def test_default_row_is_replaced_not_duplicated(study):
    # SQLite lets a UNIQUE column hold many NULLs, so the default row must be replaced by hand.
    for language in ("english", "french", "german"):
        with study.transaction():
            ls.write_lexicon_data(study, None, {"language": language})
    rows = study._db.execute("SELECT data FROM lexicons WHERE question_id IS NULL").fetchall()
    assert len(rows) == 1
    assert ls.read_lexicon_data(study, None) == {"language": "german"}


def test_delete_lexicon_row(study):
    why, _ = study.question_ids
    with study.transaction():
        ls.write_lexicon_data(study, why, {"language": "english"})
        assert ls.delete_lexicon_data(study, why) is True
        assert ls.delete_lexicon_data(study, why) is False
    assert ls.read_lexicon_data(study, why) is None


def test_corrupt_lexicon_row_is_a_clear_error(study):
    why, _ = study.question_ids
    with study.transaction():
        study._db.execute("INSERT INTO lexicons (question_id, data, updated_at) VALUES (?, 'not json', 'now')", (why,))
    with pytest.raises(OpenCodeError, match=f"question id {why} is not valid JSON"):
        ls.read_lexicon_data(study, why)


def test_phrase_suggestions_round_trip(study):
    why, improve = study.question_ids
    rows = [{"phrase": "opening hours", "count": 12, "g2": 40.5}]
    ls.save_phrase_suggestions(study, why, rows)
    assert ls.load_phrase_suggestions(study, why) == rows
    assert ls.load_phrase_suggestions(study, improve) == []


def test_matrix_cache_store_load_and_prune(study):
    why, improve = study.question_ids
    assert mc.load_matrix_blob(study, "k0") is None
    for i in range(mc.KEEP_PER_QUESTION + 3):
        mc.store_matrix_blob(study, why, f"k{i}", bytes([i]))
    mc.store_matrix_blob(study, improve, "other", b"x")
    newest = [f"k{i}" for i in range(mc.KEEP_PER_QUESTION + 2, 2, -1)]
    assert mc.cached_keys(study, why) == newest
    assert mc.load_matrix_blob(study, "k0") is None
    assert mc.load_matrix_blob(study, newest[0]) == bytes([mc.KEEP_PER_QUESTION + 2])
    assert mc.cached_keys(study, improve) == ["other"]  # other questions untouched


def test_matrix_cache_rewrite_same_key_and_clear(study):
    why, improve = study.question_ids
    mc.store_matrix_blob(study, why, "k", b"old")
    mc.store_matrix_blob(study, why, "k", b"new")
    assert mc.cached_keys(study, why) == ["k"]
    assert mc.load_matrix_blob(study, "k") == b"new"
    mc.store_matrix_blob(study, improve, "j", b"x")
    assert mc.clear_matrix_cache(study, why) == 1
    assert mc.cached_keys(study, improve) == ["j"]
    assert mc.clear_matrix_cache(study) == 1
