"""Benchmark the library calls the desk makes at every key press, on a 20,000-verbatim study.

Each call (assign, codes_of, toggle, undo, redo, next uncoded, mark done) is timed REPEATS times and its median
printed beside a reference measured in the same run: one committed single-row SQLite write (an INSERT in its
own transaction on a scratch WAL file in the same folder, synchronous=NORMAL as the study), the least a
committed key press can cost.
Target: every call's median within 20 ms, and within 10 x the reference.
Usage: python bench/bench_desk_calls.py [--verbatims N]
"""

from __future__ import annotations

import argparse
import csv
import sqlite3
import statistics
import tempfile
import time
from pathlib import Path

from opencode.coding import assignments as A
from opencode.coding import frames, history
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study

REPEATS = 15
TARGET_MS = 20.0
TARGET_RATIO = 10.0


def _median_ms(call) -> float:
    """Median of REPEATS calls; call(i) acts on the i-th verbatim so that no repetition is a no-op."""
    times = []
    for i in range(REPEATS):
        start = time.perf_counter()
        call(i)
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1000


def _study(folder: Path, n: int) -> Study:
    source = folder / "s.csv"
    with open(source, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "why"])
        writer.writerows([[f"R{i}", f"answer {i} about parking and staff"] for i in range(n)])
    import_survey(folder / "t.study", source, ImportOptions(id_column="rid", questions=["why"]))
    study = Study.open(folder / "t.study")
    for number in range(1, 11):
        frames.add_code(study, "why", f"code {number}", number)
    ids = A.uncoded_ids(study, "why", "ash")
    for number in range(1, 11):  # half of them coded: realistic index sizes
        A.assign_many(study, [int(v) for v in ids[2 * (number - 1)::20]], number, "ash")
    return study


def _reference_ms(folder: Path) -> float:
    db = sqlite3.connect(folder / "reference.db", isolation_level=None)
    db.execute("PRAGMA journal_mode=WAL")
    db.execute("PRAGMA synchronous=NORMAL")  # as the study: WAL, committed per key press
    db.execute("CREATE TABLE t (a INTEGER, b INTEGER)")
    counter = iter(range(10**9))

    def write(_i):
        db.execute("BEGIN IMMEDIATE")
        db.execute("INSERT INTO t VALUES (?, ?)", (next(counter), 1))
        db.execute("COMMIT")
    ms = _median_ms(write)
    db.close()
    return ms


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--verbatims", type=int, default=20_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        study = _study(folder, args.verbatims)
        v = A.uncoded_ids(study, "why", "ash", limit=200)
        reference = _reference_ms(folder)
        calls = [("assign", lambda i: A.assign(study, int(v[i]), 3, "ash")),
                 ("codes_of", lambda i: A.codes_of(study, int(v[i]), "ash")),
                 ("toggle", lambda i: A.toggle(study, int(v[i]), 4, "ash")),
                 ("undo", lambda i: history.undo(study, "ash")),
                 ("redo", lambda i: history.redo(study, "ash")),
                 ("next uncoded", lambda i: A.uncoded_ids(study, "why", "ash", after=int(v[100 + i]), limit=1)),
                 ("mark done", lambda i: A.mark_done(study, int(v[50 + i]), "ash"))]
        print(f"{args.verbatims:,} verbatims; reference (one committed SQLite row): {reference:.2f} ms")
        ok = True
        for name, call in calls:
            ms = _median_ms(call)
            ratio = ms / reference if reference else float("inf")
            met = ms <= TARGET_MS and ratio <= TARGET_RATIO
            ok &= met
            print(f"  {name:<13} median {ms:6.2f} ms  ratio {ratio:5.1f} x  {'ok' if met else 'MISSED'}")
        study.close()
    print(f"target: each <= {TARGET_MS:.0f} ms and <= {TARGET_RATIO:.0f} x the reference: {'met' if ok else 'MISSED'}")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
