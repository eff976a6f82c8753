"""Benchmark how fast the `oecode` command answers, against a bare interpreter measured in the same run.

Each command runs as a fresh process (the installed `oecode` script), REPEATS times; the median is compared
with the median of `python -c pass` from the same interpreter. The runs go round-robin (every command once,
then again), so a busy moment on the machine falls on all commands alike.
Targets: `oecode --help`, `oecode --version` and `oecode VERB --help` (every verb) within 0.25 s of the bare
interpreter; `oecode info` on the demo study under 1 s.
Usage: python bench/bench_startup.py [--repeats N] [--study PATH.study]  (without --study, the demo study is
built in a temporary folder)
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HELP_MARGIN = 0.25  # seconds over a bare interpreter
INFO_LIMIT = 1.0  # seconds


def oecode_script() -> str:
    """The `oecode` script of this interpreter's environment (the one a user runs)."""
    beside = Path(sys.executable).with_name("oecode")
    found = str(beside) if beside.exists() else shutil.which("oecode")
    if not found:
        raise SystemExit("bench_startup: no `oecode` script found; install the package (pip install -e .)")
    return found


def median_seconds(commands: list[list[str]], repeats: int) -> list[float]:
    """The median wall time of each command, the commands run round-robin `repeats` times."""
    times: list[list[float]] = [[] for _ in commands]
    for _ in range(repeats):
        for command, kept in zip(commands, times):
            start = time.perf_counter()
            done = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
            kept.append(time.perf_counter() - start)
            if done.returncode != 0:
                raise SystemExit(f"bench_startup: {' '.join(command)} failed: {done.stderr.decode()[-400:]}")
    return [statistics.median(kept) for kept in times]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7, help="runs of each command (the median counts)")
    parser.add_argument("--study", help="a demo study to reuse (default: build one in a temporary folder)")
    args = parser.parse_args()

    from opencode.cli import VERBS

    script = oecode_script()
    with tempfile.TemporaryDirectory() as tmp:
        study = args.study
        if not study:
            from opencode.demo_job import build_demo_study

            print("building the demo study ...", file=sys.stderr)
            study = str(build_demo_study(Path(tmp) / "wrenfield.study"))
        helps = [["--help"], ["--version"]] + [[verb, "--help"] for verb in VERBS]
        commands = [[sys.executable, "-c", "pass"], *([script, *words] for words in helps), [script, "info", study]]
        bare, *medians = median_seconds(commands, args.repeats)
        print(f"python -c pass (reference): {bare:.3f} s (median of {args.repeats})")
        print(f"{'command':<34}{'median s':>10}{'over bare s':>13}{'ratio':>8}  target")
        failures = []

        def report(label: str, seconds: float, ok: bool, target: str) -> None:
            print(f"{label:<34}{seconds:>10.3f}{seconds - bare:>13.3f}{seconds / bare:>8.1f}  {target}"
                  f"{'' if ok else '  MISSED'}")
            if not ok:
                failures.append(label)

        worst = 0.0
        for words, seconds in zip(helps, medians):
            worst = max(worst, seconds - bare)
            report(f"oecode {' '.join(words)}", seconds, seconds - bare <= HELP_MARGIN,
                   f"<= bare + {HELP_MARGIN:.2f}")
        seconds = medians[-1]
        report("oecode info DEMO.study", seconds, seconds < INFO_LIMIT, f"< {INFO_LIMIT:.1f} s")
        print(f"worst help/version: bare + {worst:.3f} s (target bare + {HELP_MARGIN:.2f} s)")
        print("all targets met" if not failures else f"targets missed: {', '.join(failures)}")
    return 1 if failures else 0


if __name__ == "__main__":
    raise SystemExit(main())
