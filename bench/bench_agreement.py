"""Benchmark: agreement on 100,000 verbatims x 3 coders x 50 codes, against reference libraries in the same run.

Timed against targets: (1) every per-code statistic (% agreement, Fleiss' kappa, Krippendorff's alpha,
Gwet's AC1) for all 50 codes, target 2 s; (2) 1,000 bootstrap resamples of all of them with percentile
intervals, target 20 s. Shown without target: the full result (adds MASI / Jaccard alpha, pair tables,
disputed units, confused codes) with and without intervals. References in the same run: the `krippendorff`
package looped over codes, and scikit-learn's cohen_kappa_score looped over codes for one coder pair.
Run: /work/venv/bin/python bench/bench_agreement.py [--quick]
"""

from __future__ import annotations

import argparse
import resource
import time

import krippendorff
import numpy as np
from sklearn.metrics import cohen_kappa_score

from opencode.analysis.agreement.core import CodingMatrix, measure_agreement
from opencode.analysis.agreement.bootstrap import bootstrap_totals, percentile_interval
from opencode.analysis.agreement.codes import CodeFeatures

CODERS = ("ash", "bryn", "machine")


def make_matrix(units: int, codes: int, seed: int = 0) -> CodingMatrix:
    """Invented double-coded data: skewed code prevalence, coders follow a hidden set 88-94% of the time."""
    rng = np.random.default_rng(seed)
    prevalence = 0.25 / np.arange(1, codes + 1) ** 0.8
    truth = rng.random((units, codes)) < prevalence
    faithful = np.array([0.94, 0.92, 0.88])[None, :, None]
    slip = rng.random((units, len(CODERS), codes)) < prevalence / 4
    present = np.where(rng.random((units, len(CODERS), codes)) < faithful, truth[:, None, :], slip)
    coded = rng.random((units, len(CODERS))) >= 0.05
    present &= coded[:, :, None]
    return CodingMatrix(tuple(range(units)), CODERS, tuple(range(1, codes + 1)), present, coded)


def timed(fn):
    start = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - start


def per_code_statistics(matrix: CodingMatrix) -> dict[str, np.ndarray]:
    features = CodeFeatures.from_matrix(matrix)
    return features.statistics(features.totals())


def reference_krippendorff(matrix: CodingMatrix) -> np.ndarray:
    return np.array([
        krippendorff.alpha(
            reliability_data=np.where(matrix.coded, matrix.present[:, :, c], np.nan).T.astype(float),
            level_of_measurement="nominal",
        )
        for c in range(len(matrix.codes))
    ])


def reference_cohen(matrix: CodingMatrix) -> np.ndarray:
    both = matrix.coded[:, 0] & matrix.coded[:, 1]
    return np.array([
        cohen_kappa_score(matrix.present[both, 0, c], matrix.present[both, 1, c]) for c in range(len(matrix.codes))
    ])


def verdict(seconds: float, target: float) -> str:
    return "PASS" if seconds <= target else "FAIL"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10,000 units and 200 resamples")
    args = parser.parse_args()
    units, resamples = (10_000, 200) if args.quick else (100_000, 1000)
    stat_target, boot_target = (2.0, 20.0)
    matrix = make_matrix(units, 50)
    print(f"data: {units:,} units x {len(CODERS)} coders x 50 codes; {int(matrix.pairable.sum()):,} pairable")

    ours, t_stats = timed(lambda: per_code_statistics(matrix))
    ref_alpha, t_kripp = timed(lambda: reference_krippendorff(matrix))
    print(f"per-code statistics (4 statistics x 50 codes): {t_stats:.3f} s  target <= {stat_target} s  "
          f"{verdict(t_stats, stat_target)}")
    print(f"  reference krippendorff.alpha looped over 50 codes (alpha only): {t_kripp:.3f} s; "
          f"ratio ours/reference {t_stats / t_kripp:.3f}; max |alpha diff| "
          f"{np.nanmax(np.abs(ours['krippendorff_alpha'] - ref_alpha)):.2e}")

    pair = CodingMatrix(matrix.units, CODERS[:2], matrix.codes, matrix.present[:, :2], matrix.coded[:, :2])
    ours_pair, t_pair = timed(lambda: per_code_statistics(pair))
    ref_kappa, t_sk = timed(lambda: reference_cohen(pair))
    print(f"two-coder per-code statistics (7 statistics x 50 codes): {t_pair:.3f} s")
    print(f"  reference sklearn cohen_kappa_score looped over 50 codes (kappa only): {t_sk:.3f} s; "
          f"ratio ours/reference {t_pair / t_sk:.3f}; max |kappa diff| "
          f"{np.nanmax(np.abs(ours_pair['cohen_kappa'] - ref_kappa)):.2e}")

    def per_code_bootstrap():
        features = CodeFeatures.from_matrix(matrix)
        samples = features.statistics(bootstrap_totals([features.columns], resamples, 0)[0])
        return {name: percentile_interval(values) for name, values in samples.items()}

    intervals, t_boot = timed(per_code_bootstrap)
    low, high = intervals["fleiss_kappa"]
    inside = np.mean((low <= ours["fleiss_kappa"]) & (ours["fleiss_kappa"] <= high))
    print(f"per-code bootstrap, {resamples:,} resamples x 4 statistics x 50 codes (incl. Krippendorff's alpha and "
          f"Fleiss' kappa): {t_boot:.3f} s  target <= {boot_target} s  {verdict(t_boot, boot_target)}")
    print(f"  per resample {1000 * t_boot / resamples:.2f} ms vs one krippendorff-package pass {1000 * t_kripp:.0f} ms "
          f"(ratio {t_boot / resamples / t_kripp:.4f}); kappa point inside its interval for {inside:.0%} of codes")

    result, t_full = timed(lambda: measure_agreement(matrix, n_resamples=0))
    print(f"full result without intervals (per code, MASI and Jaccard alpha over {result.n_distinct_sets:,} distinct "
          f"code sets, pair tables, disputes): {t_full:.3f} s (no target)")
    boot, t_all = timed(lambda: measure_agreement(matrix, n_resamples=resamples, random_state=0))
    masi = boot.frame["alpha_masi"]
    print(f"full result with {resamples:,} resamples: {t_all:.3f} s (no target); MASI alpha {masi.value:.4f}, "
          f"interval {'none' if masi.low is None else f'[{masi.low:.4f}, {masi.high:.4f}]'}; {masi.words}")
    print(f"peak memory: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")


if __name__ == "__main__":
    main()
