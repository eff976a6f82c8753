"""`oecode drivers`: which terms of a question predict a closed-ended outcome (penalized logistic ranking)."""

from __future__ import annotations

import argparse
import csv
import sys
from typing import TYPE_CHECKING

from opencode.commands.common import (
    add_overwrite_option, add_table_output_options, emit_table, progress_bar, table_targets,
)
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter

if TYPE_CHECKING:
    from opencode.analysis.drivers import study as sdr

USAGE_NOTE = """splits (side 1 first, then side 0):
  --split "4,5 vs 1,2"     codes, ranges (4-5) or value labels
  --split top2             top 2 scale points against the bottom 2; "top2 vs rest" against all other answers
  --one-vs-rest            each valid category against every other one
  a two-valued outcome needs no split (the higher code is side 1)

examples:
  oecode drivers survey.study --question why --outcome support --split top2 --chart drivers.png
  oecode drivers survey.study --question why --outcome support --split "5 vs 1" --sort q --top 30
  oecode drivers survey.study --question why --outcome support --split top2 --indicators safe staff
"""


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "drivers", help="rank a question's terms by how they predict a closed-ended outcome",
        usage="oecode drivers STUDY --question Q --outcome VAR [options]",
        description="Rank the terms of a question's verbatims by how they predict a closed-ended outcome: a "
        "penalized logistic model chosen by cross-validation, selection stability, and each term's 2x2 table.",
        epilog=USAGE_NOTE, formatter_class=HelpFormatter)
    parser.add_argument("study", help="the study file")
    parser.add_argument("--question", required=True, help="the open question")
    parser.add_argument("--outcome", required=True, metavar="VAR", help="the closed-ended outcome variable")
    sides = parser.add_mutually_exclusive_group()
    sides.add_argument("--split", help="which answers form each side, e.g. '4,5 vs 1,2' or top2")
    sides.add_argument("--one-vs-rest", action="store_true", help="each category against all the others")
    parser.add_argument("--penalty", default="l2", choices=["l1", "l2", "elasticnet"],
                        help="l2 (default, best held-out prediction), l1 (a short list of terms) or elasticnet")
    parser.add_argument("--scoring", default="auc", choices=["log_loss", "auc"],
                        help="how cross-validation chooses the penalty (default auc, with the one-standard-error rule)")
    parser.add_argument("--balanced", action="store_true", help="weight the two sides equally in the model")
    parser.add_argument("--unweighted", action="store_true", help="ignore the study's survey weight")
    parser.add_argument("--min-df", type=int, default=5, help="keep terms found in at least this many verbatims "
                        "(default 5)")
    parser.add_argument("--holdout", type=float, default=0.0, metavar="SHARE",
                        help="hold out this share of verbatims (e.g. 0.2) and report the model's score on them")
    parser.add_argument("--subsamples", type=int, default=50, help="half-sample fits for selection stability "
                        "(default 50; 0 skips stability)")
    parser.add_argument("--random-state", type=int, default=0, help="the seed: the same seed gives the same ranking")
    parser.add_argument("--sort", default="stability", metavar="COLUMN", help="sort the table by this column "
                        "(stability, coef, odds_ratio, q, monroe_z, docs, label...; default stability)")
    order = parser.add_mutually_exclusive_group()
    order.add_argument("--ascending", action="store_true", help="sort smallest first (the default for p, q and "
                       "names)")
    order.add_argument("--descending", action="store_true", help="sort largest first (the default otherwise)")
    parser.add_argument("--top", type=int, default=20, metavar="N", help="rows to print (default 20)")
    parser.add_argument("--force", action="store_true", help="print the table even when the text barely predicts "
                        "the outcome")
    parser.add_argument("--chart", metavar="PATH.png", help="write a chart of the top terms on each side")
    add_table_output_options(parser, wide=True,
                             csv_help="every term of every comparison as CSV: alone, on stdout instead of the text; "
                                      "with PATH, written to the file")
    parser.add_argument("--indicators", nargs="+", metavar="TERM", help="store 0/1 variables '<question>_t_<term>' "
                        "for these terms, for tables and exports")
    parser.add_argument("--actor", default="oecode", help="who makes the change (for the audit trail)")
    add_overwrite_option(parser)
    parser.set_defaults(handler=run_drivers)


def run_drivers(args: argparse.Namespace) -> int:
    import pandas as pd

    from opencode.analysis.drivers import study as sdr
    from opencode.files.targets import check_targets
    from opencode.study.store import Study

    if args.top < 1:
        raise OpenCodeError(f"--top {args.top}: give at least 1")
    if args.chart and not args.chart.lower().endswith(".png"):
        raise OpenCodeError(f"--chart {args.chart}: the chart is a PNG file; end the name in .png")
    check_targets([(path, None) for path in (args.chart, *table_targets(args)) if path])  # before the slow work
    with Study.open(args.study) as study:
        result = sdr.question_drivers(
            study, args.question, args.outcome, split=args.split, one_vs_rest=args.one_vs_rest,
            penalty=args.penalty, scoring=args.scoring, class_weight="balanced" if args.balanced else None,
            weighted=not args.unweighted, min_df=args.min_df, holdout=args.holdout, n_subsamples=args.subsamples,
            random_state=args.random_state, progress=progress_bar("fitting"))
        ascending = True if args.ascending else (False if args.descending else None)
        sdr.remember_choice(study, args.question, args.outcome, split=args.split, one_vs_rest=args.one_vs_rest,
                            actor=args.actor)
        tables = [sdr.sorted_table(result, c, args.sort, ascending) for c in result.comparisons]
        ranked = pd.concat([t.assign(comparison=c.title) for c, t in zip(result.comparisons, tables)],
                           ignore_index=True)
        ranked = ranked[["comparison", *[c for c in ranked.columns if c != "comparison"]]]
        data = emit_table(argparse.Namespace(csv="-" if args.csv == "-" else None, json=args.json), ranked,
                          "ranking table")
        say = sys.stderr if data else sys.stdout  # stdout carries only the data then
        if not data:
            print(sdr.format_drivers(result, sort_by=args.sort, ascending=ascending, n=args.top, force=args.force,
                                     wide=args.wide))
        if args.chart:
            for path in sdr.drivers_chart(result, args.chart):
                print(f"chart written to {path}", file=say)
        if args.csv and args.csv != "-":
            print(f"ranking table written to {write_csv(result, tables, args.csv)}", file=say)
        if args.indicators:
            names = sdr.write_indicators(study, args.question, result, args.indicators, actor=args.actor)
            print("indicator variables stored: " + ", ".join(names), file=say)
    return 0


def write_csv(result: sdr.StudyDrivers, tables, path: str):
    """Every term of every comparison, one row each (cells guarded against spreadsheet formulas)."""
    from opencode.files.cell_guard import guard_row
    from opencode.files.safe_write import atomic_open

    with atomic_open(path, newline="") as handle:
        writer = csv.writer(handle)
        columns = list(tables[0].columns)
        writer.writerow(["comparison", *columns])
        for comparison, table in zip(result.comparisons, tables):
            for row in table.itertuples(index=False):
                writer.writerow(guard_row([comparison.title, *row]))
    return path
