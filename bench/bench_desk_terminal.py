"""Benchmark the coding desk in a real terminal: tmux at 80x24, a study of 100,000 verbatims and 60 codes.

Measures, the way a coder meets them:
- start-up: from pressing Enter on `oecode code ...` in the terminal to the first verbatim on screen;
- keypress to screen: from tmux receiving a key (`send-keys`) to the terminal holding the redrawn desk that
  shows its effect (the status line for a code key, the respondent for an arrow), over hotkeys and arrows;
- fast typing: keys sent 10 to 30 ms apart without waiting for the screen; the codes on disk must equal the
  same keys applied one by one to a model of the desk (every key on the verbatim its predecessors left).

The reference, measured in the same run, is a bare Textual app in the same terminal: one Static showing the
same verbatim, changing its text on every key. Timing comes from tmux control mode (see tests/desk_terminal.py):
the time of the last program output tmux read before a screen capture showing the expected change.

    python bench/bench_desk_terminal.py [--verbatims 100000] [--presses 200] [--runs 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import random
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(HERE.parent / "tests"))

from bench_desk import HOTKEYS, N_CODES, WORDS  # noqa: E402
from desk_terminal import TmuxTerminal  # noqa: E402

TARGET_FIRST_SCREEN = 2.0
TARGET_MEDIAN_MS = 30.0
TARGET_P95_MS = 60.0

BARE_APP = textwrap.dedent('''\
    import sys
    from textual.app import App
    from textual.widgets import Static

    class Bare(App):
        """The reference: one Static with the verbatim; every key changes its text."""
        def __init__(self, text):
            super().__init__()
            self.text, self.presses = text, 0

        def compose(self):
            yield Static(self.text, id="only", markup=False)

        def on_key(self, event):
            self.presses += 1
            self.query_one("#only", Static).update(f"press {self.presses}: {event.key} | {self.text}")

    Bare(open(sys.argv[1], encoding="utf-8").read()).run()
''')


def label(number: int) -> str:
    """The bench frame's label of a code (see bench_desk.generate)."""
    return f"Reason number {number} about {WORDS[(number - 1) % len(WORDS)]}"


def fresh_copy(source: Path, work: Path) -> None:
    """A clean copy of the study (an old write-ahead log beside it would not belong to the copy)."""
    for extra in ("-wal", "-shm"):
        Path(str(work) + extra).unlink(missing_ok=True)
    shutil.copyfile(source, work)


def quit_desk(terminal: TmuxTerminal) -> None:
    """Ctrl+Q, then wait until the desk has ended and closed the study."""
    terminal.send("C-q")
    terminal.wait_exit(30)
    terminal.close()


def first_served(study: Path) -> tuple[int, list[tuple[int, str, str]]]:
    """The verbatim the desk opens on (ash's first uncoded) and the answered verbatims from there on."""
    connection = sqlite3.connect(study)
    try:
        coded = "SELECT verbatim_id FROM assignments WHERE coder = 'ash' UNION SELECT verbatim_id FROM coded_marks " \
                "WHERE coder = 'ash'"
        first = connection.execute(f"SELECT MIN(id) FROM verbatims WHERE nonanswer = 0 AND id NOT IN ({coded})"
                                   ).fetchone()[0]
        rows = connection.execute("SELECT v.id, r.key, v.text FROM verbatims v JOIN respondents r ON r.id = "
                                  "v.respondent_id WHERE v.nonanswer = 0 AND v.id >= ? ORDER BY v.id LIMIT 5000",
                                  (first,)).fetchall()
    finally:
        connection.close()
    return first, rows


def desk_command(study: Path) -> str:
    return f"exec {sys.executable} -m opencode code {study} --question why --coder ash --refresh 0"


def start_desk(study: Path, first_text: str) -> tuple[TmuxTerminal, float]:
    terminal = TmuxTerminal(env={"TERM": "xterm-256color"}).start()
    terminal.send(desk_command(study), literal=True)
    sent = terminal.send("Enter")
    fragment = first_text[:20]
    _, at = terminal.wait_for(lambda s: fragment in s and "palette" in s and "coded (" in s, timeout=120)
    return terminal, at - sent


def start_bare(script: Path, text_file: Path, first_text: str) -> tuple[TmuxTerminal, float]:
    terminal = TmuxTerminal(env={"TERM": "xterm-256color"}).start()
    terminal.send(f"exec {sys.executable} {script} {text_file}", literal=True)
    sent = terminal.send("Enter")
    _, at = terminal.wait_for(lambda s: first_text[:20] in s, timeout=120)
    return terminal, at - sent


def key_plan(presses: int, seed: int = 5) -> list[str]:
    """Hotkeys and arrows as a coder types them: mostly codes, a move to the next verbatim every few."""
    rng = random.Random(seed)
    return [rng.choice(HOTKEYS[:N_CODES]) if rng.random() < 0.7 else "Right" for _ in range(presses)]


def desk_latencies(terminal: TmuxTerminal, rows, keys: list[str]) -> list[float]:
    """Keypress-to-screen times on the desk, each checked against the change the key must show."""
    position, held, out = 0, set(), []
    for key in keys:
        if key == "Right":
            position += 1
            expected = f"respondent {rows[position][1]} "
        else:
            number = HOTKEYS.index(key) + 1
            verbatim = rows[position][0]
            sign = "−" if (verbatim, number) in held else "+"
            held ^= {(verbatim, number)}
            expected = f"{sign} {number} {label(number)}"
        sent = terminal.send(key, literal=key != "Right")
        try:
            _, at = terminal.wait_for(lambda s: expected in s, timeout=30)
        except TimeoutError as error:
            raise TimeoutError(f"after key {key!r} the desk should show {expected!r}; {error}") from None
        out.append(at - sent)
        time.sleep(0.01)
    return out


def bare_latencies(terminal: TmuxTerminal, keys: list[str]) -> list[float]:
    out = []
    for i, key in enumerate(keys, 1):
        sent = terminal.send(key, literal=key != "Right")
        _, at = terminal.wait_for(lambda s: f"press {i}: " in s, timeout=30)
        out.append(at - sent)
        time.sleep(0.01)
    return out


def fast_typing(study: Path, rows, presses: int) -> tuple[int, int, bool]:
    """Keys 10-30 ms apart, not waiting for the screen; (keys, codes expected, disk equals the model)."""
    keys = key_plan(presses, seed=11)
    terminal, _ = start_desk(study, rows[0][2])
    rng = random.Random(3)
    try:
        position, held = 0, set()
        for key in keys:
            if key == "Right":
                position += 1
            else:
                held ^= {(rows[position][0], HOTKEYS.index(key) + 1)}
            terminal.send(key, literal=key != "Right")
            time.sleep(rng.uniform(0.010, 0.030))
        toggles = sum(k != "Right" for k in keys)
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and audit_count(study) < toggles:
            time.sleep(0.1)
    finally:
        quit_desk(terminal)
    connection = sqlite3.connect(study)
    try:
        first = rows[0][0]
        found = set(connection.execute(
            "SELECT a.verbatim_id, c.number FROM assignments a JOIN codes c ON c.id = a.code_id WHERE a.coder = "
            "'ash' AND a.source = 'hand' AND a.verbatim_id >= ?", (first,)).fetchall())
    finally:
        connection.close()
    return len(keys), len(held), found == held


def audit_count(study: Path) -> int:
    connection = sqlite3.connect(study)
    try:
        return connection.execute("SELECT COUNT(*) FROM audit WHERE actor = 'ash' AND action IN ('assign', "
                                  "'unassign')").fetchone()[0]
    finally:
        connection.close()


def p95(values: list[float]) -> float:
    ordered = sorted(values)
    return ordered[min(int(0.95 * len(ordered)), len(ordered) - 1)]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--verbatims", type=int, default=100_000)
    parser.add_argument("--presses", type=int, default=200)
    parser.add_argument("--runs", type=int, default=3, help="start-ups measured for each app (median shown)")
    parser.add_argument("--keep", help="generate into (or reuse) this folder")
    args = parser.parse_args()
    if shutil.which("tmux") is None:
        print("tmux is not installed (apt-get install -y tmux)")
        return 2
    folder = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-desk-terminal-"))
    folder.mkdir(parents=True, exist_ok=True)
    source = folder / "big.study"
    if not source.exists():
        t0 = time.perf_counter()
        subprocess.run([sys.executable, str(HERE / "bench_desk.py"), "--generate-only", str(folder), "--verbatims",
                        str(args.verbatims)], check=True)
        print(f"generated {args.verbatims:,} verbatims, {N_CODES} codes, 70,000 earlier codes in "
              f"{time.perf_counter() - t0:.1f} s (not timed below)")
    work = folder / "work.study"
    fresh_copy(source, work)
    first, rows = first_served(work)
    text_file = folder / "verbatim.txt"
    text_file.write_text(rows[0][2], encoding="utf-8")
    script = folder / "bare_app.py"
    script.write_text(BARE_APP, encoding="utf-8")
    keys = key_plan(args.presses)

    desk_starts, bare_starts = [], []
    for _ in range(args.runs):
        terminal, seconds = start_desk(work, rows[0][2])
        quit_desk(terminal)
        desk_starts.append(seconds)
        terminal, seconds = start_bare(script, text_file, rows[0][2])
        terminal.close()
        bare_starts.append(seconds)

    terminal, _ = start_desk(work, rows[0][2])
    try:
        time.sleep(1.0)  # the rule highlighter loads in the background after the first screen
        desk = desk_latencies(terminal, rows, keys)
    finally:
        quit_desk(terminal)
    terminal, _ = start_bare(script, text_file, rows[0][2])
    try:
        time.sleep(1.0)
        bare = bare_latencies(terminal, keys)
    finally:
        terminal.close()

    fresh_copy(source, work)
    sent, expected_codes, same = fast_typing(work, rows, min(args.presses, 120))

    load = os.getloadavg()
    first_desk, first_bare = statistics.median(desk_starts), statistics.median(bare_starts)
    median_desk, median_bare = statistics.median(desk) * 1000, statistics.median(bare) * 1000
    p95_desk, p95_bare = p95(desk) * 1000, p95(bare) * 1000
    rows_out = [
        ("command to first verbatim (s, median)", first_desk, first_bare, f"< {TARGET_FIRST_SCREEN}",
         first_desk < TARGET_FIRST_SCREEN),
        ("keypress to screen, median (ms)", median_desk, median_bare, f"< {TARGET_MEDIAN_MS:.0f}",
         median_desk < TARGET_MEDIAN_MS),
        ("keypress to screen, p95 (ms)", p95_desk, p95_bare, f"< {TARGET_P95_MS:.0f}", p95_desk < TARGET_P95_MS),
    ]
    print(f"desk in tmux at 80x24 on {args.verbatims:,} verbatims, {N_CODES} codes; {len(keys)} keys "
          f"({sum(k == 'Right' for k in keys)} arrows); start-ups: desk {', '.join(f'{s:.2f}' for s in desk_starts)}"
          f" s, bare {', '.join(f'{s:.2f}' for s in bare_starts)} s; load average {load[0]:.1f} on "
          f"{os.cpu_count()} cores")
    print(f"{'measure':40} {'desk':>9} {'bare app':>9} {'ratio':>6}  target  result")
    for name, value, ref, target, ok in rows_out:
        print(f"{name:40} {value:9.2f} {ref:9.2f} {value / ref:6.2f}  {target:6}  {'PASS' if ok else 'FAIL'}")
    print(f"fast typing: {sent} keys 10-30 ms apart, {expected_codes} codes expected on disk: "
          f"{'equal to the model' if same else 'DIFFERENT from the model'} -> {'PASS' if same else 'FAIL'}")
    print("reference: a bare Textual app with one Static showing the same verbatim, in the same tmux, this run.")
    return 0 if same and all(row[-1] for row in rows_out) else 1


if __name__ == "__main__":
    raise SystemExit(main())
