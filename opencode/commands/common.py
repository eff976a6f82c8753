"""Small helpers shared by the command modules: parsing NAME=VALUE options, progress lines."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from opencode.errors import OpenCodeError


def parse_pairs(items: list[str] | None, option: str) -> dict[str, str]:
    """Turn ["a=x", "b=y"] into {"a": "x", "b": "y"}; a malformed item names the option."""
    pairs = {}
    for item in items or []:
        if "=" not in item:
            raise OpenCodeError(f"{option} {item!r}: expected NAME=VALUE")
        name, value = item.split("=", 1)
        pairs[name.strip()] = value.strip()
    return pairs


def parse_number_list(text: str, option: str) -> list[float]:
    """Turn "9,99" into [9.0, 99.0]; a bad number names the option."""
    try:
        return [float(part) for part in text.split(",") if part.strip()]
    except ValueError as error:
        raise OpenCodeError(f"{option}: {text!r} is not a comma-separated list of numbers") from error


def progress_line(message: str) -> None:
    """Print a progress message on stderr (kept off stdout so output can be piped)."""
    print(f"  .. {message}", file=sys.stderr, flush=True)


def progress_bar(label: str):
    """A callback(done, total) that draws a one-line progress bar on stderr."""
    def update(done: int, total: int) -> None:
        if not total:
            return
        width = 30
        filled = int(width * done / total)
        end = "\n" if done >= total else ""
        print(f"\r  {label} [{'#' * filled}{'.' * (width - filled)}] {done}/{total}", end=end, file=sys.stderr,
              flush=True)
    return update


def add_overwrite_option(parser: argparse.ArgumentParser) -> None:
    """The one --overwrite option of every verb that writes files."""
    parser.add_argument("--overwrite", action="store_true",
                        help="replace output files that already exist (without it: asked at a terminal, else refused)")


def confirm_replace(path: Path) -> bool:
    """At a terminal, ask before replacing an existing file; anywhere else (scripts, pipes) the answer is no."""
    if not (sys.stdin.isatty() and sys.stderr.isatty()):
        return False
    print(f"oecode: {path} already exists; replace it? [y/N] ", end="", file=sys.stderr, flush=True)
    answer = sys.stdin.readline()
    return answer.strip().lower() in ("y", "yes")
