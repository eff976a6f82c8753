"""The `oecode` command: parse arguments, call the library, print. Each verb lives in opencode/commands/."""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import sqlite3
import sys

from opencode.version import __version__
from opencode.errors import OpenCodeError
from opencode.files.targets import output_policy
from opencode.files.terminal_text import TerminalStream, terminal_text

#: Verbs that draw a full-screen terminal app: their output is not filtered.
SCREEN_VERBS = {"code"}

#: verb -> module in opencode.commands providing `register(subparsers)`; the verb's handler is set there.
VERBS = {
    "new": "study_cmds", "info": "study_cmds", "demo": "demo_cmd",
    "words": "text_cmds", "kwic": "text_cmds", "phrases": "text_cmds", "lexicon": "text_cmds",
    "themes": "themes_cmd", "drivers": "drivers_cmd",
    "frame": "frame_cmd", "model": "model_cmd", "code": "desk_cmd",
    "sample": "reliability_cmds", "agree": "reliability_cmds",
    "tables": "output_cmds", "export": "output_cmds", "report": "output_cmds",
    "push": "team_cmds", "pull": "team_cmds", "team": "team_cmds", "handout": "team_cmds", "merge": "team_cmds",
    "sentiment": "sentiment_cmd",
}


def build_parser(verb: str | None = None) -> argparse.ArgumentParser:
    """The argument parser with every available verb (or only `verb`'s module, so a command starts at once)."""
    parser = argparse.ArgumentParser(prog="oecode", description="Code open-ended survey answers: from the survey "
                                     "file to a code frame, coded data, agreement and tables.")
    parser.add_argument("--version", action="version", version=f"oecode {__version__}")
    subparsers = parser.add_subparsers(dest="verb", metavar="VERB")
    registered = set()
    for module_name in [VERBS[verb]] if verb in VERBS else dict.fromkeys(VERBS.values()):
        try:
            module = importlib.import_module(f"opencode.commands.{module_name}")
        except ModuleNotFoundError as error:
            if error.name == f"opencode.commands.{module_name}":
                continue  # verb not built yet
            raise
        module.register(subparsers)
        registered.add(module_name)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run one verb; user-fixable problems print one clear line and exit 1."""
    words = sys.argv[1:] if argv is None else argv
    parser = build_parser(next((w for w in words if not w.startswith("-")), None))
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return 2
    from opencode.files.interrupts import record_interrupts

    record_interrupts()
    try:
        with _command_output(args):
            return int(args.handler(args) or 0)
    except OpenCodeError as error:
        print(f"oecode {args.verb}: {terminal_text(str(error))}", file=sys.stderr)
        return 1
    except (OSError, sqlite3.DatabaseError) as error:  # a failure no library call turned into a message yet
        if os.environ.get("OECODE_DEBUG") == "1":
            raise
        where = getattr(error, "filename", None) or getattr(args, "study", None) or "a file"
        reason = getattr(error, "strerror", None) or str(error) or type(error).__name__
        print(f"oecode {args.verb}: {terminal_text(str(where))}: {terminal_text(reason)} (OECODE_DEBUG=1 shows "
              "the details)", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print(f"oecode {args.verb}: interrupted; nothing was half-written", file=sys.stderr)
        return 130


@contextlib.contextmanager
def _command_output(args: argparse.Namespace):
    """While a verb runs: existing files are replaced only with --overwrite (or a yes at a terminal prompt),
    and nothing from user data can send control characters to the terminal."""
    from opencode.commands.common import confirm_replace

    with output_policy(overwrite=bool(getattr(args, "overwrite", False)), confirm=confirm_replace):
        if args.verb in SCREEN_VERBS:
            yield
            return
        out, err = sys.stdout, sys.stderr
        from opencode.files.textout import prose_width

        sys.stdout = TerminalStream(out, width=prose_width(out))
        sys.stderr = TerminalStream(err, keep_cr=True, width=prose_width(err))
        try:
            yield
        finally:
            for stream in (sys.stdout, sys.stderr):
                with contextlib.suppress(Exception):
                    stream.flush()
            sys.stdout, sys.stderr = out, err
