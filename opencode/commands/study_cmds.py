"""`oecode new` (import a survey into a study) and `oecode info` (what a study holds)."""

from __future__ import annotations

import argparse

from opencode.commands.common import (
    add_table_output_options, add_verb, emit_table, parse_number_list, parse_pairs, progress_line,
)


def register(subparsers: argparse._SubParsersAction) -> None:
    new = add_verb(subparsers, "new", "create a study from a survey file, or merge a later wave into one", [
        "oecode new survey.study --from survey.sav --id resp_id --question q12_why --question q13_improve",
        "oecode new survey.study --from wave2.csv --id resp_id --question q12_why --missing support=9"])
    new.add_argument("study", help="the study file (NAME.study); merged into if it exists")
    new.add_argument("--from", dest="source", required=True, help="CSV, TSV, XLSX, SPSS .sav, Stata .dta or Parquet")
    new.add_argument("--id", dest="id_column", required=True, help="the respondent id column")
    new.add_argument("--question", action="append", default=[], help="an open question column (repeat)")
    new.add_argument("--sheet", help="XLSX: the sheet name or number (default: the first)")
    new.add_argument("--encoding", help="force the text encoding (default: detected)")
    new.add_argument("--delimiter", help="force the CSV delimiter (default: sniffed)")
    new.add_argument("--labels", help="a data map CSV: variable,label,code,value_label,missing")
    new.add_argument("--kind", action="append", metavar="COL=KIND", help="override a column's kind "
                     "(single, multiple, numeric, date, text)")
    new.add_argument("--role", action="append", metavar="COL=ROLE", help="set a column's role "
                     "(outcome, banner, weight, other)")
    new.add_argument("--weight", help="the survey weight column")
    new.add_argument("--multi", action="append", metavar="NAME=COL1,COL2,...",
                     help="combine 0/1 columns into one multiple-response variable")
    new.add_argument("--missing", action="append", metavar="COL=9,99", help="missing-value codes of a column")
    new.set_defaults(handler=run_new)

    info = add_verb(subparsers, "info", "questions, verbatim counts and closed-ended variables of a study",
                    ["oecode info survey.study"])
    info.add_argument("study")
    add_table_output_options(info, csv_help="the questions and variables as one CSV table instead of the text "
                                            "(or written to PATH)")
    info.set_defaults(handler=run_info)


def run_new(args: argparse.Namespace) -> int:
    from opencode.ingest.importer import ImportOptions, import_survey

    options = ImportOptions(
        id_column=args.id_column, questions=args.question, sheet=args.sheet, encoding=args.encoding,
        delimiter=args.delimiter, labels_file=args.labels, kinds=parse_pairs(args.kind, "--kind"),
        roles=parse_pairs(args.role, "--role"), weight=args.weight,
        multi={k: v.split(",") for k, v in parse_pairs(args.multi, "--multi").items()},
        missing={k: parse_number_list(v, "--missing") for k, v in parse_pairs(args.missing, "--missing").items()})
    report = import_survey(args.study, args.source, options, progress=progress_line)
    verb = "created" if report.created else "merged into"
    print(f"{verb} {report.study_path}: {report.respondents_added:,} new respondents, "
          f"{report.respondents_updated:,} already there; {report.verbatims_added:,} verbatims "
          f"({report.nonanswers:,} non-answers flagged, kept)")
    if report.encoding:
        print(f"read as {report.encoding}")
    for changed in report.changed_verbatims[:20]:
        print(f"  changed text kept as it was: {changed.question} / respondent {changed.respondent}: "
              f"{changed.old_text[:40]!r} -> {changed.new_text[:40]!r}")
    if len(report.changed_verbatims) > 20:
        print(f"  ... and {len(report.changed_verbatims) - 20} more changed verbatims")
    return 0


def run_info(args: argparse.Namespace) -> int:
    from opencode.study.store import Study
    from opencode.study.summary import format_summary, summarise, summary_records

    with Study.open(args.study) as study:
        summary = summarise(study)
    if not emit_table(args, summary_records(summary), "study summary"):
        print(format_summary(summary))
    return 0
