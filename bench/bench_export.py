"""Benchmark: SPSS .sav export of 100,000 respondents x 50 codes (+ 5 nets), target <= 10 s.

Reference in the same run: a bare pyreadstat.write_sav of an equivalent plain DataFrame (same shape, no labels).
Usage: /work/venv/bin/python bench/bench_export.py [--quick]
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pyreadstat

from opencode.export.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode
from opencode.export.spss_stata import write_sav

TARGET_SECONDS = 10.0
N_CODES = 50
N_NETS = 5
REPEATS = 3


def best_of(repeats: int, action) -> float:
    """Fastest of several runs, in seconds (the machine may be busy with other work)."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        action()
        times.append(time.perf_counter() - start)
    return min(times)


def synthetic_dataset(n: int, seed: int = 0) -> CodedDataset:
    """Invented respondents with 0-5 codes each from a 50-code frame grouped into 5 nets."""
    rng = np.random.default_rng(seed)
    frame = [FrameCode(c, f"code {c}", net=100 + (c - 1) // 10) for c in range(1, N_CODES + 1)]
    frame += [FrameCode(100 + k, f"net {k}", is_net=True) for k in range(N_NETS)]
    counts = rng.integers(0, 6, size=n)
    flat = rng.integers(1, N_CODES + 1, size=int(counts.sum()))
    splits = np.split(flat, np.cumsum(counts)[:-1])
    codes = [set(s.tolist()) for s in splits]
    support = ClosedVariable("support", rng.integers(1, 6, size=n).tolist(), "Support",
                             {1: "strongly oppose", 5: "strongly support", 9: "refused"}, [9])
    question = CodedQuestion("why", "Why do you say that?", frame, codes)
    return CodedDataset(list(range(1, n + 1)), [question], [support], title="benchmark")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="10,000 respondents instead of 100,000")
    args = parser.parse_args()
    n = 10_000 if args.quick else 100_000
    ds = synthetic_dataset(n)
    n_indicators = N_CODES + N_NETS
    rng = np.random.default_rng(1)
    plain = pd.DataFrame({"respondent_id": np.arange(1, n + 1, dtype=np.int64), "support": rng.integers(1, 6, n).astype(float)})
    plain = pd.concat([plain, pd.DataFrame(rng.integers(0, 2, size=(n, n_indicators)).astype(np.int8),
                                           columns=[f"why_c{i}" for i in range(n_indicators)])], axis=1)
    with tempfile.TemporaryDirectory() as folder:
        pyreadstat.write_sav(plain.head(10), str(Path(folder) / "warm-up.sav"))  # first-call imports off the clock
        reference = best_of(REPEATS, lambda: pyreadstat.write_sav(plain, str(Path(folder) / "plain.sav")))
        measured = best_of(REPEATS, lambda: write_sav(ds, Path(folder) / "coded.sav"))
        written, _ = pyreadstat.read_sav(str(Path(folder) / "coded.sav"), metadataonly=True)
        assert len(written.columns) == plain.shape[1], "column count differs from the reference"
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    verdict = "PASS" if measured <= TARGET_SECONDS else "FAIL"
    print(f"respondents: {n:,}  codes: {N_CODES} + {N_NETS} nets  columns: {plain.shape[1]}")
    print(f"opencode write_sav (labels, value labels, missing, frame CSV): {measured:.2f} s (best of {REPEATS})")
    print(f"reference bare pyreadstat.write_sav (no labels):               {reference:.2f} s (best of {REPEATS})")
    print(f"ratio: {measured / reference:.2f}x   target: <= {TARGET_SECONDS:.0f} s   peak RSS: {peak_mb:.0f} MB   {verdict}")


if __name__ == "__main__":
    main()
