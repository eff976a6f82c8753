"""Benchmark: the study -> table inputs mapping (load_coding) at 100,000 respondents x 50 codes.

Reference measured in the same run: reading the same coder's assignment rows with pandas and building the
respondents x codes matrix with pandas.crosstab (what a hand-written script would do). Target: load_coding
takes at most 3x the reference and under 10 s.
"""

from __future__ import annotations

import csv
import resource
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from opencode.analysis.tables.coded_data import load_coding, table_question
from opencode.analysis.tables.crosstab import code_frequencies
from opencode.coding import frame_io
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import survey_data
from opencode.study.store import Study, now

RESPONDENTS = 100_000
CODES = 50
RATIO_TARGET = 3.0
SECONDS_TARGET = 10.0


def build(folder: Path, rng: np.random.Generator) -> Path:
    """A survey CSV imported in bulk, a 50-code frame, and ~2 hand codes per verbatim inserted in one transaction."""
    survey = folder / "big.csv"
    words = np.array(["open", "late", "staff", "safe", "study", "quiet", "cost", "family", "bus", "hours"])
    with open(survey, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "why", "age"])
        picks = rng.integers(0, len(words), size=(RESPONDENTS, 6))
        ages = rng.integers(1, 6, size=RESPONDENTS)
        writer.writerows((f"R{i}", " ".join(words[picks[i]]), ages[i]) for i in range(RESPONDENTS))
    frame = folder / "frame.csv"
    with open(frame, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["number", "label", "kind", "net"])
        writer.writerows([(100, "first half", "net", ""), (101, "second half", "net", "")])
        writer.writerows((c, f"code {c}", "code", 100 if c <= CODES // 2 else 101) for c in range(1, CODES + 1))
    path = folder / "big.study"
    import_survey(path, survey, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        frame_io.import_frame(study, "why", frame)
        verbatim_ids = survey_data.verbatims(study, "why")["verbatim_id"].to_numpy()
        code_ids = dict(study._db.execute("SELECT number, id FROM codes"))
        per = rng.integers(0, 4, size=verbatim_ids.size)
        rows = np.repeat(verbatim_ids, per)
        numbers = rng.integers(1, CODES + 1, size=rows.size)
        pairs = pd.DataFrame({"v": rows, "c": numbers}).drop_duplicates()
        stamp = now()
        with study.transaction():  # fixture building only: bulk rows straight into the table
            study._db.executemany(
                "INSERT INTO assignments (verbatim_id, code_id, coder, source, confidence, created_at) "
                "VALUES (?, ?, 'final', 'hand', NULL, ?)",
                ((int(v), code_ids[int(c)], stamp) for v, c in zip(pairs["v"], pairs["c"])))
    return path


def reference(path: Path) -> tuple[float, int]:
    """Seconds to read the coder's assignments and crosstab them (respondent x code) with pandas."""
    start = time.perf_counter()
    with Study.open(path) as study:
        rows = pd.read_sql_query(
            "SELECT r.key, c.number FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
            "JOIN respondents r ON r.id = v.respondent_id JOIN codes c ON c.id = a.code_id "
            "WHERE a.coder = 'final' AND a.source = 'hand'", study._db)
    table = pd.crosstab(rows["key"], rows["number"])
    return time.perf_counter() - start, int(table.to_numpy().sum())


def measured(path: Path) -> tuple[float, int]:
    """Seconds for load_coding (and the frequency table on top of it, reported apart)."""
    start = time.perf_counter()
    with Study.open(path) as study:
        coding = load_coding(study, "why")
    seconds = time.perf_counter() - start
    start = time.perf_counter()
    code_frequencies(table_question(coding))
    print(f"frequency table on top: {time.perf_counter() - start:.2f} s")
    return seconds, int(coding.indicators.nnz)


def main() -> int:
    rng = np.random.default_rng(7)
    with tempfile.TemporaryDirectory() as folder:
        start = time.perf_counter()
        path = build(Path(folder), rng)
        print(f"built {RESPONDENTS:,} respondents x {CODES} codes in {time.perf_counter() - start:.1f} s")
        ref_seconds, ref_count = reference(path)
        ours, count = measured(path)
    assert count == ref_count, (count, ref_count)
    ratio = ours / ref_seconds
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    ok = ratio <= RATIO_TARGET and ours <= SECONDS_TARGET
    print(f"load_coding: {ours:.2f} s; reference (pandas read + crosstab): {ref_seconds:.2f} s; ratio {ratio:.2f} "
          f"(target <= {RATIO_TARGET}, and <= {SECONDS_TARGET:.0f} s); assignments {count:,}; peak RSS {peak:,.0f} MB")
    print("PASS" if ok else "FAIL")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
