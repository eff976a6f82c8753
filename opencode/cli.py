"""The `oecode` command: parse arguments, call the library, print. Each verb lives in opencode/commands/.

Start-up matters (a command must answer at once): `oecode --help` and `--version` import no command module,
`oecode VERB ...` imports only VERB's module, and command modules import heavy libraries inside the handler
that runs (tests/test_cli_imports.py checks both).
"""

from __future__ import annotations

import argparse
import contextlib
import difflib
import importlib
import os
import re
import sys

from opencode.files.help_text import HelpFormatter
from opencode.version import __version__

#: Verbs that draw a full-screen terminal app: their output is not filtered.
SCREEN_VERBS = {"code"}

#: verb -> (module in opencode.commands providing `register(subparsers)`, the verb's one-line help).
#: The top-level help is built from this table alone; the module's own help for the verb must say the same
#: (tests/test_cli_tree.py checks it).
VERBS = {
    "new": ("study_cmds", "create a study from a survey file, or merge a later wave into one"),
    "info": ("study_cmds", "questions, verbatim counts and closed-ended variables of a study"),
    "demo": ("demo_cmd", "run the whole job on the bundled demo survey"),
    "words": ("text_cmds", "a question's top terms with counts, %% of verbatims and word forms"),
    "kwic": ("text_cmds", "every occurrence of a term in its verbatims, aligned"),
    "phrases": ("text_cmds", "suggest, add, accept or remove multi-word phrases"),
    "lexicon": ("text_cmds", "a question's stop words, merges, stemming, language, non-answers; import "
                "or export it"),
    "themes": ("themes_cmd", "find themes (NMF or LDA) in a question's verbatims; list, show, compare and "
               "promote runs"),
    "drivers": ("drivers_cmd", "rank a question's terms by how they predict a closed-ended outcome"),
    "frame": ("frame_cmd", "code frames: codes, nets, hotkeys, rules; import existing codes"),
    "model": ("model_cmd", "pre-code by keyword rules; train and use the machine coder"),
    "code": ("desk_cmd", "code verbatims at the terminal desk (keys: F1 inside)"),
    "sample": ("reliability_cmds", "reliability samples: draw verbatims for blind double coding, assign them "
               "to coders, follow progress"),
    "agree": ("reliability_cmds", "agreement between coders (kappa, alpha, AC1) and adjudication into final"),
    "sentiment": ("sentiment_cmd", "sentiment of verbatims (VADER, English): score them into closed "
                  "variables, or show the negative / neutral / positive mix within each code"),
    "tables": ("output_cmds", "code frequencies, or codes by banner variables with tests"),
    "export": ("output_cmds", "coded data as CSV, XLSX, SPSS, Stata or Triple-S"),
    "report": ("output_cmds", "one self-contained HTML report: frames, frequencies, charts, tables"),
    "push": ("team_cmds", "copy a study file into a PostgreSQL server (one schema per study)"),
    "pull": ("team_cmds", "copy a study from a PostgreSQL server into a study file"),
    "team": ("team_cmds", "coders and leads of a server study; a local server for trying it"),
    "handout": ("team_cmds", "give a coder a copy of the study to code without a server"),
    "merge": ("team_cmds", "bring a coder's copy (from handout) back into the study"),
}

TOP_EPILOG = """a verb's options: oecode VERB --help; verbs with actions put the action first:
  oecode frame add STUDY --question Q --label "Opening hours"
start with the demo: oecode demo"""


class Parser(argparse.ArgumentParser):
    """argparse, with a "did you mean" added to errors about a mistyped action, choice or option."""

    #: the long options of the (sub)command being parsed; main sets it on the top parser
    long_options: list[str] = []
    #: option -> the other actions of the same verb that take it ("oecode model queue"), for a misplaced option
    elsewhere: dict[str, list[str]] = {}

    def error(self, message: str):
        self.exit(2, f"{self.format_usage()}{self.prog}: error: {message}{suggestion(message, self)}\n")


def suggestion(message: str, parser: argparse.ArgumentParser) -> str:
    """"; did you mean ..." for an argparse error naming a mistyped choice or option, else ""."""
    choice = re.search(r"invalid choice: '([^']*)' \(choose from (.*)\)", message)
    if choice:
        near = nearest(choice.group(1), re.findall(r"'([^']*)'", choice.group(2)))
        return f"; did you mean {near!r}?" if near else ""
    unknown = re.search(r"unrecognized arguments: (.*)", message)
    if unknown:
        options = getattr(parser, "long_options", None) or _long_options(parser)
        elsewhere = getattr(parser, "elsewhere", {})
        for word in unknown.group(1).split():
            name = word.split("=", 1)[0]
            if name in elsewhere:
                return f"; {name} is an option of {' and '.join(elsewhere[name])}"
            near = nearest(name, options) if word.startswith("--") else None
            if near:
                return f"; did you mean {near}?"
    return ""


def nearest(word: str, candidates) -> str | None:
    """The candidate closest to a mistyped word, if one is close enough."""
    found = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return found[0] if found else None


def _long_options(parser: argparse.ArgumentParser) -> list[str]:
    return [s for action in parser._actions for s in action.option_strings if s.startswith("--")]


def _sub_choices(parser: argparse.ArgumentParser) -> dict[str, argparse.ArgumentParser]:
    """A parser's subcommands (name -> parser), or {} when it has none."""
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    return {}


def build_parser(verb: str | None = None) -> argparse.ArgumentParser:
    """The argument parser: with `verb`, that verb's module registers its verbs (only it is imported, so a
    command starts at once); without, every verb is listed from VERBS and no command module is imported."""
    parser = Parser(prog="oecode", description="Code open-ended survey answers: from the survey file to a code "
                    "frame, coded data, agreement and tables.", epilog=TOP_EPILOG,
                    formatter_class=HelpFormatter)
    parser.add_argument("--version", action="version", version=f"oecode {__version__}")
    subparsers = parser.add_subparsers(dest="verb", metavar="VERB")
    if verb in VERBS:
        # a command module that fails to import fails loudly here (no verb silently missing)
        importlib.import_module(f"opencode.commands.{VERBS[verb][0]}").register(subparsers)
    else:
        for name, (_, help_text) in VERBS.items():
            subparsers.add_parser(name, help=help_text, add_help=False)
    return parser


def reorder(words: list[str], at: int, actions: dict) -> list[str]:
    """`oecode VERB STUDY ACTION ...` (the order before actions came first) as `oecode VERB ACTION STUDY ...`,
    so scripts written for it keep running. `at` is the verb's index; other word orders are left alone."""
    if at + 1 >= len(words) or words[at + 1] in actions or words[at + 1].startswith("-"):
        return words
    for index in range(at + 2, len(words)):
        word, before = words[index], words[index - 1]
        if word == "--":
            break
        if word in actions and (index == at + 2 or not before.startswith("-") or "=" in before):
            return words[:at + 1] + [word] + words[at + 1:index] + words[index + 1:]
    return words


def _verb_index(words: list[str]) -> int | None:
    return next((i for i, w in enumerate(words) if not w.startswith("-")), None)


def parse(words: list[str]) -> tuple[argparse.ArgumentParser, argparse.Namespace]:
    """Parse a command line; a mistyped verb or action gets one line naming the nearest, and exit 2."""
    at = _verb_index(words)
    verb = words[at] if at is not None else None
    if verb is not None and verb not in VERBS:
        near = nearest(verb, VERBS)
        raise SystemExit(_usage_line(f"oecode: unknown verb {verb!r}" + (f"; did you mean {near!r}?" if near
                                     else "; oecode --help lists the verbs")))
    parser = build_parser(verb)
    leaf = parser
    if verb is not None:
        leaf = _sub_choices(parser)[verb]
        actions = _sub_choices(leaf)
        if actions:
            module = importlib.import_module(f"opencode.commands.{VERBS[verb][0]}")
            words = reorder(words, at, actions)
            if hasattr(module, "old_words"):  # the verb's own way of reading its older command lines
                words = words[:at + 1] + module.old_words(words[at + 1:])
            rest = words[at + 1:]
            if rest and rest[0] in actions:
                leaf = actions[rest[0]]
                own = set(_long_options(leaf))
                leaf.elsewhere = {}
                for name, other in actions.items():
                    for option in set(_long_options(other)) - own:
                        leaf.elsewhere.setdefault(option, []).append(f"oecode {verb} {name}")
            elif rest and not rest[0].startswith("-"):
                typed = [w for w in rest[:2] if not w.startswith("-")]
                near = next(((w, n) for w in typed if (n := nearest(w, actions))), None)
                if near:
                    raise SystemExit(_usage_line(f"oecode {verb}: unknown action {near[0]!r}; did you mean "
                                                 f"{near[1]!r}?"))
    parser.long_options = leaf.long_options = _long_options(leaf)
    args, extra = parser.parse_known_args(words)
    if extra:  # reported by the (sub)command they were given to, with its usage and a "did you mean"
        leaf.error(f"unrecognized arguments: {' '.join(extra)}")
    return parser, args


def _usage_line(text: str) -> int:
    print(text, file=sys.stderr)
    return 2


def main(argv: list[str] | None = None) -> int:
    """Run one verb; user-fixable problems print one clear line and exit 1."""
    words = [str(word) for word in (sys.argv[1:] if argv is None else argv)]
    parser, args = parse(words)  # argparse's SystemExit (help, version, usage errors: 2) goes up as usual
    if not getattr(args, "handler", None):
        parser.print_help()
        return 2
    import sqlite3

    from opencode.errors import OpenCodeError
    from opencode.files.interrupts import record_interrupts
    from opencode.files.terminal_text import terminal_text

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
    from opencode.files.targets import output_policy
    from opencode.files.terminal_text import TerminalStream

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
