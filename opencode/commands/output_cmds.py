"""`oecode tables`, `oecode export` and `oecode report`: coded results out of the study."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from opencode.analysis.choices import TABLE_SUFFIXES
from opencode.coding.choices import FINAL
from opencode.errors import OpenCodeError
from opencode.export.choices import EXPORT_FORMATS, SSS_FORMATS, SSS_MULTIPLE_LAYOUTS
from opencode.commands.common import (
    add_overwrite_option, add_table_output_options, add_verb, emit_table, table_targets,
)
RAW_REMINDER = ("reminder: verbatims can identify respondents; your organisation's data-protection rules come "
                "first: share this file only as they allow")
MASKED_REMINDER = ("verbatims masked: e-mail addresses, phone numbers and web addresses replaced; names and other "
                   "details can remain")


def register(subparsers: argparse._SubParsersAction) -> None:
    tables = add_verb(subparsers, "tables", "code frequencies, or codes by banner variables with tests", [
        "oecode tables survey.study --question why --banner support children",
        "oecode tables survey.study --question why --ci --out tables.xlsx"])
    tables.add_argument("study")
    tables.add_argument("--question", required=True, help="the open question")
    tables.add_argument("--banner", nargs="+", action="extend", default=[], metavar="VAR",
                        help="single-choice closed-ended variables across the top")
    _coding_options(tables)
    _weight_options(tables)
    tables.add_argument("--confidence", type=float, default=95, help="significance level in %% (default 95)")
    tables.add_argument("--lower", type=float, help="a second, lower level in %% marked in lower case (e.g. 90)")
    tables.add_argument("--ci", action="store_true", help="show each percentage's Wilson score interval at the "
                        "--confidence level (on the Kish effective base when weighted)")
    tables.add_argument("--out", help="also write the tables: .csv, .xlsx (a sheet per table) or .html")
    add_table_output_options(tables, csv_help="one row per code and net with every number of the tables (shares "
                                              "0-1, letters, q) as CSV instead of the text (or written to PATH)")
    add_overwrite_option(tables)
    tables.set_defaults(handler=run_tables)

    export = add_verb(subparsers, "export", "coded data as CSV, XLSX, SPSS, Stata or Triple-S", [
        "oecode export survey.study --out why.sav --question why --all-closed",
        "oecode export survey.study --format sss --out why.sss --verbatims masked"])
    export.add_argument("study")
    export.add_argument("--format", dest="fmt", help=f"one of {', '.join(EXPORT_FORMATS)} (default: from --out)")
    export.add_argument("--out", required=True, help="the file to write (sss: the metadata .sss beside its data)")
    export.add_argument("--question", nargs="+", action="extend", metavar="Q",
                        help="questions to export (default: every question with a code frame)")
    _coding_options(export)
    export.add_argument("--layout", choices=("flags", "mentions"), default="flags",
                        help="flags: a 0/1 column per code and net; mentions: also Q_m1..Q_mk columns holding code numbers")
    export.add_argument("--verbatims", choices=("omit", "masked", "raw"), default="omit",
                        help="include the verbatim text: masked (e-mails, phones, web addresses) or raw")
    closed = export.add_mutually_exclusive_group()
    closed.add_argument("--closed", nargs="+", action="extend", metavar="VAR", help="closed-ended variables to carry")
    closed.add_argument("--all-closed", action="store_true", help="carry every single-choice and numeric variable")
    export.add_argument("--sss-data", choices=SSS_FORMATS, default="fixed", help="Triple-S data file layout")
    export.add_argument("--sss-multiple", choices=SSS_MULTIPLE_LAYOUTS, default="bitstring",
                        help="Triple-S multiple-response layout")
    add_overwrite_option(export)
    export.set_defaults(handler=run_export)

    report = add_verb(subparsers, "report", "one self-contained HTML report: frames, frequencies, charts, tables",
                      ["oecode report survey.study --out report.html --banner support --coders ash,bryn"])
    report.add_argument("study")
    report.add_argument("--out", required=True, help="the report file (.html)")
    report.add_argument("--question", nargs="+", action="extend", metavar="Q",
                        help="questions (default: every question with a code frame)")
    report.add_argument("--banner", nargs="+", action="extend", default=[], metavar="VAR")
    _coding_options(report)
    _weight_options(report)
    report.add_argument("--coders", help="add coder agreement between these coders, e.g. ash,bryn")
    report.add_argument("--quotes", type=int, default=2, help="example verbatims per code (default 2; 0 for none)")
    report.add_argument("--raw-verbatims", action="store_true", help="quote verbatims without masking")
    add_overwrite_option(report)
    report.set_defaults(handler=run_report)


def _coding_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--coder", default=FINAL, help=f"whose codes (default {FINAL!r}, the adjudicated set)")
    parser.add_argument("--with-suggestions", action="store_true",
                        help="count machine and rule suggestions not yet accepted by a person")


def _weight_options(parser: argparse.ArgumentParser) -> None:
    weights = parser.add_mutually_exclusive_group()
    weights.add_argument("--weight", help="the weight variable (default: the study's weight, if any)")
    weights.add_argument("--unweighted", action="store_true", help="ignore the survey weight")


def _warn(lines: list[str]) -> None:
    for line in lines:
        print(f"warning: {line}", file=sys.stderr)


def _level(percent: float | None, option: str) -> float | None:
    if percent is None:
        return None
    if not 0 < percent < 100:
        raise OpenCodeError(f"{option} must be a percentage between 0 and 100, got {percent:g}")
    return percent / 100


def run_tables(args: argparse.Namespace) -> int:
    from opencode.analysis.tables.output import format_table
    from opencode.analysis.tables.study import question_tables, write_tables
    from opencode.files.safe_write import check_writable_target
    from opencode.study.store import Study

    if args.out and Path(args.out).suffix.lower() not in TABLE_SUFFIXES:
        raise OpenCodeError(f"{args.out}: tables are written as {', '.join(TABLE_SUFFIXES)}")
    for path in [args.out, *table_targets(args)]:
        if path:
            check_writable_target(path)
    with Study.open(args.study) as study:
        made = question_tables(study, args.question, args.banner, coder=args.coder,
                               include_suggestions=args.with_suggestions, weight=args.weight,
                               unweighted=args.unweighted, confidence=_level(args.confidence, "--confidence"),
                               lower_confidence=_level(args.lower, "--lower"), intervals=args.ci)
    if not emit_table(args, made.to_full_frame(), "table"):
        print(format_table(made.tables[-1]))
    _warn(made.warnings)
    if args.out:
        print(f"wrote {write_tables(made.tables, args.out)}")
    return 0


def run_export(args: argparse.Namespace) -> int:
    from opencode.export.study_export import export_study, export_targets
    from opencode.study.store import Study

    export_targets(args.out, args.fmt, args.sss_data)
    closed = None if args.all_closed else (args.closed or [])
    with Study.open(args.study) as study:
        result = export_study(study, args.out, args.fmt, questions=args.question, coder=args.coder,
                              include_suggestions=args.with_suggestions, closed=closed, layout=args.layout,
                              verbatims=args.verbatims, sss_data=args.sss_data, sss_multiple=args.sss_multiple)
    for path in result.written:
        print(f"wrote {path}")
    print(f"{result.n_respondents:,} respondents; questions: {', '.join(result.questions)} "
          f"(coder {args.coder!r}); each question's <name>_status says coded / non-answer / not yet coded / no verbatim")
    _warn(result.notes)
    if args.verbatims == "raw":
        print(RAW_REMINDER, file=sys.stderr)
    elif args.verbatims == "masked":
        print(MASKED_REMINDER, file=sys.stderr)
    return 0


def run_report(args: argparse.Namespace) -> int:
    from opencode.analysis.agreement.study import question_agreement
    from opencode.coding.reliability import parse_coders
    from opencode.analysis.tables import coded_data
    from opencode.export.report import build_report
    from opencode.files.safe_write import check_writable_target
    from opencode.study.store import Study

    check_writable_target(args.out)
    notes: list[str] = []
    with Study.open(args.study) as study:
        questions = coded_data.coded_questions(study, args.question)
        agreement = None
        if args.coders:
            coders = parse_coders(args.coders)
            agreement = {q: question_agreement(study, q, coders) for q in questions}
        path = build_report(study, args.out, questions=questions, banner=args.banner, coder=args.coder,
                            include_suggestions=args.with_suggestions, weight=args.weight, unweighted=args.unweighted,
                            agreement=agreement, quotes_per_code=max(0, args.quotes),
                            mask_verbatims=not args.raw_verbatims, notes=notes)
    print(f"wrote {path}")
    _warn(notes)
    if args.raw_verbatims:
        print(RAW_REMINDER, file=sys.stderr)
    return 0
