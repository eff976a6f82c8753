"""Benchmark: a full banner table with tests (100,000 respondents, 50 codes, 4 banner variables x 5 columns).

Target: <= 5 s. References measured in the same run: a plain pandas group-sum crosstab of the same codes by
the same banner variables (no tests), and statsmodels proportions_ztest looped over a sample of cells,
scaled to the table's number of cell pairs.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
import pandas as pd
from scipy import sparse
from statsmodels.stats.proportion import proportions_ztest

from opencode.analysis.tables.crosstab import BannerVariable, Code, CodedQuestion, Net, SurveyWeight, banner_table

TARGET_SECONDS = 5.0


def make_data(n: int, n_codes: int, n_vars: int, n_cats: int, seed: int = 0):
    """Synthetic coded question, banner and weight of the benchmark's size."""
    rng = np.random.default_rng(seed)
    rates = rng.uniform(0.01, 0.25, n_codes)
    indicators = sparse.csr_matrix(rng.random((n, n_codes)) < rates)
    answered = rng.random(n) < 0.92
    codes = [Code(i + 1, f"code {i + 1}") for i in range(n_codes)]
    nets = [Net(1000 + k, f"net {k}", tuple(range(5 * k + 1, 5 * k + 6))) for k in range(n_codes // 10)]
    question = CodedQuestion("q1", indicators, codes, answered, ~answered, nets)
    banner = []
    for v in range(n_vars):
        values = rng.integers(1, n_cats + 1, n).astype(float)
        values[rng.random(n) < 0.02] = np.nan
        banner.append(BannerVariable(f"var{v}", values, [(c, f"cat {c}") for c in range(1, n_cats + 1)]))
    weight = SurveyWeight("wt", rng.uniform(0.3, 3.0, n))
    return question, banner, weight


def pandas_reference(question: CodedQuestion, banner, weight) -> float:
    """Seconds for plain weighted and unweighted codes x banner group sums in pandas (no tests, no nets)."""
    dense = question.indicators.toarray()[question.answered].astype(float)
    start = time.perf_counter()
    frame = pd.DataFrame(dense)
    w = weight.values[question.answered]
    weighted = frame.mul(w, axis=0)
    for variable in banner:
        key = variable.values[question.answered]
        frame.groupby(key).sum()
        weighted.groupby(key).sum()
    return time.perf_counter() - start


def statsmodels_reference(table, sample: int = 300) -> tuple[float, int]:
    """Seconds for proportions_ztest over every (row, column pair) of the table, scaled from a sample."""
    rng = np.random.default_rng(1)
    rows = rng.integers(0, len(table.rows), sample)
    pairs = table.pair_columns[rng.integers(0, len(table.pair_columns), sample)]
    start = time.perf_counter()
    for r, (a, b) in zip(rows, pairs):
        proportions_ztest(table.count[r, [a, b]], table.base_n[[a, b]])
    elapsed = time.perf_counter() - start
    total = len(table.rows) * len(table.pair_columns)
    return elapsed * total / sample, total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="20,000 respondents instead of 100,000")
    args = parser.parse_args()
    n = 20_000 if args.quick else 100_000
    question, banner, weight = make_data(n, 50, 4, 5)

    start = time.perf_counter()
    table = banner_table(question, banner, weight, lower_confidence=0.90, adjust_pairs=True)
    seconds = time.perf_counter() - start
    pandas_seconds = pandas_reference(question, banner, weight)
    sm_seconds, n_tests = statsmodels_reference(table)
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    print(f"respondents {n:,}, rows {len(table.rows)} (50 codes + nets), columns {len(table.columns)} (Total + 4 x 5)")
    print(f"banner table with z-tests, row chi-squares, BH: {seconds:.3f} s")
    print(f"reference pandas group-sum crosstab (no tests): {pandas_seconds:.3f} s  ratio {seconds / pandas_seconds:.2f}")
    print(f"reference statsmodels proportions_ztest x {n_tests} cell pairs (scaled from 300): {sm_seconds:.3f} s"
          f"  ratio {seconds / sm_seconds:.2f}")
    print(f"peak memory {peak_mb:.0f} MB")
    print(f"target <= {TARGET_SECONDS:.1f} s: {'PASS' if seconds <= TARGET_SECONDS else 'FAIL'}")


if __name__ == "__main__":
    main()
