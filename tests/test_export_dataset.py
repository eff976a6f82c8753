"""The export input (CodedDataset) and its two layouts: multiple dichotomy and multiple category.

`small_dataset` (tests/helpers.py) is shared with the other export tests.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from opencode.errors import OpenCodeError
from opencode.export.dataset import (
    ClosedVariable,
    CodedDataset,
    CodedQuestion,
    FrameCode,
    build_table,
    safe_name,
    sibling_path,
)

from helpers import WHY_FRAME, small_dataset


def test_dichotomy_indicators_and_nets_count_once():
    table = build_table(small_dataset())
    d = table.data
    assert d["why_c1"].tolist() == [1, 0, 0, 0, 0, 1]
    assert d["why_c5"].tolist() == [0, 0, 0, 1, 1, 0]
    # A net counts a respondent once however many of its codes they got (CHECKS.md; common practice).
    assert d["why_c20"].tolist() == [1, 0, 0, 1, 0, 1]
    assert d["why_c21"].tolist() == [0, 1, 0, 1, 0, 1]
    assert d["change_c1"].tolist() == [1, 0, 1, 0, 0, 0]
    assert table.value_labels["why_c20"] == {0: "not coded", 1: "coded"}
    assert table.column_labels["why_c20"] == "why: net Safety"
    assert list(d.columns[:3]) == ["respondent_id", "support", "weight"]


def test_category_layout_holds_sorted_codes_with_labels():
    table = build_table(small_dataset(), mention_columns=True)
    d = table.data
    m = d[["why_m1", "why_m2", "why_m3"]].to_numpy()
    expected = np.array([[1, 2, np.nan], [3, np.nan, np.nan], [np.nan] * 3, [2, 4, 5], [5, np.nan, np.nan], [1, 3, np.nan]])
    np.testing.assert_array_equal(m, expected)
    assert "why_m4" not in d
    assert table.value_labels["why_m1"][4] == "Students need late study space"
    assert d[["change_m1", "change_m2"]].iloc[2].tolist() == [1, 2]


def test_nested_nets_roll_up():
    frame = [FrameCode(1, "a", net=10), FrameCode(10, "inner", net=30, is_net=True), FrameCode(30, "outer", is_net=True)]
    ds = CodedDataset(["x", "y"], [CodedQuestion("q", "Q", frame, [{1}, set()])])
    d = build_table(ds).data
    assert d[["q_c1", "q_c10", "q_c30"]].to_numpy().tolist() == [[1, 1, 1], [0, 0, 0]]


def test_frame_table_names_variables_and_nets():
    frame = build_table(small_dataset()).code_frame
    row = frame[(frame.question == "why") & (frame.code == 3)].iloc[0]
    assert (row.variable, row.kind, row.net) == ("why_c3", "code", 21)
    assert frame[frame.code == 20].kind.tolist() == ["net"]


def test_verbatims_masked_by_choice():
    masked = build_table(small_dataset(), verbatims="masked").data["why_text"]
    raw = build_table(small_dataset(), verbatims="raw").data["why_text"]
    assert masked[0] == "I'd feel unsafe, call me on [phone]"
    assert raw[0].endswith("07700 900123")
    assert masked[5] == "" and "why_text" not in build_table(small_dataset()).data


def test_names_are_valid_for_spss_and_stata():
    long_name = "Why do you say that about the Wrenfield library late opening proposal?"
    frame = [FrameCode(c, f"code {c}") for c in (1, 2, 123456)]
    questions = [
        CodedQuestion(long_name, "Q", frame, [{1}, {123456}]),
        CodedQuestion(long_name + " (second wave)", "Q", frame, [{2}, set()]),
        CodedQuestion("2nd öpen", "Q", frame, [set(), set()]),
    ]
    closed = [ClosedVariable("in", [1, 2]), ClosedVariable("WITH", [1, 2])]
    ds = CodedDataset([1, 2], questions, closed, id_name="to")
    names = list(build_table(ds, mention_columns=True, verbatims="omit").data.columns)
    assert len({n.lower() for n in names}) == len(names)
    for n in names:
        assert len(n) <= 32 and n[0].isalpha() and n.isascii()  # Stata: 32 chars; SPSS: 64, letter first
        assert n.lower() not in {"in", "with", "to"}
    assert safe_name("2nd öpen") == "v_2nd_open"


def test_text_ids_and_sibling_path(tmp_path):
    table = build_table(small_dataset(ids=["a1", "a2", "a3", "a4", "a5", "a6"]))
    assert table.data["respondent_id"].tolist() == ["a1", "a2", "a3", "a4", "a5", "a6"]
    assert sibling_path(tmp_path / "out.sav") == tmp_path / "out-frame.csv"


@pytest.mark.parametrize(
    ("build", "message"),
    [
        (lambda: CodedDataset([1, 1], []), "respondent id 1 appears more than once"),
        (lambda: CodedDataset([], []), "no respondents"),
        (lambda: CodedDataset([1, "a"], []), "all text or all whole numbers"),
        (lambda: CodedDataset([1], [CodedQuestion("q", "", [FrameCode(0, "zero")], [set()])]), "code 0 must be"),
        (lambda: CodedDataset([1], [CodedQuestion("q", "", [FrameCode(1, "a", net=2), FrameCode(2, "b")], [set()])]),
         "code 1 names net 2, which is not a net"),
        (lambda: CodedDataset([1], [CodedQuestion("q", "", [FrameCode(1, "a", net=2, is_net=True),
                                                           FrameCode(2, "b", net=1, is_net=True)], [set()])]),
         "contains itself"),
        (lambda: CodedDataset([1, 2], [CodedQuestion("q", "", [FrameCode(1, "a")], [set()])]), "codes for 1 respondents"),
        (lambda: CodedDataset([1], [CodedQuestion("q", "", [FrameCode(1, "a")], {7: [1]})]), "unknown respondent id 7"),
        (lambda: CodedDataset([1], [], [ClosedVariable("x", [1, 2])]), "variable 'x' has 2 values"),
        (lambda: CodedDataset([1], [CodedQuestion("q", "", [FrameCode(1, "a")], [set()])], [ClosedVariable("Q", [1])]),
         "is used twice"),
    ],
)
def test_bad_inputs_give_clear_errors(build, message):
    with pytest.raises(OpenCodeError, match=message):
        build()


def test_code_outside_frame_names_respondent_and_code():
    ds = CodedDataset(["r1", "r2"], [CodedQuestion("q", "", [FrameCode(1, "a")], [set(), {1, 7}])])
    with pytest.raises(OpenCodeError, match="respondent 'r2' has code 7, which is not in the code frame"):
        build_table(ds)


def test_bad_options_and_values():
    with pytest.raises(OpenCodeError, match="verbatims must be one of"):
        build_table(small_dataset(), verbatims="plain")
    no_text = CodedDataset([1], [CodedQuestion("q", "", [FrameCode(1, "a")], [set()])])
    with pytest.raises(OpenCodeError, match="has no verbatims"):
        build_table(no_text, verbatims="raw")
    with pytest.raises(OpenCodeError, match="'x' must hold numbers"):
        build_table(CodedDataset([1], [], [ClosedVariable("x", ["high"])]))


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sets(st.sampled_from([1, 2, 3, 4, 5, 20, 21]), max_size=4), min_size=1, max_size=30))
def test_vectorised_layouts_agree_with_a_plain_loop(code_sets):
    ds = CodedDataset(list(range(len(code_sets))), [CodedQuestion("why", "", WHY_FRAME, code_sets)])
    d = build_table(ds, mention_columns=True).data
    members = {20: {1, 2, 20}, 21: {3, 4, 21}}
    for i, codes in enumerate(code_sets):
        for c in (1, 2, 3, 4, 5):
            assert d.at[i, f"why_c{c}"] == int(c in codes)
        for net, inside in members.items():
            assert d.at[i, f"why_c{net}"] == int(bool(codes & inside))
        row = [int(v) for v in d.loc[i, [c for c in d.columns if "_m" in c]] if not np.isnan(v)]
        assert row == sorted(codes)
