"""Small helpers shared by the command modules: verbs and actions with examples, parsing NAME=VALUE options,
progress lines. Command modules import heavy libraries (pandas, scikit-learn, ...) only inside the handler that
runs, so that `oecode VERB --help` answers at once."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter


def add_verb(subparsers: argparse._SubParsersAction, name: str, help: str, examples: list[str],
             description: str | None = None, notes: str = "") -> argparse.ArgumentParser:
    """A verb's parser whose --help ends with example command lines (and any notes). The help formatter fits
    each line to the terminal: a wide example is folded into backslash-continued lines, notes are wrapped."""
    return subparsers.add_parser(name, help=help, description=description or _sentence(help),
                                 epilog=_examples(examples) + (f"\n\n{notes}" if notes else ""),
                                 formatter_class=HelpFormatter)


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


# -- table output for scripts ---------------------------------------------------------------------------------------
def add_table_output_options(parser: argparse.ArgumentParser, wide: bool = False, csv_help: str = "",
                             json_help: str = "") -> None:
    """--csv and --json (the full columns, for scripts) and, where a table moves columns out, --wide.

    `--csv` / `--json` alone print the table to stdout instead of the text table; followed by a PATH they
    write the file and the text table is printed as usual."""
    parser.add_argument("--csv", nargs="?", const="-", metavar="PATH",
                        help=csv_help or "print the full table as CSV instead of text (or write it to PATH)")
    parser.add_argument("--json", nargs="?", const="-", metavar="PATH",
                        help=json_help or "print the full table as JSON records instead of text (or write it to "
                                          "PATH)")
    if wide:
        parser.add_argument("--wide", action="store_true",
                            help="show the secondary columns too (the table may then be cut into blocks)")


def table_targets(args: argparse.Namespace) -> list[str]:
    """The files --csv / --json will write (to check before slow work)."""
    return [path for path in (getattr(args, "csv", None), getattr(args, "json", None)) if path and path != "-"]


def emit_table(args: argparse.Namespace, frame, name: str = "table") -> bool:
    """Write `frame` (a DataFrame, or a list of dicts) as --csv / --json asked: to stdout ('-') or to a file.
    True when the table went to stdout, so the caller prints nothing else there."""
    csv_target, json_target = getattr(args, "csv", None), getattr(args, "json", None)
    if not (csv_target or json_target):
        return False
    import pandas as pd

    from opencode.files.terminal_text import unwrapped

    if isinstance(frame, pd.DataFrame):
        table = frame.convert_dtypes()  # whole numbers stay whole (a code column with a gap is not 1.0)
        columns = [str(c) for c in table.columns]
        rows = [list(row) for row in table.itertuples(index=False)]
    else:
        records = list(frame)
        columns = list(dict.fromkeys(key for record in records for key in record))
        rows = [[record.get(key) for key in columns] for record in records]
    table = (columns, rows)
    printed = False
    for target, kind in ((csv_target, "csv"), (json_target, "json")):
        if not target:
            continue
        text = _table_csv(table) if kind == "csv" else _table_json(table)
        if target == "-":
            with unwrapped(sys.stdout) as out:
                out.write(text)
                out.flush()
            printed = True
        else:
            from opencode.files.safe_write import atomic_open

            with atomic_open(target, "w", newline="" if kind == "csv" else None) as handle:
                handle.write(text)
            print(f"{name} written to {target}", file=sys.stderr)
    return printed


def _table_csv(table) -> str:
    """CSV text with a header row; text cells pass the spreadsheet cell guard; a missing value is empty."""
    import csv
    import io

    from opencode.files.cell_guard import guard_row

    columns, rows = table
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(guard_row(columns))
    for row in rows:
        values = (_plain_value(v) for v in row)
        writer.writerow(guard_row("; ".join(map(str, v)) if isinstance(v, list) else v for v in values))
    return out.getvalue()


def _table_json(table) -> str:
    """JSON: a list of records, NaN as null, numpy numbers as plain numbers, lists kept as lists."""
    import json

    columns, rows = table
    records = [{key: _plain_value(v) for key, v in zip(columns, row)} for row in rows]
    return json.dumps(records, ensure_ascii=False, indent=1, default=str) + "\n"


def _plain_value(value):
    """A cell as a plain Python value: numpy scalars unwrapped, NaN as None, tuples as lists."""
    import math

    if value is None or (type(value).__name__ in ("NAType", "NaTType")):
        return None
    if hasattr(value, "item") and not isinstance(value, (list, tuple, dict, str)):
        try:
            value = value.item()
        except (ValueError, AttributeError):
            pass
    if isinstance(value, float) and not math.isfinite(value):
        return None if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, tuple):
        return [_plain_value(v) for v in value]
    if isinstance(value, list):
        return [_plain_value(v) for v in value]
    return value
