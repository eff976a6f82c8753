"""Code frequencies and banner tables: hand-computed toys, pandas / scipy / statsmodels references, bad input."""

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import sparse
from scipy.stats import chi2_contingency
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.proportion import proportions_ztest

from opencode.analysis.tables.significance import two_proportion_z
from opencode.analysis.tables.crosstab import (
    BannerVariable, Code, CodedQuestion, Net, SurveyWeight, banner_table, code_frequencies,
)
from opencode.errors import OpenCodeError

CODES = [Code(1, "hours too short"), Code(2, "staff matter"), Code(3, "safety after dark")]


def toy_question(**changes) -> CodedQuestion:
    """Six respondents; respondent 5 is a non-answer whose stray code must be ignored."""
    indicators = np.array([[1, 1, 0], [1, 0, 0], [0, 0, 1], [0, 1, 1], [1, 0, 0], [0, 0, 1]], dtype=bool)
    fields = dict(
        name="why", indicators=indicators, codes=CODES,
        answered=np.array([1, 1, 1, 1, 0, 1], dtype=bool), non_answer=np.array([0, 0, 0, 0, 1, 0], dtype=bool),
        nets=[Net(10, "access", (1, 2))], respondent_ids=["r1", "r2", "r3", "r4", "r5", "r6"],
    )
    fields.update(changes)
    return CodedQuestion(**fields)


TOY_WEIGHT = SurveyWeight("wt", np.array([1, 2, 1, 0.5, 3, 1.5]))


def row_index(table, kind, number):
    return next(i for i, r in enumerate(table.rows) if r.kind == kind and r.number == number)


def test_weighted_frequencies_hand_computed():
    # Hand-computed: answered weights 1 + 2 + 1 + 0.5 + 1.5 = 6, sum w^2 = 8.5, n_eff = 36 / 8.5.
    # code 1: r1 + r2 = 3 (50%); code 2: r1 + r4 = 1.5 (25%); code 3: r3 + r4 + r6 = 3 (50%);
    # net (1, 2): r1 + r2 + r4 = 3.5 (58.3%, r1 once); mentions 3 + 1.5 + 3 = 7.5 -> 40%, 20%, 40%.
    t = code_frequencies(toy_question(), TOY_WEIGHT)
    assert (t.base.n, t.base.weighted) == (5, 6.0)
    assert t.base.effective == pytest.approx(36 / 8.5)
    share = {(r.kind, r.number): s for r, s in zip(t.rows, t.respondent_share)}
    assert share[("code", 1)] == pytest.approx(0.5)
    assert share[("code", 2)] == pytest.approx(0.25)
    assert share[("code", 3)] == pytest.approx(0.5)
    assert share[("net", 10)] == pytest.approx(3.5 / 6)
    mention = {(r.kind, r.number): s for r, s in zip(t.rows, t.mention_share)}
    assert [mention[("code", c)] for c in (1, 2, 3)] == pytest.approx([0.4, 0.2, 0.4])
    assert mention[("net", 10)] == pytest.approx(0.6)
    assert t.total_mentions == pytest.approx(7.5)
    assert (t.non_answer.n, t.non_answer.weighted, t.asked.weighted) == (1, 3.0, 9.0)
    assert t.non_answer_share == pytest.approx(1 / 3)
    counts = {(r.kind, r.number): c for r, c in zip(t.rows, t.count)}
    assert counts == {("net", 10): 3, ("code", 1): 2, ("code", 2): 2, ("code", 3): 3}


def test_unweighted_frequencies_and_row_order():
    t = code_frequencies(toy_question())
    assert [(r.kind, r.number, r.level) for r in t.rows] == [("net", 10, 0), ("code", 1, 1), ("code", 2, 1), ("code", 3, 0)]
    assert t.count.tolist() == [3, 2, 2, 3]
    assert t.respondent_share.tolist() == pytest.approx([0.6, 0.4, 0.4, 0.6])
    assert t.base == t.base.__class__(5, 5.0, 5.0)
    assert not t.weighted and t.small_base


def test_nested_nets_count_each_respondent_once():
    # common practice (no published source): a net counts a respondent once however many of its codes they got.
    nets = [Net(10, "access", (1, 2)), Net(20, "everything", (10, 3))]
    t = code_frequencies(toy_question(nets=nets))
    assert [(r.kind, r.number, r.level) for r in t.rows] == [
        ("net", 20, 0), ("net", 10, 1), ("code", 1, 2), ("code", 2, 2), ("code", 3, 1)]
    assert t.count[row_index(t, "net", 20)] == 5
    assert t.mentions[row_index(t, "net", 20)] == 7


def test_sparse_and_dense_inputs_agree():
    dense = code_frequencies(toy_question(), TOY_WEIGHT)
    sp = code_frequencies(toy_question(indicators=sparse.csr_matrix(toy_question().indicators)), TOY_WEIGHT)
    np.testing.assert_allclose(dense.respondent_share, sp.respondent_share)
    np.testing.assert_allclose(dense.mention_share, sp.mention_share)


def random_question(n=900, n_codes=6, seed=0, nets=True):
    rng = np.random.default_rng(seed)
    indicators = rng.random((n, n_codes)) < rng.uniform(0.05, 0.5, n_codes)
    answered = rng.random(n) < 0.9
    codes = [Code(i + 1, f"code {i + 1}") for i in range(n_codes)]
    frame_nets = [Net(100, "first two", (1, 2))] if nets else []
    return CodedQuestion("q", indicators, codes, answered, ~answered & (rng.random(n) < 0.5), frame_nets), rng


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10_000), st.integers(1, 8))
def test_mention_shares_add_to_100_and_nets_bounded(seed, n_codes):
    q, _ = random_question(n=200, n_codes=max(n_codes, 2), seed=seed)
    t = code_frequencies(q)
    code_rows = np.array([r.kind == "code" for r in t.rows])
    if t.total_mentions > 0:
        assert t.mention_share[code_rows].sum() == pytest.approx(1.0)
    net, members = row_index(t, "net", 100), [row_index(t, "code", 1), row_index(t, "code", 2)]
    assert t.count[members].max() <= t.count[net] <= t.count[members].sum()
    expected = (np.asarray(q.indicators)[:, :2].any(axis=1) & q.answered).sum()
    assert t.count[net] == expected


def banner_vars(rng, n):
    area = BannerVariable("area", rng.integers(1, 4, n).astype(float), [(1, "Ashmoor"), (2, "Brackenside"), (3, "Coldwell")], label="Neighbourhood")
    kids = rng.choice([1.0, 2.0, 9.0, np.nan], n, p=[0.4, 0.5, 0.05, 0.05])
    home = BannerVariable("kids", kids, [(1, "yes"), (2, "no"), (9, "refused")], missing=(9,), label="Children at home")
    return [area, home]


def test_banner_counts_and_shares_match_pandas():
    # Reference: pandas crosstab / weighted group means on the answered base.
    q, rng = random_question(seed=5)
    banner = banner_vars(rng, q.indicators.shape[0])
    w = SurveyWeight("wt", rng.uniform(0.3, 3.0, q.indicators.shape[0]))
    t = banner_table(q, banner, w)
    assert [c.label for c in t.columns] == ["Total", "Ashmoor", "Brackenside", "Coldwell", "yes", "no"]
    assert [c.letter for c in t.columns] == ["", "A", "B", "C", "D", "E"]
    ans = q.answered
    kids = pd.Series(banner[1].values).where(lambda s: s != 9)
    for r in range(len(t.rows)):
        row = t.rows[r]
        ind = np.asarray(q.indicators)[:, 0:2].any(axis=1) if row.kind == "net" else np.asarray(q.indicators)[:, row.number - 1]
        frame = pd.DataFrame({"ind": ind[ans], "w": w.values[ans], "area": banner[0].values[ans], "kids": kids[ans].values})
        counts = pd.crosstab(frame["ind"], frame["area"])
        assert t.count[r, 1:4].tolist() == counts.loc[True].tolist()
        frame["wi"] = frame["w"] * frame["ind"]
        sums = frame.groupby("kids")[["wi", "w"]].sum()
        np.testing.assert_allclose(t.column_share[r, 4:6], (sums["wi"] / sums["w"]).loc[[1.0, 2.0]].to_numpy())
        np.testing.assert_allclose(t.column_share[r, 0], frame["wi"].sum() / frame["w"].sum())
    # Missing code 9 and NaN leave the kids columns but stay in Total.
    assert t.base_n[0] == ans.sum()
    assert t.base_n[4] + t.base_n[5] == (ans & kids.isin([1, 2]).to_numpy()).sum()


def test_letters_agree_with_statsmodels_and_stay_within_each_variable():
    # Reference: statsmodels proportions_ztest on each pair of columns; letters only within one variable
    # (common practice).
    n = 3000
    rng = np.random.default_rng(8)
    area = rng.integers(1, 4, n).astype(float)
    age = rng.integers(1, 3, n).astype(float)
    # Code 1 depends strongly on area; age columns sit far below Ashmoor's share, so a cross-variable
    # comparison would flag them if it were (wrongly) made.
    p1 = np.select([area == 1, area == 2], [0.8, 0.3], 0.35)
    indicators = np.column_stack([rng.random(n) < p1, rng.random(n) < 0.3])
    q = CodedQuestion("q", indicators, [Code(1, "a"), Code(2, "b")], np.ones(n, bool))
    banner = [BannerVariable("area", area, [(1, "north"), (2, "east"), (3, "west")]),
              BannerVariable("age", age, [(1, "young"), (2, "old")])]
    t = banner_table(q, banner)
    area_cols, age_cols = [1, 2, 3], [4, 5]
    assert not t.higher[:, area_cols][:, :, age_cols].any()
    assert not t.higher[:, age_cols][:, :, area_cols].any()
    assert not t.higher[:, 0].any() and not t.higher[:, :, 0].any()
    letters = t.letters()
    assert letters[0, 1] == "BC"
    for r in range(2):
        for a in range(1, 6):
            for b in range(1, 6):
                if a == b or (a in area_cols) != (b in area_cols):
                    continue
                z, p = proportions_ztest(t.count[r, [a, b]], t.base_n[[a, b]])
                assert (t.columns[b].letter in letters[r, a]) == bool(p < 0.05 and z > 0)
                assert all(ch in "ABC" for ch in letters[r, a]) if a in area_cols else all(ch in "DE" for ch in letters[r, a])


def test_row_tests_match_scipy_and_bh_across_the_table():
    # Bilder & Loughin (2004): one chi-square per code row; reference scipy chi2_contingency and
    # statsmodels multipletests(method="fdr_bh") across all row tests of the table.
    q, rng = random_question(seed=2)
    banner = banner_vars(rng, q.indicators.shape[0])
    t = banner_table(q, banner)
    for r in range(len(t.rows)):
        for v, cols in enumerate(([1, 2, 3], [4, 5])):
            present = t.count[r, cols]
            ref = chi2_contingency(np.vstack([present, t.base_n[cols] - present]), correction=False)
            assert t.row_stat[r, v] == pytest.approx(ref.statistic)
            assert t.row_p[r, v] == pytest.approx(ref.pvalue)
    _, expected, _, _ = multipletests(t.row_p.ravel(), method="fdr_bh")
    np.testing.assert_allclose(t.row_q.ravel(), expected)


def test_weighted_tests_use_effective_bases():
    q, rng = random_question(seed=4)
    banner = banner_vars(rng, q.indicators.shape[0])
    w = rng.uniform(0.2, 4.0, q.indicators.shape[0])
    t = banner_table(q, banner, SurveyWeight("wt", w))
    values = {"area": banner[0].values, "kids": banner[1].values}
    for c, column in enumerate(t.columns):
        members = q.answered if column.variable is None else q.answered & (values[column.variable] == column.code)
        assert t.base_effective[c] == pytest.approx(w[members].sum() ** 2 / (w[members] ** 2).sum())
        assert t.base_effective[c] < t.base_n[c]
    pair = [i for i, (a, b) in enumerate(t.pair_columns) if (a, b) == (1, 2)][0]
    z, p = two_proportion_z(t.column_share[:, 1], t.base_effective[1], t.column_share[:, 2], t.base_effective[2])
    np.testing.assert_allclose(t.pair_p[:, pair], p)


def test_lower_case_letters_and_pair_adjustment():
    n = 400
    rng = np.random.default_rng(1)
    group = np.repeat([1.0, 2.0], n // 2)
    rates = np.linspace(0.2, 0.45, 12)
    indicators = np.column_stack([rng.random(n) < np.where(group == 1, r, 0.2) for r in rates])
    q = CodedQuestion("q", indicators, [Code(i, f"c{i}") for i in range(12)], np.ones(n, bool))
    banner = [BannerVariable("g", group, [(1, "one"), (2, "two")])]
    plain = banner_table(q, banner)
    lower = banner_table(q, banner, lower_confidence=0.90)
    adjusted = banner_table(q, banner, adjust_pairs=True)
    p = plain.pair_p[:, 0]
    between = (p >= 0.05) & (p < 0.10)
    assert between.any() and (p < 0.05).any()
    assert ((lower.higher[:, 1, 2] == 1) | (lower.higher[:, 2, 1] == 1)).tolist() == between.tolist()
    assert set(lower.letters()[between].ravel()) - {""} <= {"a", "b"}
    assert (adjusted.higher > 0).sum() <= (plain.higher > 0).sum()
    q_pairs = multipletests(p, method="fdr_bh")[1]
    assert (adjusted.higher[:, 1, 2] | adjusted.higher[:, 2, 1]).astype(bool).tolist() == (q_pairs < 0.05).tolist()


def test_small_and_empty_columns_are_flagged_and_not_z_tested():
    # common practice (no published source): bases under 30 flagged, not z-tested; with exact_small=False they
    # are not tested at all (by default Fisher's exact test compares them, see test_significance.py).
    n = 600
    rng = np.random.default_rng(9)
    area = np.where(np.arange(n) < 20, 3.0, rng.integers(1, 3, n).astype(float))
    indicators = np.column_stack([np.where(area == 3, True, rng.random(n) < 0.2), rng.random(n) < 0.5])
    q = CodedQuestion("q", indicators, [Code(1, "a"), Code(2, "b")], np.ones(n, bool))
    labels = [(1, "north"), (2, "east"), (3, "west"), (4, "nowhere")]
    t = banner_table(q, [BannerVariable("area", area, labels)], exact_small=False)
    assert t.base_n.tolist()[3:] == [20, 0]
    assert t.small_base.tolist() == [False, False, False, True, True]
    assert np.isnan(t.column_share[:, 4]).all()
    assert not t.higher[:, 3:].any() and not t.higher[:, :, 3:].any()
    ref = chi2_contingency(np.vstack([t.count[0, 1:3], t.base_n[1:3] - t.count[0, 1:3]]), correction=False)
    assert t.row_stat[0, 0] == pytest.approx(ref.statistic)


def test_zero_base_table_renders_without_tests():
    q = toy_question(answered=np.zeros(6, bool), non_answer=np.zeros(6, bool))
    t = banner_table(q, [BannerVariable("area", np.array([1, 2, 1, 2, 1, 2.0]), [(1, "n"), (2, "s")])])
    assert (t.base_n == 0).all() and np.isnan(t.column_share).all() and np.isnan(t.row_p).all()
    f = code_frequencies(q)
    assert f.base.n == 0 and np.isnan(f.respondent_share).all() and np.isnan(f.non_answer_share)


def test_bad_inputs_raise_clear_errors():
    q = toy_question()
    one = BannerVariable("tenure", np.array([1, 1, 1, 9, np.nan, 1.0]), [(1, "owner"), (2, "renter")], missing=(9,))
    with pytest.raises(OpenCodeError, match="banner variable 'tenure' has fewer than two categories"):
        banner_table(q, [one])
    empty = SurveyWeight("wt", np.array([1, 1, np.nan, 1, 1, 1]))
    with pytest.raises(OpenCodeError, match=r"survey weight 'wt' is empty .* row 3 \(respondent 'r3'\)"):
        code_frequencies(q, empty)
    negative = SurveyWeight("wt", np.array([1, 1, 1, 1, 1, -0.5]))
    with pytest.raises(OpenCodeError, match=r"survey weight 'wt' is negative \(-0.5\) at row 6"):
        banner_table(q, [BannerVariable("a", np.arange(6.0) % 2, [(0, "x"), (1, "y")])], negative)
    outside = SurveyWeight("wt", np.array([1, 1, 1, 1, 1, 1.0]))
    outside.values[4] = np.nan
    q_outside = toy_question(non_answer=np.zeros(6, bool))
    assert code_frequencies(q_outside, outside).base.n == 5
    with pytest.raises(OpenCodeError, match="has 2 values, expected 6"):
        code_frequencies(q, SurveyWeight("wt", np.ones(2)))
    with pytest.raises(OpenCodeError, match="net 10 lists unknown code 7"):
        code_frequencies(toy_question(nets=[Net(10, "x", (1, 7))]))
    with pytest.raises(OpenCodeError, match="nest one level only"):
        code_frequencies(toy_question(nets=[Net(10, "a", (1,)), Net(20, "b", (10,)), Net(30, "c", (20,))]))
    with pytest.raises(OpenCodeError, match="code 1 appears twice"):
        code_frequencies(toy_question(codes=[Code(1, "a"), Code(1, "b"), Code(3, "c")]))
    with pytest.raises(OpenCodeError, match="frame lists 2 codes"):
        code_frequencies(toy_question(codes=CODES[:2]))
    with pytest.raises(OpenCodeError, match=r"row 5 \(respondent 'r5'\) is marked both"):
        code_frequencies(toy_question(answered=np.ones(6, bool)))
    with pytest.raises(OpenCodeError, match="banner variable 'area' has 3 values"):
        banner_table(q, [BannerVariable("area", np.ones(3), [(1, "x")])])
    with pytest.raises(OpenCodeError, match="at least one banner variable"):
        banner_table(q, [])
    with pytest.raises(OpenCodeError, match="lower confidence"):
        banner_table(q, [BannerVariable("a", np.arange(6.0) % 2, [(0, "x"), (1, "y")])], lower_confidence=0.99)
