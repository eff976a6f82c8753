"""Benchmark a coding team: 20 coders (separate processes) and a lead writing to one study at the same time.

Each coder commits 500 assignments as fast as the desk would (a hotkey press: one toggle, committed, then
the desk's read of the verbatim's codes), while the lead adjudicates (gives `final` codes) and relabels a
code now and then. The same work runs against a study on a local PostgreSQL server (started here, fsync on)
and against one SQLite study file, in the same run. Printed per store: assignments lost or duplicated (must
be 0), median / p95 / max commit latency of a press, the lead's latency, wall time, and for the file how
long writers waited for its single write lock (time to get into the write transaction). The PostgreSQL
target is a p95 under 50 ms; the ratio against the file is printed alongside.

    python bench/bench_team.py [--coders 20] [--per-coder 500] [--run-as USER] [--keep DIR]

As root, PostgreSQL must run as an ordinary account: pass --run-as (default when root: oecodepg, if it exists).
"""

from __future__ import annotations

import argparse
import contextlib
import multiprocessing as mp
import os
import pwd
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

TARGET_P95_MS = 50.0
N_CODES = 12
WORDS = ("library staff evening open late night safe security work shift students quiet space children family "
         "parking bus cost money waste jobs help computer books hours weekend access card door camera").split()


def build_file(folder: Path, n: int) -> Path:
    """A survey of n respondents, imported, with a frame of N_CODES codes (letters as hotkeys)."""
    import numpy as np

    from opencode.coding import frames
    from opencode.ingest.importer import ImportOptions, import_survey
    from opencode.study.store import Study

    rng = np.random.default_rng(11)
    survey = folder / "team.csv"
    with open(survey, "w", encoding="utf-8") as handle:
        handle.write("rid,why,support\n")
        for i in range(n):
            words = " ".join(rng.choice(WORDS, size=int(rng.integers(3, 20))))
            handle.write(f"R{i:05d},{words},{int(rng.integers(1, 6))}\n")
    path = folder / "team.study"
    import_survey(path, survey, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        for number in range(1, N_CODES + 1):
            frames.add_code(study, "why", f"Reason {number}", number=number, hotkey="abcdefghijkl"[number - 1])
    return path


def coder_process(target: str, coder: str, per_coder: int, seed: int, ready, start, results) -> None:
    """One coder at the desk: press, commit, read back the verbatim's codes; record each commit's latency."""
    import random

    from opencode.coding import assignments as coding
    from opencode.errors import StudyBusy, WriteFailed
    from opencode.study import survey_data
    from opencode.study.store import Study

    waits: list[float] = []
    original = Study.transaction

    @contextlib.contextmanager
    def timed(self):  # time to get into the write transaction: the wait for the file's write lock
        began = time.perf_counter()
        with original(self) as connection:
            if not getattr(self, "_timing_nested", False):
                waits.append(time.perf_counter() - began)
            self._timing_nested = True
            try:
                yield connection
            finally:
                self._timing_nested = False

    Study.transaction = timed
    random.seed(seed)
    latencies, retries = [], 0
    with Study.open(target) as study:
        ids = survey_data.verbatims(study, "why")["verbatim_id"].tolist()[:per_coder]
        ready.put(coder)
        start.wait()
        first = time.perf_counter()
        for verbatim in ids:
            number = random.randint(1, N_CODES)
            while True:
                began = time.perf_counter()
                try:
                    coding.toggle(study, verbatim, number, coder)
                except (StudyBusy, WriteFailed):
                    retries += 1  # the desk offers a retry; the press is repeated
                    continue
                latencies.append(time.perf_counter() - began)
                break
            coding.codes_of(study, verbatim, coder)  # what the desk reads to redraw
        last = time.perf_counter()
    results.put((coder, latencies, waits, retries, first, last))


def lead_process(target: str, per_coder: int, ready, start, stop, results) -> None:
    """The lead adjudicates while coders work: a final code per verbatim, a frame relabel every 100."""
    from opencode.coding import assignments as coding
    from opencode.coding import frames
    from opencode.errors import StudyBusy, WriteFailed
    from opencode.study import survey_data
    from opencode.study.store import Study

    latencies, retries, given = [], 0, 0
    with Study.open(target) as study:
        ids = survey_data.verbatims(study, "why")["verbatim_id"].tolist()[:per_coder]
        ready.put("final")
        start.wait()
        for i, verbatim in enumerate(ids):
            if stop.is_set():
                break
            began = time.perf_counter()
            try:
                if coding.assign(study, verbatim, 1 + i % N_CODES, "final"):
                    given += 1
                if i % 100 == 99:
                    frames.edit_code(study, "why", 1, actor="lead", label=f"Reason 1 (rev {i // 100})")
            except (StudyBusy, WriteFailed):
                retries += 1
                continue
            latencies.append(time.perf_counter() - began)
    results.put(("final", latencies, [], retries, given))


def run_team(target: str, coders: int, per_coder: int) -> dict:
    """Run every coder and the lead against one study; check nothing was lost; return the figures."""
    from opencode.study.store import Study

    context = mp.get_context("spawn")
    start, stop = context.Event(), context.Event()
    ready, results, lead_results = context.Queue(), context.Queue(), context.Queue()
    workers = [context.Process(target=coder_process, args=(target, f"c{i:02d}", per_coder, i, ready, start, results))
               for i in range(coders)]
    lead = context.Process(target=lead_process, args=(target, per_coder, ready, start, stop, lead_results))
    for process in [*workers, lead]:
        process.start()
    for _ in range(coders + 1):  # every process has imported oecode and opened the study
        ready.get(timeout=300)
    start.set()
    gathered = [results.get() for _ in workers]
    stop.set()
    wall = max(g[5] for g in gathered) - min(g[4] for g in gathered)
    lead_result = lead_results.get()
    for process in [*workers, lead]:
        process.join()
    latencies = [x for g in gathered for x in g[1]]
    waits = [x for g in gathered for x in g[2]]
    from opencode.coding import assignments as coding
    from opencode.study.assignments_store import audit_newest_first

    names = [f"c{i:02d}" for i in range(coders)]
    with Study.open(target) as study:
        table = coding.assignments(study, "why", names)
        held = table.groupby("coder").size().reindex(names, fill_value=0)
        audited = {name: sum(1 for _ in audit_newest_first(study, name)) for name in names}
        final = len(coding.assignments(study, "why", ["final"]))
    return {
        "wall": wall, "latencies": latencies, "waits": waits,
        "retries": sum(g[3] for g in gathered), "lead": lead_result[1], "lead_retries": lead_result[3],
        "lost": int((per_coder - held).clip(lower=0).sum()),
        "duplicated": int(table.duplicated(["verbatim_id", "number", "coder"]).sum())
        + int((held - per_coder).clip(lower=0).sum()),
        "audit_ok": all(audited[n] == per_coder for n in names),
        "final_expected": lead_result[4], "final_found": final,
    }


def _ms(values: list[float], q: float) -> float:
    if not values:
        return float("nan")
    ordered = sorted(values)
    return 1000 * ordered[min(len(ordered) - 1, int(q * len(ordered)))]


def report(name: str, figures: dict, coders: int, per_coder: int) -> None:
    lat = figures["latencies"]
    print(f"\n{name}")
    print(f"  assignments: {coders} coders x {per_coder} = {coders * per_coder:,}; lost {figures['lost']}, "
          f"duplicated {figures['duplicated']}; one audit row per press: {'yes' if figures['audit_ok'] else 'NO'}; "
          f"final codes given {figures['final_expected']}, "
          f"found {figures['final_found']}")
    print(f"  press commit latency: median {_ms(lat, 0.5):.1f} ms, p95 {_ms(lat, 0.95):.1f} ms, "
          f"max {1000 * max(lat):.1f} ms ({len(lat):,} presses, {figures['retries']} busy retries)")
    print(f"  lead (adjudication + frame edits): median {_ms(figures['lead'], 0.5):.1f} ms, "
          f"p95 {_ms(figures['lead'], 0.95):.1f} ms, {figures['lead_retries']} busy retries")
    print(f"  wall time {figures['wall']:.1f} s, {len(lat) / figures['wall']:.0f} presses/s across the team")
    waits = figures["waits"]
    if waits:
        print(f"  waiting to get the write transaction: median {_ms(waits, 0.5):.1f} ms, p95 {_ms(waits, 0.95):.1f} "
              f"ms, total {sum(waits):.1f} s over all writers")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--coders", type=int, default=20)
    parser.add_argument("--per-coder", type=int, default=500)
    parser.add_argument("--run-as", help="account to run PostgreSQL as (needed as root)")
    parser.add_argument("--keep", help="keep the study file and server folder here")
    args = parser.parse_args()
    from opencode.study import pg_local
    from opencode.study.transfer import push

    run_as = args.run_as
    if run_as is None and os.geteuid() == 0:
        with contextlib.suppress(KeyError):
            run_as = pwd.getpwnam("oecodepg").pw_name
    if not pg_local.find_program("initdb"):
        print(f"PostgreSQL is not installed: {pg_local.INSTALL_HINT}", file=sys.stderr)
        return 2
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="oecode-bench-", dir="/tmp"))
    folder.mkdir(parents=True, exist_ok=True)
    server_folder = Path(tempfile.mkdtemp(prefix="oecode-bench-pg-", dir="/tmp"))
    try:
        print(f"building a study of {max(args.per_coder, 600)} verbatims ...", flush=True)
        template = build_file(folder, max(args.per_coder, 600))
        sqlite_copy = folder / "team-file.study"
        shutil.copyfile(template, sqlite_copy)
        server = pg_local.start_local_server(server_folder, run_as=run_as, durable=True)
        address = server.address(study="bench_team")
        push(template, address, replace=True)
        print(f"PostgreSQL {server.address()} (fsync on); SQLite {sqlite_copy} (WAL, synchronous=NORMAL)", flush=True)
        print(f"{os.cpu_count()} CPUs shared by {args.coders + 1} client processes and the server; load average "
              f"before: {', '.join(f'{x:.1f}' for x in os.getloadavg())}", flush=True)
        pg = run_team(address, args.coders, args.per_coder)
        report("PostgreSQL server study", pg, args.coders, args.per_coder)
        lite = run_team(str(sqlite_copy), args.coders, args.per_coder)
        report("SQLite study file", lite, args.coders, args.per_coder)
        print(f"\nload average after: {', '.join(f'{x:.1f}' for x in os.getloadavg())}")
        p95_pg, p95_lite = _ms(pg["latencies"], 0.95), _ms(lite["latencies"], 0.95)
        ok = (pg["lost"] == pg["duplicated"] == lite["lost"] == lite["duplicated"] == 0 and pg["audit_ok"]
              and lite["audit_ok"] and pg["final_expected"] == pg["final_found"]
              and lite["final_expected"] == lite["final_found"])
        print(f"\nPostgreSQL p95 {p95_pg:.1f} ms against the target {TARGET_P95_MS:.0f} ms: "
              f"{'met' if p95_pg < TARGET_P95_MS else 'MISSED'}; server p95 / file p95 = {p95_pg / p95_lite:.0f}x, "
              f"longest file wait {1000 * max(lite['waits'] or [0]):.0f} ms against the server's "
              f"{1000 * max(pg['latencies']):.0f} ms; lost or duplicated assignments: {'none' if ok else 'SOME (a bug)'}")
        pg_local.stop_local_server(server_folder, run_as=run_as)
        return 0 if ok else 1
    finally:
        if not args.keep:
            shutil.rmtree(folder, ignore_errors=True)
        with contextlib.suppress(Exception):
            pg_local.stop_local_server(server_folder, run_as=run_as)
        shutil.rmtree(server_folder, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
