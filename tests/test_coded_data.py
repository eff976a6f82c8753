"""The study as table / export inputs: one coder's codes as an indicator matrix, bases, nets, banners, weights."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from opencode.analysis.tables import coded_data
from opencode.analysis.tables.crosstab import banner_table, code_frequencies
from opencode.coding.assignments import assign, assignments, mark_done
from opencode.errors import OpenCodeError
from opencode.resources import demo_dir
from opencode.study import survey_data
from opencode.study.store import Study

from helpers import MACHINE_SUGGESTIONS, RULE_SUGGESTIONS, add_numeric, build_fixture_study, copy_study


@pytest.fixture(scope="module")
def study_path(tmp_path_factory) -> Path:
    return build_fixture_study(tmp_path_factory.mktemp("coded"))


@pytest.fixture
def study(study_path):
    with Study.open(study_path) as opened:
        yield opened


def _rows_of(study: Study, question: str) -> dict[int, int]:
    """verbatim id -> respondent row (study order)."""
    texts = survey_data.verbatims(study, question)
    return dict(zip(texts["verbatim_id"], pd.Index(survey_data.respondent_keys(study)).get_indexer(texts["respondent"])))


@pytest.mark.parametrize("coder, suggestions", [("final", False), ("final", True), ("bryn", False)])
def test_indicator_matrix_equals_pandas_crosstab_of_assignments(study, coder, suggestions):
    # Outside check: pandas.crosstab of the assignment rows, restricted to the sources counted.
    coding = coded_data.load_coding(study, "why", coder, include_suggestions=suggestions)
    given = assignments(study, "why", [coder], None if suggestions else ("hand",))
    rows = given["verbatim_id"].map(_rows_of(study, "why"))
    numbers = [c.number for c in coding.codes]
    expected = pd.crosstab(rows, given["number"]).reindex(index=range(len(coding.respondent_ids)), columns=numbers,
                                                         fill_value=0)
    assert coding.indicators.shape == expected.shape
    assert np.array_equal(coding.indicators.toarray(), (expected.to_numpy() > 0).astype(np.int8))
    assert coding.respondent_ids == survey_data.respondent_keys(study)


def test_suggestions_counted_only_when_asked_and_said(study):
    plain = coded_data.load_coding(study, "why")
    with_suggestions = coded_data.load_coding(study, "why", include_suggestions=True)
    assert plain.suggestions == 0 and not any("suggestions" in n for n in plain.notes)
    assert with_suggestions.suggestions == MACHINE_SUGGESTIONS + RULE_SUGGESTIONS
    said = f"includes {MACHINE_SUGGESTIONS + RULE_SUGGESTIONS} machine/rule suggestions not yet reviewed by a person"
    assert any(said in n for n in with_suggestions.notes)
    assert said in coded_data.table_question(with_suggestions).label
    # Suggested verbatims join the base only with suggestions included.
    assert with_suggestions.answered.sum() == plain.answered.sum() + MACHINE_SUGGESTIONS + RULE_SUGGESTIONS


def test_masks_partition_respondents(study):
    coding = coded_data.load_coding(study, "why")
    masks = np.vstack([coding.answered, coding.non_answer, coding.uncoded, ~coding.has_verbatim])
    assert np.array_equal(masks.sum(axis=0), np.ones(len(coding.respondent_ids)))
    texts = survey_data.verbatims(study, "why")
    flagged_rows = pd.Index(coding.respondent_ids).get_indexer(texts.loc[texts["nonanswer"], "respondent"])
    substantive = np.asarray(coding.indicators[:, [c.special != "nonanswer" for c in coding.codes]].sum(axis=1)).ravel()
    # A flagged non-answer stays one unless the coder gave it a substantive code.
    assert np.array_equal(coding.non_answer[flagged_rows], substantive[flagged_rows] == 0)
    # Only coded verbatims form the base; the rest are said to be left out.
    assert not coding.indicators[coding.uncoded].nnz
    assert any(f"{int(coding.uncoded.sum()):,} answered verbatims not yet coded" in n for n in coding.notes)
    assert np.array_equal(coding.status == 1, coding.answered)


def test_net_counts_a_respondent_once_as_the_frame_file_says(study):
    # Net membership read straight from the shipped frame CSV with pandas (through one nested level).
    frame = pd.read_csv(demo_dir() / "frame-why.csv")
    parent = dict(zip(frame["number"], frame["net"]))
    coding = coded_data.load_coding(study, "why")
    table = code_frequencies(coded_data.table_question(coding))
    given = assignments(study, "why", ["final"], ("hand",))
    given["row"] = given["verbatim_id"].map(_rows_of(study, "why"))
    given = given[coding.answered[given["row"].to_numpy()]]
    for i, row in enumerate(table.rows):
        if row.kind != "net":
            continue
        inside = {c for c in frame["number"] if parent.get(c) == row.number or parent.get(parent.get(c)) == row.number}
        expected = given.loc[given["number"].isin(inside), "row"].nunique()
        assert table.count[i] == expected, row
    assert table.base.n == int(coding.answered.sum())
    assert 99 not in [r.number for r in table.rows]  # the non-answer code is the non-answer row


def test_unknown_coder_lists_coders_with_counts(study):
    with pytest.raises(OpenCodeError) as error:
        coded_data.load_coding(study, "why", "nobody")
    message = str(error.value)
    assert "'nobody'" in message and "--coder" in message
    counts = assignments(study, "why").query("source == 'hand'").groupby("coder").size()
    for coder in ("ash", "bryn", "final"):
        assert f"{coder} ({counts[coder]:,} confirmed" in message


def test_coder_with_only_suggestions_is_pointed_to_the_option(study_path, tmp_path):
    path = copy_study(study_path, tmp_path / "copy")
    with Study.open(path) as study:
        texts = survey_data.verbatims(study, "improve")
        assign(study, int(texts["verbatim_id"].iloc[0]), 1, "robot", source="machine")
        with pytest.raises(OpenCodeError, match="--with-suggestions"):
            coded_data.load_coding(study, "improve", "robot")
        assert coded_data.load_coding(study, "improve", "robot", include_suggestions=True).suggestions == 1


def test_banner_and_weight_from_the_study(study):
    banner = coded_data.banner_variable(study, "support")
    variable = survey_data.get_variable(study, "support")
    assert [label for _, label in banner.value_labels] == list(variable.value_labels.values())
    assert list(banner.missing) == sorted(variable.missing_codes)
    weight = coded_data.survey_weight(study)
    assert weight.name == "weight"
    np.testing.assert_array_equal(weight.values, survey_data.analysis_values(study, "weight"))
    with pytest.raises(OpenCodeError, match="single-choice"):
        coded_data.banner_variable(study, "weight")
    with pytest.raises(OpenCodeError, match="no variable named 'nope'"):
        coded_data.banner_variable(study, "nope")


def test_bad_weights_and_one_category_banner(study_path, tmp_path):
    path = copy_study(study_path, tmp_path / "copy")
    with Study.open(path) as study:
        n = survey_data.respondent_count(study)
        add_numeric(study, "w_empty", np.full(n, np.nan))
        negative = np.ones(n)
        negative[5] = -2.0
        add_numeric(study, "w_negative", negative)
        add_numeric(study, "one_group", np.ones(n), kind="single", labels={1.0: "everyone"})
        question = coded_data.table_question(coded_data.load_coding(study, "why"))
        with pytest.raises(OpenCodeError, match="'w_empty' is empty"):
            coded_data.survey_weight(study, "w_empty")
        with pytest.raises(OpenCodeError, match="negative"):
            code_frequencies(question, coded_data.survey_weight(study, "w_negative"))
        with pytest.raises(OpenCodeError, match="fewer than two categories"):
            banner_table(question, [coded_data.banner_variable(study, "one_group")])


def test_base_of_zero_gives_no_percentages(study_path, tmp_path):
    path = copy_study(study_path, tmp_path / "copy")
    with Study.open(path) as study:
        texts = survey_data.verbatims(study, "why")
        mark_done(study, int(texts.loc[texts["nonanswer"], "verbatim_id"].iloc[0]), "zed")
        coding = coded_data.load_coding(study, "why", "zed")
        assert coding.answered.sum() == 0 and coding.non_answer.sum() > 0
        table = code_frequencies(coded_data.table_question(coding))
        assert table.base.n == 0 and table.small_base
        assert np.isnan(table.respondent_share).all()


def test_coded_dataset_for_export(study):
    dataset, codings = coded_data.coded_dataset(study, ["why"], "final", closed=["age_band"], with_text=True)
    assert dataset.id_name == "resp_id"
    # The study's weight always comes along (so the file can be weighted like the tables), as scale.
    assert [v.name for v in dataset.closed] == ["age_band", "weight", "why_status"]
    assert [v.measure for v in dataset.closed] == ["nominal", "scale", None]
    question = dataset.questions[0]
    numbers = {f.code for f in question.frame}
    assert numbers == {c.number for c in codings[0].codes + codings[0].nets}
    dense = codings[0].indicators.toarray()
    code_numbers = np.array([c.number for c in codings[0].codes])
    for row in np.flatnonzero(dense.any(axis=1))[:50]:
        assert sorted(question.codes[row]) == sorted(code_numbers[dense[row] > 0].tolist())
    with pytest.raises(OpenCodeError, match="exports carry single-choice and numeric"):
        coded_data.closed_variables(study, ["why"])
