"""Benchmark the coding desk on a big study: 100,000 verbatims, 60 codes, 70,000 codes already given.

Measures, in the app run by Textual's test pilot: time to the first drawn desk; the median time from a
hotkey press to the code being committed and the desk redrawn; peak memory. The reference, measured in the
same run, is a bare Textual app with one Static showing the same verbatim (first screen; a key that changes
its text). The study is generated in a separate process, so the memory figure is the desk's own.

Keypress time is measured twice. `pilot.press` + `pilot.pause` includes the pilot's own idle detection
(repeated sleeps until the process looks idle), about 80 ms even for the bare app, so it is printed but not
gated. The gated figure sends the same key event the pilot sends (through the app's driver) and stops the
clock when the screen has been repainted after the commit (a `call_after_refresh` callback queued by the
hotkey handler runs only after the compositor refresh).

    /work/venv/bin/python bench/bench_desk.py [--verbatims 100000] [--presses 200] [--keep DIR]
"""

from __future__ import annotations

import argparse
import asyncio
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

N_CODES = 60
HOTKEYS = [c for c in "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789"][:N_CODES]
TARGET_FIRST_SCREEN = 2.0
TARGET_KEYPRESS_MS = 30.0
TARGET_MEMORY_MB = 500.0
WORDS = ("library staff evening open late night safe security work shift students homework quiet space "
         "children family parking bus cost money tax waste jobs librarian help computer books study hours "
         "weekend access card door camera lonely older people young noise cafe heating chairs wifi print "
         "volunteer cleaning toilets garden events reading club sunday morning closed town council").split()


def generate(folder: Path, n: int) -> Path:
    """Write the survey, its frame and earlier codes, and import them (run in a child process)."""
    import numpy as np

    from opencode.coding.frame_io import import_frame
    from opencode.coding.import_codes import import_codes
    from opencode.ingest.importer import ImportOptions, import_survey
    from opencode.study.store import Study

    rng = np.random.default_rng(7)
    lengths = rng.integers(3, 40, n)
    words = np.array(WORDS)[rng.integers(0, len(WORDS), int(lengths.sum()))]
    bounds = np.concatenate([[0], np.cumsum(lengths)])
    ids = [f"R{i:06d}" for i in range(n)]
    survey = folder / "big.csv"
    with open(survey, "w", encoding="utf-8") as handle:
        handle.write("rid,why,support,age\n")
        support, age = rng.integers(1, 6, n), rng.integers(1, 7, n)
        for i in range(n):
            handle.write(f"{ids[i]},{' '.join(words[bounds[i]:bounds[i + 1]])},{support[i]},{age[i]}\n")
    frame = folder / "frame.csv"
    with open(frame, "w", encoding="utf-8") as handle:
        handle.write("number,label,kind,net,hotkey\n")
        for net in range(6):
            handle.write(f"{900 + net},Group {net + 1},net,,\n")
        for i, key in enumerate(HOTKEYS):
            handle.write(f"{i + 1},Reason number {i + 1} about {WORDS[i % len(WORDS)]},code,{900 + i % 6},{key}\n")
    study_path = folder / "big.study"
    import_survey(study_path, survey, ImportOptions("rid", ["why"]))
    with Study.open(study_path) as study:
        import_frame(study, "why", frame)
        for coder, count in (("bryn", 50_000), ("ash", 20_000)):
            codes = folder / f"codes-{coder}.csv"
            picks = rng.integers(1, N_CODES + 1, count)
            with open(codes, "w", encoding="utf-8") as handle:
                handle.write("rid,codes\n")
                for i in range(count):
                    handle.write(f"{ids[i]},{picks[i]}\n")
            import_codes(study, "why", ["codes"], coder=coder, source_path=codes, id_column="rid",
                         layout="delimited")
    return study_path


async def measure_desk(study_path: Path, presses: int):
    from textual import events

    from opencode.tui.app import DeskApp
    from opencode.tui.session import DeskSession

    start = time.perf_counter()
    app = DeskApp(DeskSession(study_path, "why", "ash"), refresh_seconds=0)
    timings = []
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        first = time.perf_counter() - start
        text = app.session.card().text
        await app.workers.wait_for_complete()
        desk = app.screen
        act = desk.act
        inside: list[float] = []

        repainted = asyncio.Event()

        def timed_act(change, report=None) -> None:  # what a hotkey runs: commit, then redraw the widgets
            t = time.perf_counter()
            act(change, report)
            inside.append(time.perf_counter() - t)
            app.call_after_refresh(repainted.set)
        desk.act = timed_act
        for i in range(presses):
            key = HOTKEYS[(i * 7) % N_CODES]
            t0 = time.perf_counter()
            await pilot.press(key)
            await pilot.pause()
            timings.append(time.perf_counter() - t0)
            if i % 3 == 2:
                await pilot.press("right")
        await pilot.pause()
        redrawn: list[float] = []
        for i in range(presses):  # the same key events, clock stopped at the repaint after the commit
            key = HOTKEYS[(i * 11) % N_CODES]
            repainted.clear()
            t0 = time.perf_counter()
            app._driver.send_message(events.Key(key, key))
            await asyncio.wait_for(repainted.wait(), timeout=10)
            redrawn.append(time.perf_counter() - t0)
        await pilot.pause()
    return first, timings, inside, text, redrawn


async def measure_reference(text: str, presses: int):
    from textual import events
    from textual.app import App
    from textual.widgets import Static

    repainted = asyncio.Event()

    class Bare(App):
        def compose(self):
            yield Static(text, id="only")

        def on_key(self, event) -> None:
            self.query_one("#only", Static).update(f"{event.character} {text}")
            self.call_after_refresh(repainted.set)

    start = time.perf_counter()
    app = Bare()
    timings, redrawn = [], []
    async with app.run_test(size=(100, 30)) as pilot:
        await pilot.pause()
        first = time.perf_counter() - start
        for i in range(presses):
            t0 = time.perf_counter()
            await pilot.press(HOTKEYS[(i * 7) % N_CODES])
            await pilot.pause()
            timings.append(time.perf_counter() - t0)
        for i in range(presses):
            repainted.clear()
            t0 = time.perf_counter()
            app._driver.send_message(events.Key(HOTKEYS[(i * 11) % N_CODES], HOTKEYS[(i * 11) % N_CODES]))
            await asyncio.wait_for(repainted.wait(), timeout=10)
            redrawn.append(time.perf_counter() - t0)
    return first, timings, redrawn


def committed_changes(study_path: Path) -> int:
    import sqlite3
    connection = sqlite3.connect(study_path)
    try:
        return connection.execute("SELECT COUNT(*) FROM audit WHERE actor = 'ash' AND action IN "
                                  "('assign', 'unassign')").fetchone()[0]
    finally:
        connection.close()


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--verbatims", type=int, default=100_000)
    parser.add_argument("--presses", type=int, default=200)
    parser.add_argument("--keep", help="generate into (or reuse) this folder")
    parser.add_argument("--generate-only", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.generate_only:
        generate(Path(args.generate_only), args.verbatims)
        return 0
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-desk-"))
    folder.mkdir(parents=True, exist_ok=True)
    study_path = folder / "big.study"
    if not study_path.exists():
        t0 = time.perf_counter()
        subprocess.run([sys.executable, __file__, "--generate-only", str(folder), "--verbatims",
                        str(args.verbatims)], check=True)
        print(f"generated {args.verbatims:,} verbatims, {N_CODES} codes, 70,000 earlier codes in "
              f"{time.perf_counter() - t0:.1f} s (not timed below)")
    before = committed_changes(study_path)
    first, timings, inside, text, redrawn = asyncio.run(measure_desk(study_path, args.presses))
    committed = committed_changes(study_path) - before
    ref_first, ref_timings, ref_redrawn = asyncio.run(measure_reference(text, args.presses))
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    median_ms = statistics.median(timings) * 1000
    ref_ms = statistics.median(ref_timings) * 1000
    p95_ms = sorted(timings)[int(0.95 * len(timings))] * 1000
    handler_ms = statistics.median(inside) * 1000 if inside else float("nan")
    redrawn_ms = statistics.median(redrawn) * 1000
    ref_redrawn_ms = statistics.median(ref_redrawn) * 1000
    rows = [
        ("first screen (s)", first, ref_first, first / ref_first, f"<= {TARGET_FIRST_SCREEN}",
         first <= TARGET_FIRST_SCREEN),
        ("keypress->committed+repainted median (ms)", redrawn_ms, ref_redrawn_ms, redrawn_ms / ref_redrawn_ms,
         f"<= {TARGET_KEYPRESS_MS}", redrawn_ms <= TARGET_KEYPRESS_MS),
        ("pilot.press+pause median (ms, not gated)", median_ms, ref_ms, median_ms / ref_ms,
         f"<= {TARGET_KEYPRESS_MS}", median_ms <= TARGET_KEYPRESS_MS),
        ("  extra over the bare app (ms)", median_ms - ref_ms, 0.0, float("nan"), f"<= {TARGET_KEYPRESS_MS}",
         median_ms - ref_ms <= TARGET_KEYPRESS_MS),
        ("  desk's own work: commit + redraw call (ms)", handler_ms, float("nan"), float("nan"),
         f"<= {TARGET_KEYPRESS_MS}", handler_ms <= TARGET_KEYPRESS_MS),
        ("peak memory (MB)", peak_mb, float("nan"), float("nan"), f"<= {TARGET_MEMORY_MB}",
         peak_mb <= TARGET_MEMORY_MB),
    ]
    print(f"desk on {args.verbatims:,} verbatims, {N_CODES} codes; {args.presses} pilot presses + {args.presses} "
          f"driver key events ({committed} committed changes seen in the audit trail); pilot keypress p95 "
          f"{p95_ms:.1f} ms; repaint p95 {sorted(redrawn)[int(0.95 * len(redrawn))] * 1000:.1f} ms")
    print(f"{'measure':42} {'desk':>10} {'reference':>10} {'ratio':>7}  target     result")
    for name, value, ref, ratio, target, ok in rows:
        print(f"{name:42} {value:10.3f} {ref:10.3f} {ratio:7.2f}  {target:10} {'PASS' if ok else 'FAIL'}")
    print("reference: a bare Textual app with one Static showing the same verbatim, in this run; memory is the "
          "whole process (desk and reference).\nThe pilot figure includes Textual's own press/pause cost, which the "
          "bare app pays too; the two indented lines separate the desk's share.")
    if committed != 2 * args.presses:
        print(f"FAIL: {2 * args.presses} presses but {committed} committed changes")
        return 1
    return 0 if all(row[-1] for i, row in enumerate(rows) if i != 2) else 1  # the raw pilot figure is not gated


if __name__ == "__main__":
    raise SystemExit(main())
