"""Benchmark the study's term-matrix cache: a cache hit against a rebuild, same run, same study.

The demo survey's two open questions replicated to 100,000 respondents (new ids), imported into a study
in a temporary folder; term_matrix() is timed with the cache cleared (rebuild: tokenize, count, store)
and then on a hit (verbatims query, hash, one SELECT, from_bytes). Target: a hit >= 10x faster.
Usage: python bench/bench_text_cache.py [--rows N]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import tempfile
import time
from pathlib import Path

import pandas as pd

from opencode.demo_job import demo_import_options
from opencode.ingest.importer import import_survey
from opencode.resources import demo_dir
from opencode.study.matrix_cache_store import cached_keys, clear_matrix_cache, load_matrix_blob
from opencode.study.store import Study
from opencode.study.survey_data import get_question, verbatims
from opencode.text.matrix import TermMatrix
from opencode.text.study_text import term_matrix

SPEEDUP_TARGET = 10.0
REPEATS = 3


def replicated_survey(folder: Path, rows: int) -> Path:
    """The demo CSV repeated to `rows` respondents with fresh ids (texts and closed-ended answers kept)."""
    demo = pd.read_csv(demo_dir() / "wrenfield.csv", dtype=str, keep_default_na=False)
    copies = rows // len(demo) + 1
    big = pd.concat([demo] * copies, ignore_index=True).iloc[:rows].copy()
    big["resp_id"] = [f"R{i:07d}" for i in range(rows)]
    path = folder / "big.csv"
    big.to_csv(path, index=False)
    return path


def timed(fn) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=100_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        study_path = folder / "big.study"
        import_survey(study_path, replicated_survey(folder, args.rows), demo_import_options())
        with Study.open(study_path) as study:
            question_id = get_question(study, "why").id
            rebuilds, hits = [], []
            for _ in range(REPEATS):
                clear_matrix_cache(study, question_id)
                rebuilds.append(timed(lambda: term_matrix(study, "why")))
                hits.append(timed(lambda: term_matrix(study, "why")))
            tm, frame = term_matrix(study, "why")
            key = cached_keys(study, question_id)[0]
            reads = [timed(lambda: verbatims(study, "why")) for _ in range(REPEATS)]
            loads = [timed(lambda: TermMatrix.from_bytes(load_matrix_blob(study, key))) for _ in range(REPEATS)]
    rebuild, hit = statistics.median(rebuilds), statistics.median(hits)
    ratio = rebuild / hit
    ok = ratio >= SPEEDUP_TARGET
    print(f"term_matrix on {len(frame):,} verbatims ({tm.counts.shape[0]:,} analysed, {tm.counts.shape[1]:,} terms, "
          f"nnz {tm.counts.nnz:,}); median of {REPEATS}")
    print(f"  rebuild (cache cleared): {rebuild:7.3f} s")
    print(f"  cache hit:               {hit:7.3f} s")
    print(f"    of which reading the verbatims (returned, and hashed to prove them unchanged): "
          f"{statistics.median(reads):.3f} s; SELECT + from_bytes: {statistics.median(loads):.3f} s")
    print(f"  rebuild vs SELECT + from_bytes alone: {rebuild / statistics.median(loads):.1f}x (not the target measure)")
    print(f"  speed-up {ratio:.1f}x (target >= {SPEEDUP_TARGET:.0f}x) {'PASS' if ok else 'FAIL'}")
    print(f"  peak memory {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024**2:.2f} GB")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
