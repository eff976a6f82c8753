"""Intervals and tests of banner tables against references: Wilson (statsmodels proportion_confint), Fisher's
exact test (scipy.stats.fisher_exact) and the first-order Rao-Scott correction (R's survey package, svychisq)."""

from __future__ import annotations

import subprocess

import numpy as np
import pandas as pd
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.stats import chi2, chi2_contingency, fisher_exact
from statsmodels.stats.proportion import proportion_confint

from opencode.analysis.tables.crosstab import BannerVariable, Code, CodedQuestion, SurveyWeight, banner_table, code_frequencies
from opencode.analysis.tables.output import format_table
from opencode.analysis.tables.significance import fisher_two_sided, rao_scott_rows, wilson_interval

from helpers import require_program


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 400), data=st.data(), confidence=st.sampled_from([0.9, 0.95, 0.99]))
def test_wilson_matches_statsmodels(n, data, confidence):
    # Wilson (1927); reference statsmodels.stats.proportion.proportion_confint(method="wilson").
    x = data.draw(st.integers(0, n))
    low, high = wilson_interval(x / n, n, confidence)
    ref = proportion_confint(x, n, alpha=1 - confidence, method="wilson")
    assert (float(low), float(high)) == pytest.approx(ref, abs=1e-12)


def test_wilson_undefined_without_base():
    low, high = wilson_interval(np.array([np.nan, 0.5]), np.array([0, 10]))
    assert np.isnan(low[0]) and np.isnan(high[0]) and 0 < low[1] < 0.5 < high[1] < 1


def test_fisher_matches_scipy():
    # Reference: scipy.stats.fisher_exact(two-sided) on the same 2 x 2 tables.
    cases = [(3, 12, 9, 15), (0, 5, 5, 5), (7, 20, 30, 200), (1, 1, 0, 1)]
    ours = fisher_two_sided(*map(np.array, zip(*cases)))
    for (a, n1, b, n2), p in zip(cases, ours):
        assert p == pytest.approx(fisher_exact([[a, n1 - a], [b, n2 - b]]).pvalue, abs=1e-14)
    assert np.isnan(fisher_two_sided(0, 0, 1, 3))


def _small_column_table(weighted: bool = False):
    rng = np.random.default_rng(3)
    n = 300
    area = np.where(np.arange(n) < 14, 3.0, rng.integers(1, 3, n).astype(float))
    present = np.column_stack([np.where(area == 3, rng.random(n) < 0.8, rng.random(n) < 0.2), rng.random(n) < 0.4])
    question = CodedQuestion("q", present, [Code(1, "a"), Code(2, "b")], np.ones(n, bool))
    weights = rng.uniform(0.5, 2.0, n)
    weight = SurveyWeight("w", weights) if weighted else None
    table = banner_table(question, [BannerVariable("area", area, [(1, "n"), (2, "e"), (3, "w")])], weight)
    return table, present, area, weights


def test_small_columns_get_fisher_instead_of_nothing():
    table, present, area, _ = _small_column_table()
    assert table.small_base.tolist() == [False, False, False, True]
    pairs = [tuple(p) for p in table.pair_columns]
    for k, (a, b) in enumerate(pairs):
        assert table.pair_exact[k] == (b == 3)
        if b == 3:  # column 3 is area "w" (14 respondents): Fisher's exact on the 2 x 2 counts
            code_a, code_b = table.columns[a].code, table.columns[b].code
            x1, n1 = int(present[area == code_a, 0].sum()), int((area == code_a).sum())
            x2, n2 = int(present[area == code_b, 0].sum()), int((area == code_b).sum())
            assert table.pair_p[0, k] == pytest.approx(fisher_exact([[x1, n1 - x1], [x2, n2 - x2]]).pvalue)
    assert table.higher[0, 3, 1] == 2 and table.higher[0, 3, 2] == 2  # 80% in w against about 20%
    assert np.isnan(table.row_p).sum() == 0  # row tests still run over the columns with enough base
    text = format_table(table)
    assert "!AB" in text.replace(" ", "") and "Fisher's exact test" in text


def _cells(code, column, weights, k):
    present_w = np.array([weights[(column == j) & (code == 1)].sum() for j in range(k)])
    base_w = np.array([weights[column == j].sum() for j in range(k)])
    present_w2 = np.array([(weights**2)[(column == j) & (code == 1)].sum() for j in range(k)])
    base_w2 = np.array([(weights**2)[column == j].sum() for j in range(k)])
    base_n = np.array([(column == j).sum() for j in range(k)])
    return present_w, base_w, present_w2, base_w2, base_n


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), k=st.integers(2, 5), n=st.integers(30, 300))
def test_rao_scott_with_equal_weights_is_pearson(seed, k, n):
    # Defining property: all weights equal -> design effect exactly 1 -> the unweighted Pearson statistic
    # (reference scipy.stats.chi2_contingency, correction=False), whenever no cell is empty.
    rng = np.random.default_rng(seed)
    column = np.concatenate([np.arange(k), rng.integers(0, k, n - k)])
    code = (rng.random(n) < 0.2 + 0.3 * column / k).astype(int)
    code[:2] = [0, 1]
    observed = pd.crosstab(code, column).to_numpy()
    assume(observed.shape == (2, k) and (observed > 0).all())
    stat, df, p, deff = rao_scott_rows(*_cells(code, column, np.full(n, 2.5), k))
    ref = chi2_contingency(observed, correction=False)
    assert stat[0] == pytest.approx(ref.statistic, rel=1e-9) and p[0] == pytest.approx(ref.pvalue, rel=1e-7)
    assert df[0] == k - 1 and deff[0] == pytest.approx(1.0)


def test_rao_scott_weights_scale_free_and_no_variation():
    rng = np.random.default_rng(1)
    column, code, w = rng.integers(0, 3, 200), rng.integers(0, 2, 200), rng.lognormal(0, 0.7, 200)
    one = rao_scott_rows(*_cells(code, column, w, 3))
    ten = rao_scott_rows(*_cells(code, column, 10 * w, 3))
    assert one[0][0] == pytest.approx(ten[0][0]) and one[3][0] > 1  # variable weights: design effect above 1
    none = rao_scott_rows(*_cells(np.zeros(200, int), column, w, 3))
    assert none[0][0] == 0 and none[2][0] == 1


R_SCRIPT = """suppressMessages(library(survey))
for (path in commandArgs(TRUE)) {
  d <- read.csv(path)
  t <- svychisq(~code + col, svydesign(ids = ~1, weights = ~w, data = d), statistic = "Chisq")
  cat(sprintf("%.12g %.12g %d\\n", t$statistic, t$p.value, t$parameter))
}
"""


def test_rao_scott_matches_r_survey(tmp_path):
    # Reference: R's survey package (Lumley), svychisq(statistic = "Chisq"): the first-order Rao-Scott
    # correction, with design svydesign(ids = ~1, weights = ~w). R prints Pearson's X2 on the weighted table
    # scaled to n and takes p from X2 / mean(eigenvalues of Delta). Its design variance carries the
    # with-replacement factor n / (n - 1), which ours leaves out (equal weights -> design effect exactly 1),
    # so R's corrected statistic is ours times (n - 1) / n. Three tables, the last with an empty cell.
    rscript = require_program("Rscript")
    n, cases, paths = 400, [], []
    for seed, empty_cell in ((0, False), (1, False), (2, True)):
        rng = np.random.default_rng(seed)
        k = 3 + seed
        column = rng.integers(0, k, n)
        weights = rng.lognormal(0, 0.6, n) * np.where(column == 0, 2.0, 1.0)
        code = (rng.random(n) < 0.15 + 0.08 * column).astype(int)
        if empty_cell:
            code[column == 0] = 0  # nobody in column 0 has the code: R reads 1 / 0 as 0 there, and so do we
        paths.append(tmp_path / f"table{seed}.csv")
        pd.DataFrame({"code": code, "col": column, "w": weights}).to_csv(paths[-1], index=False)
        cases.append(rao_scott_rows(*_cells(code, column, weights, k)))
    script = tmp_path / "check.R"
    script.write_text(R_SCRIPT, encoding="utf-8")
    done = subprocess.run([rscript, str(script), *map(str, paths)], capture_output=True, text=True)
    if "no package called" in done.stderr:
        require_program("R survey package (library(survey) failed)")
    assert done.returncode == 0, done.stderr
    lines = done.stdout.strip().splitlines()
    assert len(lines) == 3
    for line, (stat, df, p, deff) in zip(lines, cases):
        r_pearson, r_p, r_df = line.split()
        assert int(r_df) == df[0]
        assert stat[0] * deff[0] == pytest.approx(float(r_pearson), rel=1e-8)  # the uncorrected Pearson X2
        assert stat[0] * (n - 1) / n == pytest.approx(chi2.isf(float(r_p), df[0]), rel=1e-6)


def test_weighted_banner_row_test_is_rao_scott():
    table, present, area, weights = _small_column_table(weighted=True)
    assert table.row_design_effect is not None and (table.row_design_effect[:, 0] > 1).all()
    assert "first-order Rao-Scott correction" in format_table(table)
    # The row test runs over the two columns with enough base (area 1 and 2; area 3 is too small).
    big = area < 3
    expected = rao_scott_rows(*_cells(present[big, 0].astype(int), area[big].astype(int) - 1, weights[big], 2))
    assert table.row_stat[0, 0] == pytest.approx(expected[0][0]) and table.row_p[0, 0] == pytest.approx(expected[2][0])
    unweighted = _small_column_table()[0]
    assert unweighted.row_design_effect is None


def test_intervals_shown_on_request():
    table, present, area, _ = _small_column_table()
    assert "(" not in format_table(table).split("Letters")[0].replace("(Kish)", "")
    table.show_intervals = True
    text = format_table(table)
    ref = proportion_confint(int(present[area == 1, 0].sum()), int((area == 1).sum()), method="wilson")
    assert f"({100 * ref[0]:.1f}-{100 * ref[1]:.1f})" in text and "Wilson (1927)" in text
    frequencies = code_frequencies(CodedQuestion("q", present, [Code(1, "a"), Code(2, "b")], np.ones(300, bool)))
    frequencies.show_intervals = True
    ftext = format_table(frequencies)
    ref = proportion_confint(int(present[:, 0].sum()), 300, method="wilson")
    assert "low" in ftext and f"{100 * ref[0]:.1f}" in ftext and f"{100 * ref[1]:.1f}" in ftext


def test_tables_ci_from_the_command_line(demo_copy, capsys):
    from opencode.cli import main

    assert main(["tables", str(demo_copy), "--question", "why", "--coder", "ash", "--banner", "support", "--ci"]) == 0
    out = capsys.readouterr().out
    assert "Wilson (1927) score interval" in out and "first-order Rao-Scott correction" in out
    assert main(["tables", str(demo_copy), "--question", "why", "--coder", "ash", "--ci"]) == 0
    out = capsys.readouterr().out
    assert "low" in out and "high" in out and "Wilson (1927)" in out
