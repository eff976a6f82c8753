"""`oecode tables`, `oecode export` and `oecode report`: coded results out of the study."""

from __future__ import annotations

import argparse
import html
import sys
from pathlib import Path

from opencode.analysis import coded_data
from opencode.analysis.table_output import TABLE_CSS, format_table, to_html, write_csv, write_xlsx
from opencode.analysis.tables import banner_table, code_frequencies
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.export import spss_stata, tabular, triple_s
from opencode.export.safe_write import atomic_open, check_writable_target
from opencode.study.store import Study

EXPORT_FORMATS = ("csv", "xlsx", "sav", "dta", "sss")
TABLE_SUFFIXES = (".csv", ".xlsx", ".html")
RAW_REMINDER = ("reminder: verbatims can identify respondents; your organisation's data-protection rules come "
                "first: share this file only as they allow")
MASKED_REMINDER = ("verbatims masked: e-mail addresses, phone numbers and web addresses replaced; names and other "
                   "details can remain")


def register(subparsers: argparse._SubParsersAction) -> None:
    tables = subparsers.add_parser("tables", help="code frequencies, or codes by banner variables with tests")
    tables.add_argument("study")
    tables.add_argument("--question", required=True, help="the open question")
    tables.add_argument("--banner", nargs="+", action="extend", default=[], metavar="VAR",
                        help="single-choice closed-ended variables across the top")
    _coding_options(tables)
    _weight_options(tables)
    tables.add_argument("--confidence", type=float, default=95, help="significance level in %% (default 95)")
    tables.add_argument("--lower", type=float, help="a second, lower level in %% marked in lower case (e.g. 90)")
    tables.add_argument("--out", help="also write the tables: .csv, .xlsx (a sheet per table) or .html")
    tables.set_defaults(handler=run_tables)

    export = subparsers.add_parser("export", help="coded data as CSV, XLSX, SPSS, Stata or Triple-S")
    export.add_argument("study")
    export.add_argument("--format", dest="fmt", help=f"one of {', '.join(EXPORT_FORMATS)} (default: from --out)")
    export.add_argument("--out", required=True, help="the file to write (sss: the metadata .sss beside its data)")
    export.add_argument("--question", nargs="+", action="extend", metavar="Q",
                        help="questions to export (default: every question with a code frame)")
    _coding_options(export)
    export.add_argument("--layout", choices=("dichotomy", "category"), default="dichotomy",
                        help="dichotomy: a 0/1 column per code and net; category: also Q_m1..Q_mk code columns")
    export.add_argument("--verbatims", choices=("omit", "masked", "raw"), default="omit",
                        help="include the verbatim text: masked (e-mails, phones, web addresses) or raw")
    closed = export.add_mutually_exclusive_group()
    closed.add_argument("--closed", nargs="+", action="extend", metavar="VAR", help="closed-ended variables to carry")
    closed.add_argument("--all-closed", action="store_true", help="carry every single-choice and numeric variable")
    export.add_argument("--sss-data", choices=triple_s.FORMATS, default="fixed", help="Triple-S data file layout")
    export.add_argument("--sss-multiple", choices=triple_s.MULTIPLE_LAYOUTS, default="bitstring",
                        help="Triple-S multiple-response layout")
    export.set_defaults(handler=run_export)

    report = subparsers.add_parser("report", help="one self-contained HTML report: frames, frequencies, charts, tables")
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
    if args.out and Path(args.out).suffix.lower() not in TABLE_SUFFIXES:
        raise OpenCodeError(f"{args.out}: tables are written as {', '.join(TABLE_SUFFIXES)}")
    if args.out:
        check_writable_target(args.out)
    with Study.open(args.study) as study:
        coding = coded_data.load_coding(study, args.question, args.coder, include_suggestions=args.with_suggestions)
        weight = None if args.unweighted else coded_data.survey_weight(study, args.weight)
        banners = [coded_data.banner_variable(study, name) for name in dict.fromkeys(args.banner)]
    question = coded_data.table_question(coding)
    frequencies = code_frequencies(question, weight)
    made = [frequencies]
    warnings = list(coding.notes)
    if frequencies.small_base:
        warnings.append(f"{args.question}: base {frequencies.base.n:,} is under {frequencies.min_base}; "
                        "percentages flagged (!)")
    if banners:
        table = banner_table(question, banners, weight, confidence=_level(args.confidence, "--confidence"),
                             lower_confidence=_level(args.lower, "--lower"))
        small = [c.label for c, flag in zip(table.columns, table.small_base & (table.base_n > 0)) if flag]
        if small:
            warnings.append(f"columns with bases under {table.min_base} flagged (!) and not tested: {', '.join(small)}")
        made.append(table)
    print(format_table(made[-1]))
    _warn(warnings)
    if args.out:
        print(f"wrote {_write_tables(made, Path(args.out))}")
    return 0


def _write_tables(made: list, out: Path) -> Path:
    """The printed table as CSV, every table as XLSX sheets or as one HTML page."""
    suffix = out.suffix.lower()
    if suffix == ".csv":
        return write_csv(made[-1], out)
    if suffix == ".xlsx":
        return write_xlsx(made, out)
    with atomic_open(out, "w") as handle:
        handle.write(f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>'
                     f"{html.escape(made[0].question_label)}</title><style>{TABLE_CSS}</style></head><body>\n"
                     + "".join(to_html(t) for t in made) + "</body></html>\n")
    return out


def run_export(args: argparse.Namespace) -> int:
    fmt = (args.fmt or Path(args.out).suffix.lstrip(".")).lower()
    if fmt not in EXPORT_FORMATS:
        raise OpenCodeError(f"unknown format {fmt or '(none)'!r}; choose one of {', '.join(EXPORT_FORMATS)} "
                            "with --format")
    target = check_writable_target(args.out)
    closed = None if args.all_closed else (args.closed or [])
    with Study.open(args.study) as study:
        dataset, codings = coded_data.coded_dataset(study, args.question, args.coder,
                                                    include_suggestions=args.with_suggestions, closed=closed,
                                                    with_text=args.verbatims != "omit")
    options = {"verbatims": args.verbatims}
    if fmt == "sss":
        written = triple_s.write_triple_s(dataset, target, data_format=args.sss_data, multiple=args.sss_multiple,
                                          **options)
    else:
        writer = {"csv": tabular.write_csv, "xlsx": tabular.write_xlsx, "sav": spss_stata.write_sav,
                  "dta": spss_stata.write_dta}[fmt]
        written = writer(dataset, target, category_columns=args.layout == "category", **options)
    for path in written:
        print(f"wrote {path}")
    print(f"{dataset.n_respondents:,} respondents; questions: {', '.join(c.question for c in codings)} "
          f"(coder {args.coder!r}); each question's <name>_status says coded / non-answer / not yet coded / no verbatim")
    _warn([note for c in codings for note in c.notes])
    if args.verbatims == "raw":
        print(RAW_REMINDER, file=sys.stderr)
    elif args.verbatims == "masked":
        print(MASKED_REMINDER, file=sys.stderr)
    return 0


def run_report(args: argparse.Namespace) -> int:
    from opencode.coding.reliability import parse_coders, study_agreement
    from opencode.export.report import build_report

    check_writable_target(args.out)
    notes: list[str] = []
    with Study.open(args.study) as study:
        questions = coded_data.coded_questions(study, args.question)
        agreement = None
        if args.coders:
            coders = parse_coders(args.coders)
            agreement = {q: study_agreement(study, q, coders) for q in questions}
        path = build_report(study, args.out, questions=questions, banner=args.banner, coder=args.coder,
                            include_suggestions=args.with_suggestions, weight=args.weight, unweighted=args.unweighted,
                            agreement=agreement, quotes_per_code=max(0, args.quotes),
                            mask_verbatims=not args.raw_verbatims, notes=notes)
    print(f"wrote {path}")
    _warn(notes)
    if args.raw_verbatims:
        print(RAW_REMINDER, file=sys.stderr)
    return 0
