"""Import speed and memory: a generated 1,000,000-row CSV with one open question into a study.

Reference, measured in the same run: pandas.read_csv + DataFrame.to_sql of the same file into a plain SQLite
file. Target: ratio <= 1.5 and peak memory <= 2 GB. Each side runs in its own process so peaks are separate;
the two sides alternate `--repeats` times and the best time of each counts (a shared machine is noisy).
Run: python bench/bench_ingest.py [--rows N] [--repeats R]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

WORDS = ("library open late staff safe evening study quiet children books hours self service access card "
         "night cost jobs students work parking bus light warm wifi desk printer cafe weekend closed").split()


def make_csv(path: Path, rows: int, seed: int = 1) -> None:
    """A survey-like CSV: id, one open question (3-30 words), two closed items and a weight."""
    rng = np.random.default_rng(seed)
    lengths = rng.integers(3, 31, size=rows)
    words = np.array(WORDS)[rng.integers(0, len(WORDS), size=int(lengths.sum()))]
    cuts = np.cumsum(lengths)[:-1]
    texts = [" ".join(chunk) for chunk in np.split(words, cuts)]
    support = rng.integers(1, 6, size=rows)
    age = rng.integers(1, 7, size=rows)
    weight = np.round(rng.uniform(0.4, 2.5, size=rows), 3)
    with open(path, "w", encoding="utf-8") as handle:
        handle.write("resp_id,why,support,age_band,weight\n")
        for i in range(rows):
            handle.write(f"R{i:07d},\"{texts[i]}\",{support[i]},{age[i]},{weight[i]}\n")


def run_side(side: str, csv_path: str, out: str) -> None:
    start = time.perf_counter()
    if side == "opencode":
        from opencode.ingest.importer import ImportOptions, import_survey

        import_survey(out, csv_path, ImportOptions("resp_id", ["why"], weight="weight"))
    else:
        import sqlite3

        import pandas as pd

        frame = pd.read_csv(csv_path)
        connection = sqlite3.connect(out)
        frame.to_sql("survey", connection, index=False)
        connection.commit()
        connection.close()
    seconds = time.perf_counter() - start
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"seconds": seconds, "peak_mb": peak_mb}))


def measure(side: str, csv_path: Path, folder: Path) -> dict:
    out = folder / ("bench.study" if side == "opencode" else "reference.sqlite")
    result = subprocess.run([sys.executable, __file__, "--side", side, "--csv", str(csv_path), "--out", str(out)],
                            check=True, capture_output=True, text=True)
    return json.loads(result.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--side")
    parser.add_argument("--csv")
    parser.add_argument("--out")
    args = parser.parse_args()
    if args.side:
        run_side(args.side, args.csv, args.out)
        return
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        csv_path = folder / "survey.csv"
        make_csv(csv_path, args.rows)
        size_mb = csv_path.stat().st_size / 1e6
        runs = {"reference": [], "opencode": []}
        for _ in range(args.repeats):
            for side in runs:
                runs[side].append(measure(side, csv_path, folder))
                (folder / ("bench.study" if side == "opencode" else "reference.sqlite")).unlink()
        reference = min(runs["reference"], key=lambda r: r["seconds"])
        ours = min(runs["opencode"], key=lambda r: r["seconds"])
    ratio = ours["seconds"] / reference["seconds"]
    print(f"rows: {args.rows:,}  csv: {size_mb:.0f} MB  (best of {args.repeats} alternating runs per side)")
    print(f"reference pandas.read_csv + to_sql: {reference['seconds']:.2f} s, peak {reference['peak_mb']:.0f} MB")
    print(f"opencode import into a study:       {ours['seconds']:.2f} s, peak {ours['peak_mb']:.0f} MB")
    print(f"ratio {ratio:.2f} (target <= 1.5): {'PASS' if ratio <= 1.5 else 'FAIL'}; "
          f"peak memory {ours['peak_mb']:.0f} MB (target <= 2048): {'PASS' if ours['peak_mb'] <= 2048 else 'FAIL'}")


if __name__ == "__main__":
    main()
