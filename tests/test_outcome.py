"""Outcome building for drivers: binary variables, scale splits, one-versus-rest, missing codes, bad input."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from opencode.analysis.drivers.outcome import MIN_GROUP, make_outcome, one_vs_rest, parse_split, small_group_warning
from opencode.errors import OpenCodeError

SUPPORT_LABELS = {1: "strongly oppose", 2: "oppose", 3: "neither", 4: "support", 5: "strongly support",
                  9: "refused"}


def scale_values():
    # 1..5 scale, 9 = refused, NaN = empty (layout invented for the test).
    return np.array([1, 2, 3, 4, 5, 9, np.nan, 5, 4, 3, 2, 1, 5, 5, 9, np.nan, np.nan, 2] * 3)


def test_binary_variable_is_used_as_is_with_higher_code_as_side_one():
    values = np.array([1, 2, 2, 1, np.nan, 8, 2])
    out = make_outcome(values, variable="kids", value_labels={1: "yes", 2: "no", 8: "don't know"},
                       missing_codes=[8])
    assert out.y.tolist() == [0, 1, 1, 0, 1]
    assert out.mask.tolist() == [True, True, True, True, False, False, True]
    assert (out.n_empty, out.n_missing_code, out.n_outside_split, out.n_excluded) == (1, 1, 0, 2)
    assert out.labels == ("yes", "no")
    assert out.counts == (2, 3)


def test_top2_against_bottom2_excludes_middle_and_missing():
    values = scale_values()
    out = make_outcome(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9], split="top2")
    used = values[out.mask]
    assert set(used.tolist()) == {1.0, 2.0, 4.0, 5.0}
    np.testing.assert_array_equal(out.y, np.isin(used, [4, 5]).astype(int))
    assert out.n_empty == 9 and out.n_missing_code == 6
    assert out.n_outside_split == int((values == 3).sum())
    assert out.n_excluded + out.mask.sum() == len(values)
    assert out.labels == ("bottom 2 (strongly oppose / oppose)", "top 2 (support / strongly support)")
    assert out.codes == ((1.0, 2.0), (4.0, 5.0))


@pytest.mark.parametrize("spec", ["4,5 vs 1,2", "4-5 vs 1-2", "support, strongly support VS strongly oppose,oppose",
                                  "top2 vs bottom2", "Top-2"])
def test_equivalent_split_specs_give_the_same_outcome(spec):
    values = scale_values()
    reference = make_outcome(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9],
                             split="4,5 vs 1,2")
    out = make_outcome(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9], split=spec)
    np.testing.assert_array_equal(out.y, reference.y)
    np.testing.assert_array_equal(out.mask, reference.mask)


def test_rest_side_and_one_vs_rest():
    values = scale_values()
    out = make_outcome(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9],
                       split="top2 vs rest")
    assert out.n_outside_split == 0
    assert out.labels[0] == "all other answers (strongly oppose / oppose / neither)"
    views = one_vs_rest(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9])
    assert sorted(views) == [1.0, 2.0, 3.0, 4.0, 5.0]
    valid = ~np.isnan(values) & (values != 9)
    for code, view in views.items():
        np.testing.assert_array_equal(view.mask, valid)
        np.testing.assert_array_equal(view.y, (values[valid] == code).astype(int))
        assert view.labels[1] == SUPPORT_LABELS[int(code)]


def test_parse_split_returns_sides():
    one, zero, _ = parse_split("5 vs 1-3", [1, 2, 3, 4, 5])
    assert one == [5.0] and zero == [1.0, 2.0, 3.0]


def test_all_missing_names_the_variable():
    with pytest.raises(OpenCodeError, match="'support'.*every row is empty or a missing code"):
        make_outcome([np.nan, 9, 9, np.nan], variable="support", missing_codes=[9], split="top2")


def test_one_class_is_refused():
    with pytest.raises(OpenCodeError, match="'kids'.*one class"):
        make_outcome([1, 1, 1, np.nan], variable="kids")
    with pytest.raises(OpenCodeError, match="'support'.*one class"):
        make_outcome([4, 5, 3, 4], variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9],
                     split="4,5 vs 1,2")


@pytest.mark.parametrize("spec, message", [
    ("7 vs 1", "code 7 .* not a valid answer"),
    ("1,2 vs 2,3", "code 2 is on both sides"),
    ("4 5 1 2", "cannot read split"),
    ("top9", "needs 1..4 scale points"),
    ("rest vs rest", "'rest' on both sides"),
    ("loud vs 1", "'loud' in the split is neither a code nor a value label"),
])
def test_bad_split_specs(spec, message):
    with pytest.raises(OpenCodeError, match=message):
        make_outcome(scale_values(), variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9], split=spec)


def test_scale_without_split_asks_for_one():
    with pytest.raises(OpenCodeError, match="'support'.*choose a split"):
        make_outcome(scale_values(), variable="support", missing_codes=[9])


def test_text_values_are_refused_with_the_variable_name():
    with pytest.raises(OpenCodeError, match="'town'.*numeric codes"):
        make_outcome(["north", "south"], variable="town")


def test_small_groups_warn():
    out = make_outcome([1] * 5 + [2] * 40, variable="kids")
    assert out.warnings and "unstable" in out.warnings[0] and "'1' has 5" in out.warnings[0]
    assert small_group_warning(MIN_GROUP, MIN_GROUP) is None


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from([1.0, 2.0, 3.0, 4.0, 5.0, 9.0, np.nan]), min_size=1, max_size=80))
def test_rows_are_used_or_counted_as_excluded(values):
    # Property: every row is either used or counted once among the exclusions; y marks exactly the 4/5 answers.
    values = np.array(values)
    try:
        out = make_outcome(values, variable="support", value_labels=SUPPORT_LABELS, missing_codes=[9], split="top2")
    except OpenCodeError:
        used = values[np.isin(values, [1, 2, 4, 5])]
        assert not (np.isin(used, [4, 5]).any() and np.isin(used, [1, 2]).any())
        return
    assert out.mask.sum() + out.n_excluded == len(values)
    np.testing.assert_array_equal(out.y, np.isin(values[out.mask], [4, 5]).astype(int))
