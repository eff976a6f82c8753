"""Benchmark the width-fitting table renderer (files/textout.format_table) against references measured in the
same run: rich's own Table drawing the same cells into the same width (no measuring, grouping or blocks of ours),
and plain padded text (no wrapping at all, for scale).

The tables a verb prints have tens of rows (a code frame, a banner, the top terms); the largest in practice is
`words --top 1000` or a kwic of a few hundred lines. Targets: our fitting adds at most 50% to rich's own
rendering (ratio under 1.5), and a 1,000-row table with a wrapped label column is fitted to 80 columns in
under 1 s. Plain padding is shown for scale only (wrapping costs far more than padding).
Usage: python bench/bench_textout.py [--rows N] [--repeats N]
"""

from __future__ import annotations

import argparse
import random
import statistics
import time

from opencode.files.textout import format_table

TARGET_SECONDS = 1.0
TARGET_RATIO = 1.5


def make_rows(n: int, seed: int = 0) -> list[list]:
    rng = random.Random(seed)
    words = ["library", "staff", "evening", "safe", "opening", "hours", "study", "space", "children", "cost"]
    return [[i + 1, " ".join(rng.choice(words) for _ in range(rng.randint(2, 12))), rng.randint(0, 5000),
             rng.random(), f"{100 * rng.random():.1f}", f"{rng.random():.3f} [{rng.random():.3f}, {rng.random():.3f}]",
             "<0.001" if rng.random() < 0.3 else f"{rng.random():.3f}"] for i in range(n)]


def plain(headers, rows) -> str:
    """The reference: every cell padded to its column's widest, two spaces apart (what a table costs unfitted)."""
    cells = [list(map(str, headers))] + [[f"{c:.3f}" if isinstance(c, float) else str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    return "\n".join("  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in cells)


def bare_rich(headers, rows, width: int = 80) -> str:
    """The reference: rich's Table with the same cells, label column folding, printed into `width` columns."""
    from io import StringIO

    from rich import box
    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, highlight=False)
    for i, head in enumerate(headers):
        table.add_column(Text(head), overflow="fold", no_wrap=i != 1)
    for row in rows:
        table.add_row(*(Text(f"{c:.3f}" if isinstance(c, float) else str(c)) for c in row))
    console = Console(width=width, file=StringIO(), color_system=None, highlight=False, markup=False, emoji=False)
    with console.capture() as capture:
        console.print(table)
    return capture.get()


def median(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1000)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    headers = ["code", "label", "respondents", "share", "% of respondents", "kappa [95% interval]", "q"]
    rows = make_rows(args.rows)
    format_table(headers, rows[:10], width=80)  # import rich once, outside the timing
    fitted = median(lambda: format_table(headers, rows, width=80), args.repeats)
    reference = median(lambda: bare_rich(headers, rows), args.repeats)
    padding = median(lambda: plain(headers, rows), args.repeats)
    ratio = fitted / reference
    print(f"format_table, {args.rows:,} rows fitted to 80 columns: {fitted:.3f} s (median of {args.repeats})")
    print(f"rich's own Table, same cells, 80 columns (reference): {reference:.3f} s")
    print(f"plain padded text, no wrapping (for scale):          {padding:.4f} s")
    print(f"ratio to rich {ratio:.2f} (target under {TARGET_RATIO}); time target under {TARGET_SECONDS:.1f} s: "
          f"{'met' if fitted < TARGET_SECONDS and ratio < TARGET_RATIO else 'NOT met'}")


if __name__ == "__main__":
    main()
