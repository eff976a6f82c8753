"""`oecode sample ACTION` (reliability samples for blind double coding) and `oecode agree` (agreement, adjudication)."""

from __future__ import annotations

import argparse
import html
from typing import TYPE_CHECKING

from opencode.analysis.choices import AGREEMENT_ALPHA_BAR, AGREEMENT_KAPPA_BAR
from opencode.analysis.choices import AGREEMENT_LEVELS as LEVELS
from opencode.coding.choices import MACHINE
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter
from opencode.commands.common import (
    add_action, add_actions, add_overwrite_option, add_table_output_options, add_verb, emit_table,
)

if TYPE_CHECKING:
    from opencode.study.store import Study

ADJUDICATE = ("agreed", "take", "union", "set", "undo")


def register(subparsers: argparse._SubParsersAction) -> None:
    verb = subparsers.add_parser("sample", help="reliability samples: draw verbatims for blind double coding, "
                                 "assign them to coders, follow progress",
                                 description="Reliability samples: draw verbatims for blind double coding, "
                                 "assign them to coders, follow their progress.",
                                 epilog="example:\n  oecode sample draw survey.study --question why --name check "
                                 "--n 150", formatter_class=HelpFormatter)
    actions = add_actions(verb)
    S = "survey.study --question why"
    s = add_action(actions, "draw", "draw a sample of verbatims (stratified on request)",
                   [f"oecode sample draw {S} --name check --n 150 --strata support",
                    f"oecode sample draw {S} --name check --percent 10"])
    _question(s)
    _name(s)
    size = s.add_mutually_exclusive_group()
    size.add_argument("--n", type=int, help="how many verbatims")
    size.add_argument("--percent", type=float, help="what percentage of the verbatims")
    s.add_argument("--strata", help="a closed-ended variable to stratify by (proportional allocation)")
    s.add_argument("--seed", type=int, default=0, help="the random seed (default 0; same seed, same sample)")
    s.add_argument("--include-nonanswers", action="store_true", help="also draw non-answers")
    _actor(s)
    s = add_action(actions, "assign", "give a sample to coders, who then code it blind",
                   [f"oecode sample assign {S} --name check --coders ash,bryn"])
    _question(s)
    _name(s)
    s.add_argument("--coders", help="the coders, comma-separated (e.g. ash,bryn; needed)")
    _actor(s)
    s = add_action(actions, "status", "how far each coder is with a sample",
                   [f"oecode sample status {S} --name check"])
    _question(s)
    _name(s)
    add_table_output_options(s)
    s = add_action(actions, "list", "the samples of a question", [f"oecode sample list {S}"])
    _question(s)
    for s in actions.choices.values():
        s.set_defaults(handler=run_sample)

    a = add_verb(subparsers, "agree", "agreement between coders (kappa, alpha, AC1) and adjudication into final", [
        "oecode agree survey.study --question why --coders ash,bryn --differences 5",
        "oecode agree survey.study --question why --coders ash,bryn --kappa-bar 0.7 --alpha-bar 0.8",
        "oecode agree survey.study --question why --coders ash,bryn --adjudicate agreed",
        "oecode agree survey.study --question why --coders ash,bryn --adjudicate take --respondent WR04180 "
        "--side ash"])
    a.add_argument("study")
    a.add_argument("--question", required=True, help="the open question")
    a.add_argument("--coders", required=True, help=f"coders compared, comma-separated; {MACHINE!r} "
                   "stands for the machine coder's suggestions")
    a.add_argument("--sample", help="only the verbatims of this reliability sample")
    a.add_argument("--resamples", type=int, default=1000, help="bootstrap resamples for intervals (0: none)")
    a.add_argument("--seed", type=int, default=0, help="bootstrap seed")
    a.add_argument("--top", type=int, default=10, help="how many disputed verbatims and swapped codes to list")
    add_table_output_options(a, csv_help="the statistics per code as CSV on stdout instead of the text; with PATH, "
                                         "also write the results as a long CSV file",
                             json_help="the statistics per code as JSON records on stdout instead of the text (or "
                                       "written to PATH)")
    a.add_argument("--html", help="also write the results as an HTML page")
    a.add_argument("--differences", type=int, metavar="N", help="list N verbatims where the coders differ")
    a.add_argument("--kappa-bar", type=float, default=AGREEMENT_KAPPA_BAR, metavar="K",
                   help=f"flag a code whose kappa interval reaches under K (default {AGREEMENT_KAPPA_BAR:.2f}: above "
                   "it Landis & Koch 1977 read substantial)")
    a.add_argument("--alpha-bar", type=float, default=AGREEMENT_ALPHA_BAR, metavar="A",
                   help=f"flag a code whose Krippendorff's alpha interval reaches under A (default "
                   f"{AGREEMENT_ALPHA_BAR}: Krippendorff 2004's lowest for tentative conclusions)")
    a.add_argument("--include-special-codes", action="store_true", help="count the frame's non-answer and "
                   "don't-know codes in the headline mean (left out by default: they agree almost by construction)")
    a.add_argument("--level", choices=LEVELS, help="the codes' level of measurement: nominal (per-code statistics, "
                   "the default) or ordinal / interval / ratio when the codes form a scale (one per verbatim); "
                   "remembered for the question and used by the report")
    a.add_argument("--weights", choices=("linear", "quadratic"), help="credit for near misses on a scale "
                   "(default: linear for ordinal, quadratic for interval and ratio)")
    a.add_argument("--scale", help="the codes forming the scale, low to high, comma-separated (default: every "
                   "code of the frame by number)")
    a.add_argument("--adjudicate", choices=ADJUDICATE, help="agreed: put verbatims all coders coded alike into "
                   "final; take / union / set: settle one --respondent's verbatim; undo: reverse final's last change")
    one = a.add_mutually_exclusive_group()
    one.add_argument("--respondent", metavar="ID", help="adjudicate take / union / set: the survey's respondent id "
                     "(as --differences and the desk's go-to show it)")
    one.add_argument("--verbatim-id", type=int, metavar="N", help="adjudicate take / union / set: the study's "
                     "internal verbatim number instead (older scripts)")
    a.add_argument("--side", help="adjudicate take: whose codes final takes")
    a.add_argument("--codes", help="adjudicate set: final's codes, comma-separated numbers (empty: no code)")
    a.add_argument("--actor", default="oecode", help="who adjudicates (for the audit trail)")
    add_overwrite_option(a)
    a.set_defaults(handler=run_agree)


def _question(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--question", required=True, help="the open question")


def _name(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--name", help="the sample's name (needed)")


def _actor(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--actor", default="oecode", help="who does this (for the audit trail)")


def _need(args: argparse.Namespace, verb: str, *names: str) -> None:
    for name in names:
        if getattr(args, name) is None:
            raise OpenCodeError(f"{verb}: --{name.replace('_', '-')} is needed")


def run_sample(args: argparse.Namespace) -> int:
    from opencode.coding import reliability
    from opencode.study.store import Study

    with Study.open(args.study) as study:
        if args.action == "list":
            found = reliability.list_samples(study, args.question)
            print("\n\n".join(map(reliability.format_sample, found)) if found
                  else f"question {args.question!r} has no reliability samples yet")
            return 0
        _need(args, f"sample {args.action}", "name")
        if args.action == "draw":
            if args.n is None and args.percent is None:
                raise OpenCodeError("sample draw: give --n N or --percent P")
            drawn = reliability.draw_sample(study, args.question, args.name, n=args.n, percent=args.percent,
                                            strata=args.strata, random_state=args.seed,
                                            include_nonanswers=args.include_nonanswers, actor=args.actor)
            print(reliability.format_sample(drawn))
        elif args.action == "assign":
            _need(args, "sample assign", "coders")
            assigned = reliability.assign_sample(study, args.question, args.name, args.coders, actor=args.actor)
            print(f"sample {assigned.name}: {len(assigned.verbatim_ids):,} verbatims, coded blind by "
                  f"{', '.join(assigned.coders)}")
        else:
            status = reliability.sample_status(study, args.question, args.name)
            n = len(status.sample.verbatim_ids)
            if not emit_table(args, [{"coder": p.coder, "finished": p.finished, "to_do": p.remaining,
                                      "done_share": p.finished / n if n else None} for p in status.progress],
                              "sample status"):
                print(reliability.format_sample_status(status))
    return 0


def _adjudicate(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import adjudication, reliability

    verb = f"agree --adjudicate {args.adjudicate}"
    if args.adjudicate == "agreed":
        count = adjudication.accept_agreed(study, args.question, args.coders, args.sample, actor=args.actor)
        print(f"final: {count:,} verbatims that {', '.join(reliability.parse_coders(args.coders))} coded alike "
              "were settled" + (" (undo with --adjudicate undo)" if count else ""))
        return
    if args.adjudicate == "undo":
        action = adjudication.undo_last(study)
        print(f"undid final's last change ({action})" if action else "final has nothing to undo")
        return
    if args.respondent is None and args.verbatim_id is None:
        raise OpenCodeError(f"{verb}: --respondent is needed (the survey's respondent id, as --differences shows "
                            "it)")
    verbatim = (adjudication.verbatim_of_respondent(study, args.question, args.respondent)
                if args.respondent is not None else args.verbatim_id)
    if args.adjudicate == "take":
        _need(args, verb, "side")
        held = adjudication.take(study, args.question, verbatim, args.side)
    elif args.adjudicate == "union":
        held = adjudication.take_union(study, args.question, verbatim, args.coders)
    else:
        _need(args, verb, "codes")
        try:
            numbers = [int(x) for x in args.codes.split(",") if x.strip()]
        except ValueError as error:
            raise OpenCodeError(f"{verb}: --codes {args.codes!r} is not a comma-separated list of code "
                                "numbers") from error
        held = adjudication.set_final(study, args.question, verbatim, numbers)
    who = (f"respondent {args.respondent.strip()}" if args.respondent is not None
           else adjudication.respondent_of(study, verbatim))
    print(f"final now holds {', '.join(map(str, held)) or 'no code'} for {who}")


def _scale_codes(text: str | None) -> list[int] | None:
    if text is None:
        return None
    try:
        return [int(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise OpenCodeError(f"--scale {text!r} is not a comma-separated list of code numbers, e.g. 1,2,3,4,5") from None


def _write_html(path: str, fragment: str, title: str) -> None:
    from opencode.files.safe_write import atomic_open

    with atomic_open(path, "w") as handle:
        handle.write(f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>{html.escape(title)}'
                     f"</title></head><body>\n{fragment}\n</body></html>\n")


def _agreement_frame(result):
    """The agreement statistics as one table: per code for nominal codes, the scale table for a scale."""
    if hasattr(result, "to_frame"):
        return result.to_frame()
    import pandas as pd

    from opencode.analysis.agreement.report import _SCALE_HEADERS, _scale_rows

    return pd.DataFrame(_scale_rows(result), columns=_SCALE_HEADERS)


def run_agree(args: argparse.Namespace) -> int:
    from opencode.analysis.agreement.report import (format_agreement_html, format_agreement_text,
                                                   format_scale_agreement_text, write_agreement_csv,
                                                   write_scale_agreement_csv)
    from opencode.analysis.agreement.scale import ScaleAgreementResult
    from opencode.analysis.agreement.study import question_agreement, remember_level
    from opencode.coding import adjudication, reliability
    from opencode.files.targets import check_target
    from opencode.study.store import Study

    for path in (args.csv, args.json):
        if path and path != "-":
            check_target(path)  # before the slow work
    with Study.open(args.study) as study:
        if args.adjudicate:
            _adjudicate(study, args)
            return 0
        scale = _scale_codes(args.scale)
        result = question_agreement(study, args.question, args.coders, args.sample, n_resamples=args.resamples,
                                    random_state=args.seed, top=args.top, level=args.level, weights=args.weights,
                                    scale=scale, include_special=args.include_special_codes,
                                    kappa_bar=args.kappa_bar, alpha_bar=args.alpha_bar)
        if args.level:
            remember_level(study, args.question, args.level, args.weights, scale, actor=args.actor)
        where = f"question {args.question}" + (f", reliability sample {args.sample}" if args.sample else "")
        on_scale = isinstance(result, ScaleAgreementResult)
        if emit_table(argparse.Namespace(csv="-" if args.csv == "-" else None, json=args.json),
                      _agreement_frame(result), "agreement table"):
            return 0
        print(f"Agreement on {where}\n")
        hint = "" if args.include_special_codes else "Count them in with --include-special-codes."
        print(format_scale_agreement_text(result) if on_scale else format_agreement_text(result, special_hint=hint),
              end="")
        if args.csv and args.csv != "-":
            print(f"\nwrote {(write_scale_agreement_csv if on_scale else write_agreement_csv)(result, args.csv)}")
        if args.html:
            _write_html(args.html, format_agreement_html(result, f"Coder agreement: {where}"),
                        f"Coder agreement: {where}")
            print(f"wrote {args.html}")
        if args.differences is not None:
            found = adjudication.differences(study, args.question, args.coders, args.sample, args.differences)
            print(f"\nVerbatims where the coders differ (first {args.differences})\n")
            print(adjudication.format_differences(found, reliability.code_labels(study, args.question)))
    return 0
