"""`oecode sentiment`: score a question's verbatims (VADER) into closed variables, and the mix per code."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from opencode.errors import OpenCodeError
from opencode.files.safe_write import check_writable_target
from opencode.study.store import Study

ACTIONS = ("score", "mix")
MIX_SUFFIXES = (".csv", ".xlsx", ".html")


def register(subparsers: argparse._SubParsersAction) -> None:
    s = subparsers.add_parser("sentiment", help="sentiment of verbatims (VADER, English): score them into closed "
                              "variables, or show the negative / neutral / positive mix within each code")
    s.add_argument("study")
    s.add_argument("action", choices=ACTIONS, help="score: score and store <question>_sentiment and "
                   "<question>_sentiment_score; mix: row %% per code and net")
    s.add_argument("--question", required=True, help="the open question")
    s.add_argument("--cut", type=float, default=0.05, help="score: compound score at or beyond +-CUT is positive / "
                   "negative (default 0.05, the package's documented threshold)")
    s.add_argument("--whole", action="store_true", help="score: score each verbatim as one text instead of "
                   "sentence by sentence")
    s.add_argument("--coder", default="final", help="mix: whose codes (default 'final')")
    s.add_argument("--with-suggestions", action="store_true", help="mix: count machine and rule suggestions too")
    weights = s.add_mutually_exclusive_group()
    weights.add_argument("--weight", help="mix: the weight variable (default: the study's weight, if any)")
    weights.add_argument("--unweighted", action="store_true", help="mix: ignore the survey weight")
    s.add_argument("--out", help="mix: also write the table (.csv, .xlsx or .html)")
    s.add_argument("--actor", default="oecode", help="score: who does this (for the audit trail)")
    s.set_defaults(handler=run_sentiment)


def run_sentiment(args: argparse.Namespace) -> int:
    from opencode.analysis.sentiment import study as sentiment

    if args.action == "score":
        with Study.open(args.study) as study:
            run = sentiment.score_question(study, args.question, cut=args.cut, by_sentence=not args.whole,
                                           actor=args.actor)
        print(sentiment.format_run(run))
        return 0
    from opencode.analysis.tables.output import format_table, to_html, write_csv, write_xlsx

    if args.out:
        if Path(args.out).suffix.lower() not in MIX_SUFFIXES:
            raise OpenCodeError(f"{args.out}: the mix is written as {', '.join(MIX_SUFFIXES)}")
        check_writable_target(args.out)
    with Study.open(args.study) as study:
        table = sentiment.question_mix(study, args.question, coder=args.coder,
                                       include_suggestions=args.with_suggestions, weight=args.weight,
                                       unweighted=args.unweighted)
    print(format_table(table))
    small = [r.label for r, flag in zip(table.rows, table.small_base & (table.base_n > 0)) if flag]
    if small:
        print(f"warning: rows with bases under {table.min_base} flagged (!) and not tested: {', '.join(small)}",
              file=sys.stderr)
    if args.out:
        suffix = Path(args.out).suffix.lower()
        if suffix == ".csv":
            write_csv(table, args.out)
        elif suffix == ".xlsx":
            write_xlsx(table, args.out)
        else:
            from opencode.files.safe_write import atomic_open
            from opencode.analysis.tables.output import TABLE_CSS

            with atomic_open(args.out, "w") as handle:
                handle.write(f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>Sentiment mix'
                             f"</title><style>{TABLE_CSS}</style></head><body>\n{to_html(table)}</body></html>\n")
        print(f"wrote {args.out}")
    return 0
