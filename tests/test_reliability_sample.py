"""Reliability samples: sizes, seeds, proportional stratified allocation (against scikit-learn's), bad input."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.model_selection import StratifiedShuffleSplit

from opencode.coding.reliability_sample import draw_reliability_sample, proportional_allocation, sample_size
from opencode.errors import OpenCodeError

IDS = [f"r{i:04d}" for i in range(500)]


def test_simple_random_size_membership_and_order():
    drawn = draw_reliability_sample(IDS, n=60, random_state=1)
    assert len(drawn) == 60 and len(set(drawn)) == 60 and set(drawn) <= set(IDS)
    assert drawn == sorted(drawn, key=IDS.index)


def test_percent_and_rounding():
    assert len(draw_reliability_sample(IDS, percent=10)) == 50
    assert sample_size(25, percent=10) == 3  # 2.5 rounds half up
    assert sample_size(3, percent=1) == 1  # never an empty sample


def test_seeded_and_reproducible():
    assert draw_reliability_sample(IDS, n=40, random_state=5) == draw_reliability_sample(IDS, n=40, random_state=5)
    assert draw_reliability_sample(IDS, n=40, random_state=5) != draw_reliability_sample(IDS, n=40, random_state=6)


def test_stratified_is_proportional():
    # Proportional allocation n_h = n N_h / N (Cochran 1977, Sampling Techniques, section 5.4).
    strata = ["north"] * 300 + ["east"] * 150 + ["west"] * 50
    drawn = draw_reliability_sample(IDS, n=50, strata=strata, random_state=2)
    by_id = dict(zip(IDS, strata))
    counts = {h: sum(by_id[i] == h for i in drawn) for h in ("north", "east", "west")}
    assert counts == {"north": 30, "east": 15, "west": 5}


@settings(max_examples=40, deadline=None)
@given(sizes=st.lists(st.integers(1, 60), min_size=1, max_size=6), frac=st.floats(0.05, 0.95), seed=st.integers(0, 999))
def test_allocation_close_to_sklearn_stratified_split(sizes, frac, seed):
    # Reference: scikit-learn StratifiedShuffleSplit allocates a stratified sample in proportion to class
    # sizes; both allocations sum to n and differ from each other by at most one per stratum.
    total = sum(sizes)
    n = max(1, int(round(frac * total)))
    quota = proportional_allocation(sizes, n)
    assert quota.sum() == n and (quota <= np.array(sizes)).all()
    assert np.all(np.abs(quota - n * np.array(sizes) / total) < 1)
    if len(sizes) > 1 and min(sizes) >= 2 and len(sizes) <= n <= total - len(sizes):
        y = np.repeat(np.arange(len(sizes)), sizes)
        split = StratifiedShuffleSplit(n_splits=1, test_size=n, random_state=seed)
        _, test = next(split.split(np.zeros(total), y))
        assert np.abs(np.bincount(y[test], minlength=len(sizes)) - quota).max() <= 1


def test_missing_stratum_values_form_their_own_stratum():
    strata = [None] * 100 + [float("nan")] * 100 + ["a"] * 300
    drawn = draw_reliability_sample(IDS, n=100, strata=strata, random_state=0)
    assert sum(IDS.index(i) < 200 for i in drawn) == 40


def test_bad_input_is_refused_with_clear_words():
    with pytest.raises(OpenCodeError, match="either a number of verbatims or a percentage"):
        draw_reliability_sample(IDS, n=5, percent=5)
    with pytest.raises(OpenCodeError, match="either a number"):
        draw_reliability_sample(IDS)
    with pytest.raises(OpenCodeError, match="asked for 600 verbatims but only 500"):
        draw_reliability_sample(IDS, n=600)
    with pytest.raises(OpenCodeError, match="whole number of 1 or more"):
        draw_reliability_sample(IDS, n=0)
    with pytest.raises(OpenCodeError, match="percentage must be above 0 and at most 100, got 150"):
        draw_reliability_sample(IDS, percent=150)
    with pytest.raises(OpenCodeError, match="no verbatims"):
        draw_reliability_sample([], n=1)
    with pytest.raises(OpenCodeError, match="verbatim id 'r0001' appears more than once"):
        draw_reliability_sample(IDS + ["r0001"], n=5)
    with pytest.raises(OpenCodeError, match="3 stratum values for 500 verbatims"):
        draw_reliability_sample(IDS, n=5, strata=["a", "b", "c"])
