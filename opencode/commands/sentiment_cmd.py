"""`oecode sentiment score|mix`: score a question's verbatims (VADER) into closed variables, and the mix per code."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from opencode.commands.common import add_action, add_actions, add_table_output_options, emit_table, table_targets
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter

MIX_SUFFIXES = (".csv", ".xlsx", ".html")


def register(subparsers: argparse._SubParsersAction) -> None:
    verb = subparsers.add_parser("sentiment", help="sentiment of verbatims (VADER, English): score them into closed "
                                 "variables, or show the negative / neutral / positive mix within each code",
                                 description="Sentiment of a question's verbatims (VADER, English): score them "
                                 "into closed variables, or show the negative / neutral / positive mix within each "
                                 "code.", epilog="example:\n  oecode sentiment score survey.study --question why",
                                 formatter_class=HelpFormatter)
    actions = add_actions(verb)
    s = add_action(actions, "score", "score and store <question>_sentiment and <question>_sentiment_score",
                   ["oecode sentiment score survey.study --question why --cut 0.1"], handler=run_sentiment)
    s.add_argument("--question", required=True, help="the open question")
    s.add_argument("--cut", type=float, default=0.05, help="compound score at or beyond +-CUT is positive / "
                   "negative (default 0.05, the package's documented threshold)")
    s.add_argument("--whole", action="store_true", help="score each verbatim as one text instead of "
                   "sentence by sentence")
    s.add_argument("--actor", default="oecode", help="who does this (for the audit trail)")
    m = add_action(actions, "mix", "row %% negative / neutral / positive per code and net",
                   ["oecode sentiment mix survey.study --question why --with-suggestions --out mix.xlsx"],
                   handler=run_sentiment)
    m.add_argument("--question", required=True, help="the open question")
    m.add_argument("--coder", default="final", help="whose codes (default 'final')")
    m.add_argument("--with-suggestions", action="store_true", help="count machine and rule suggestions too")
    weights = m.add_mutually_exclusive_group()
    weights.add_argument("--weight", help="the weight variable (default: the study's weight, if any)")
    weights.add_argument("--unweighted", action="store_true", help="ignore the survey weight")
    m.add_argument("--out", help="also write the table (.csv, .xlsx or .html)")
    add_table_output_options(m)


def run_sentiment(args: argparse.Namespace) -> int:
    from opencode.analysis.sentiment import study as sentiment
    from opencode.files.safe_write import check_writable_target
    from opencode.study.store import Study

    if args.action == "score":
        with Study.open(args.study) as study:
            run = sentiment.score_question(study, args.question, cut=args.cut, by_sentence=not args.whole,
                                           actor=args.actor)
        print(sentiment.format_run(run))
        return 0
    from opencode.analysis.tables.output import format_table, table_records, to_html, write_csv, write_xlsx

    for path in table_targets(args):
        check_writable_target(path)

    if args.out:
        if Path(args.out).suffix.lower() not in MIX_SUFFIXES:
            raise OpenCodeError(f"{args.out}: the mix is written as {', '.join(MIX_SUFFIXES)}")
        check_writable_target(args.out)
    with Study.open(args.study) as study:
        table = sentiment.question_mix(study, args.question, coder=args.coder,
                                       include_suggestions=args.with_suggestions, weight=args.weight,
                                       unweighted=args.unweighted)
    if not emit_table(args, table_records(table), "mix table"):
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
