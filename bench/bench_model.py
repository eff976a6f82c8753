"""Benchmark the machine coder: train on 2,000 coded verbatims with 40 codes, suggest for 100,000, and one
suggestion for one verbatim. Reference measured in the same run: scikit-learn OneVsRestClassifier(
LogisticRegression) fit / predict_proba on the same term matrix. Data are invented (seeded word lists).

    /work/venv/bin/python bench/bench_model.py [--quick]
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.multiclass import OneVsRestClassifier

from opencode.coding.features import term_lists
from opencode.coding.machine import MachineCoder
from opencode.text.analyzer import Analyzer

TARGET_TOTAL = 20.0   # seconds: train on 2,000 + suggest for 100,000
TARGET_ONE = 0.020    # seconds: one suggestion for one verbatim


def invented_corpus(n: int, n_codes: int, rng: np.random.Generator) -> tuple[list[str], np.ndarray]:
    """Answers built from a shared filler vocabulary plus a few marker words per code (1-3 codes each)."""
    syllables = ["ka", "lo", "mi", "ra", "tu", "ve", "no", "si", "da", "pe", "fo", "gu"]
    words = sorted({a + b + c for a in syllables for b in syllables for c in syllables})
    rng.shuffle(words)
    markers = [words[i * 6:(i + 1) * 6] for i in range(n_codes)]
    filler = words[n_codes * 6:]
    labels = np.zeros((n, n_codes), dtype=bool)
    texts = []
    for i in range(n):
        chosen = rng.choice(n_codes, size=rng.integers(1, 4), replace=False)
        labels[i, chosen] = True
        parts = list(rng.choice(filler, size=rng.integers(4, 20)))
        for c in chosen:
            parts += list(rng.choice(markers[c], size=rng.integers(1, 3)))
        rng.shuffle(parts)
        texts.append(" ".join(parts))
    return texts, labels


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="10,000 verbatims to suggest for instead of 100,000")
    args = parser.parse_args()
    n_train, n_codes = 2_000, 40
    n_suggest = 10_000 if args.quick else 100_000
    rng = np.random.default_rng(7)
    texts, labels = invented_corpus(n_train + n_suggest, n_codes, rng)
    analyzer = Analyzer()
    train_texts, new_texts, y = texts[:n_train], texts[n_train:], labels[:n_train]

    start = time.perf_counter()
    model = MachineCoder(random_state=0).fit(term_lists(analyzer, train_texts), y, list(range(1, n_codes + 1)))
    trained = time.perf_counter()
    proba = model.predict_proba(model.transform(analyzer, new_texts))
    ours_total = time.perf_counter() - start
    print(f"ours: train {trained - start:.2f} s (with 5-fold cross-validation and calibration), "
          f"suggest for {n_suggest:,} {ours_total - (trained - start):.2f} s, total {ours_total:.2f} s")

    X_train = model.vectorizer_.transform(term_lists(analyzer, train_texts))
    X_new = model.vectorizer_.transform(term_lists(analyzer, new_texts))
    start = time.perf_counter()
    reference = OneVsRestClassifier(LogisticRegression(solver="liblinear")).fit(X_train, y)
    reference.predict_proba(X_new)
    reference_total = time.perf_counter() - start
    print(f"reference (sklearn one-vs-rest LogisticRegression fit + predict_proba on the same matrix, "
          f"no cross-validation, no text analysis): {reference_total:.2f} s")
    print(f"ratio ours / reference: {ours_total / reference_total:.1f}")

    one_texts = new_texts[:200]
    model.suggest_text(analyzer, one_texts[0])
    times = []
    for text in one_texts:
        t0 = time.perf_counter()
        model.suggest_text(analyzer, text)
        times.append(time.perf_counter() - t0)
    one = float(np.median(times))
    worst = float(np.max(times))
    agreement = float(((proba >= 0.5) == labels[n_train:]).mean())
    print(f"one suggestion: median {one * 1000:.2f} ms, worst {worst * 1000:.2f} ms of {len(times)}")
    print(f"cell accuracy of the suggestions on the invented data: {agreement:.3f}")
    print(f"peak memory: {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB")
    verdict_total = "PASS" if ours_total <= TARGET_TOTAL else "FAIL"
    print(f"train + suggest: {ours_total:.2f} s, target <= {TARGET_TOTAL:.0f} s"
          f"{' (quick run: fewer verbatims)' if args.quick else ''}: {verdict_total}")
    print(f"one suggestion: {one * 1000:.2f} ms, target <= {TARGET_ONE * 1000:.0f} ms: "
          f"{'PASS' if one <= TARGET_ONE else 'FAIL'}")


if __name__ == "__main__":
    main()
