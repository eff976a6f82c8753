"""Small helpers shared by the command modules: verbs and actions with examples, parsing NAME=VALUE options,
progress lines. Command modules import heavy libraries (pandas, scikit-learn, ...) only inside the handler that
runs, so that `oecode VERB --help` answers at once."""

from __future__ import annotations

import argparse
import sys
import textwrap
from pathlib import Path

from opencode.errors import OpenCodeError


def add_verb(subparsers: argparse._SubParsersAction, name: str, help: str, examples: list[str],
             description: str | None = None, notes: str = "") -> argparse.ArgumentParser:
    """A verb's parser whose --help ends with example command lines (and any notes)."""
    return subparsers.add_parser(name, help=help, description=description or _sentence(help),
                                 epilog=_examples(examples) + (f"\n\n{wrap(notes)}" if notes else ""),
                                 formatter_class=argparse.RawDescriptionHelpFormatter)


def add_actions(parser: argparse.ArgumentParser) -> argparse._SubParsersAction:
    """The actions of a verb: `oecode VERB ACTION STUDY ...`, each a subcommand with its own options."""
    return parser.add_subparsers(dest="action", metavar="ACTION", required=True)


def add_action(actions: argparse._SubParsersAction, name: str, help: str, examples: list[str],
               handler=None, study: bool = True, notes: str = "", usage: str = "") -> argparse.ArgumentParser:
    """One action of a verb with its own options; `study` adds the STUDY positional first. `usage` names
    positionals after STUDY (e.g. "RUN_ID") for the usage line."""
    parser = add_verb(actions, name, help, examples, notes=notes)
    if study:
        parser.usage = "%(prog)s " + " ".join(filter(None, ("STUDY", usage, "[options]")))
        parser.add_argument("study", metavar="STUDY", help="the study file (NAME.study)")
    if handler is not None:
        parser.set_defaults(handler=handler)
    return parser


def wrap(text: str) -> str:
    """A paragraph of help text wrapped for the terminal (epilogs are printed as written)."""
    return "\n".join(textwrap.fill(part, width=100) for part in text.split("\n"))


def _sentence(text: str) -> str:
    text = text.replace("%%", "%")
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")


def _examples(lines: list[str]) -> str:
    return ("examples:" if len(lines) > 1 else "example:") + "".join(f"\n  {line}" for line in lines)


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
