"""`oecode model ACTION STUDY --question Q`: keyword-rule pre-coding and the machine coder.

Machine and rule codes are suggestions until a person accepts them at the desk.
"""

from __future__ import annotations

import argparse

from typing import TYPE_CHECKING

from opencode.files.help_text import HelpFormatter
from opencode.coding.choices import FINAL
from opencode.commands.common import add_action, add_actions, add_table_output_options, emit_table, progress_line

if TYPE_CHECKING:
    from opencode.study.store import Study

SUGGESTION_NOTE = "machine codes are suggestions: they count only once a person accepts them at the desk"


def register(subparsers: argparse._SubParsersAction) -> None:
    verb = subparsers.add_parser("model", help="pre-code by keyword rules; train and use the machine coder",
                                 description="Pre-code a question by its keyword rules, or train the machine coder "
                                 "on people's codes and use its suggestions. Machine and rule codes are "
                                 "suggestions until a person accepts them at the desk.",
                                 epilog="example:\n  oecode model train survey.study --question why",
                                 formatter_class=HelpFormatter)
    actions = add_actions(verb)
    S = "survey.study --question why"
    p = add_action(actions, "train", "train the machine coder on people's codes (cross-validated per code)",
                   [f"oecode model train {S}", f"oecode model train {S} --coder ash --min-examples 10"])
    _question(p)
    p.add_argument("--coder", help="learn from this coder only (default: every person's codes)")
    p.add_argument("--min-examples", type=int, default=5, help="skip codes with fewer coded examples (default 5)")
    p.add_argument("--max-iter", type=int, default=100, metavar="N", help="iteration limit of each logistic fit "
                   "(default 100; the notes say when fits reach it)")
    p = add_action(actions, "report", "the trained model: precision, recall, F1 and kappa per code",
                   [f"oecode model report {S}"])
    _question(p)
    add_table_output_options(p)
    p = add_action(actions, "curve", "coverage against accuracy: how much the model can code at each threshold",
                   [f"oecode model curve {S} --threshold 0.9"])
    _question(p)
    p.add_argument("--threshold", type=float, help="show per-code precision and recall at this threshold "
                   "(default 0.80)")
    add_table_output_options(p, csv_help="the curve (one row per threshold) as CSV instead of the text (or "
                                         "written to PATH)")
    p = add_action(actions, "suggest", "the likeliest codes of verbatims a coder has not coded",
                   [f"oecode model suggest {S} --coder ash --limit 10"])
    _question(p)
    _coder(p)
    _limit(p)
    p = add_action(actions, "apply", "store the model's suggestions above a threshold",
                   [f"oecode model apply {S} --threshold 0.9", f"oecode model apply {S} --target-accuracy 0.95"])
    _question(p)
    _coder(p)
    sure = p.add_mutually_exclusive_group()
    sure.add_argument("--threshold", type=float, help="code only verbatims the model is this sure about")
    sure.add_argument("--target-accuracy", type=float, help="pick the threshold reaching this accuracy")
    p = add_action(actions, "queue", "verbatims for people: least sure (learn) or worth a second look",
                   [f"oecode model queue {S} --kind second-look --limit 5"])
    _question(p)
    _coder(p)
    p.add_argument("--kind", choices=("learn", "second-look"), default="learn",
                   help="learn: what the model is least sure about (default); second-look: hand codes it "
                   "strongly disagrees with")
    _limit(p)
    add_table_output_options(p)
    p = add_action(actions, "rules", "pre-code verbatims by the frame's keyword rules (as suggestions)",
                   [f"oecode model rules {S} --coder ash"])
    _question(p)
    _coder(p)
    for p in actions.choices.values():
        p.set_defaults(handler=run)


def _question(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--question", required=True, help="the open question")


def _coder(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--coder", help=f"for this coder (default {FINAL})")


def _limit(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--limit", type=int, default=20, help="how many to show (default 20)")


def run(args: argparse.Namespace) -> int:
    from opencode.study.store import Study

    with Study.open(args.study) as study:
        globals()[f"_{args.action.replace('-', '_')}"](study, args)
    return 0


def _coder_of(args: argparse.Namespace) -> str:
    return args.coder or FINAL


def _train(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding

    machine_coding.require_access(study)  # before the progress line: a coder gets the refusal alone
    progress_line("analysing verbatims and cross-validating each code")
    trained = machine_coding.train(study, args.question, coder=args.coder, min_examples=args.min_examples,
                                   max_iter=args.max_iter)
    print(f"model {trained.id}: suggests {len(trained.model.classes_)} of {len(trained.model.codes_)} codes")
    _report(study, args)
    print("next, see how much the model can code alone at each threshold: "
          + _command("model", "curve", args.study, "--question", args.question))


def _report(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding
    from opencode.files.textout import format_table

    trained = machine_coding.load_model(study, args.question)
    rows = machine_coding.code_report(study, args.question)
    if emit_table(args, rows, "model report"):
        return
    for note in trained.notes:
        print(note)
    print("cross-validated, machine versus human (probability 0.5):")
    print(format_table(["code", "label", "examples", "precision", "recall", "F1", "kappa"],
                       [[r["code"], r["label"][:40], r["examples"], r["precision"], r["recall"], r["f1"], r["kappa"]]
                        if r["suggests"] else [r["code"], r["label"][:40], r["examples"], "cannot suggest", "", "", ""]
                        for r in rows], note="in code-frame order"))


def _share(value: float) -> str:
    return "-" if value != value else f"{value:.1%}"


def _ratio(value: float) -> str:
    return "-" if value != value else f"{value:.3f}"


def _command(*words: str) -> str:
    """A command line a user can paste as it is: `oecode` and the words, each quoted for the shell if needed."""
    import shlex

    return " ".join(["oecode", *(shlex.quote(str(w)) for w in words)])


def _curve(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding
    from opencode.files.textout import format_table

    report = machine_coding.curve(study, args.question, code_threshold=0.8 if args.threshold is None
                                  else args.threshold)
    if emit_table(args, report.rows, "coverage curve"):
        return
    print("semi-automatic coding: the model codes a verbatim only when sure of every code it can suggest; "
          "people code the rest")
    print(format_table(["threshold", "auto-coded", "accuracy", "precision", "recall", "verbatims"],
                       [[f"{r['threshold']:.2f}", _share(r["coverage"]), _share(r["accuracy"]), _ratio(r["precision"]),
                         _ratio(r["recall"]), r["verbatims"]] for r in report.rows], align="rrrrrr",
                       note="by threshold"))
    print(f"per code on the verbatims auto-coded at {report.threshold:.2f}:")
    print(format_table(["code", "label", "machine", "person", "both", "precision", "recall", ""],
                       [[c["code"], c["label"][:40], c["machine"], c["person"], c["both"], _ratio(c["precision"]),
                         _ratio(c["recall"]), "" if c["suggests"] else "cannot suggest"] for c in report.codes],
                       align="rlrrrrrl", note="in code-frame order"))
    for note in report.notes:
        print(f"- {note}")
    if report.suggested_threshold is None:
        print(f"no threshold to suggest: {report.suggestion}")
        return
    print(f"suggested threshold {report.suggested_threshold:.2f} ({report.suggestion}); to store the model's codes "
          "there as suggestions for people to accept (pick another threshold from the table if its accuracy suits "
          "you better):")
    print("  " + _command("model", "apply", args.study, "--question", args.question, "--threshold",
                          f"{report.suggested_threshold:.2f}"))


def _suggest(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding
    from opencode.files.textout import format_table

    proba = machine_coding.suggest(study, args.question, coder=_coder_of(args))
    shown = proba.head(args.limit)
    respondents = machine_coding.respondent_ids(study, args.question, shown.index.tolist())
    rows = []
    for respondent, (_, values) in zip(respondents, shown.iterrows()):
        best = values.sort_values(ascending=False).head(3)
        rows.append([respondent, "  ".join(f"{int(c)}:{p:.2f}" for c, p in best.items())])
    print(f"{len(proba)} verbatims not yet coded by {_coder_of(args)}; first {len(rows)} (by respondent id, as the "
          "desk's go-to takes it):")
    print(format_table(["respondent", "likeliest codes (probability)"], rows, note="in verbatim order"))
    print(SUGGESTION_NOTE)


def _apply(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding

    report = machine_coding.apply_machine(study, args.question, args.threshold, args.target_accuracy, coder=_coder_of(args))
    print(f"threshold {report.threshold:.2f}: {report.assignments} machine codes on {report.verbatims} of "
          f"{report.candidates} verbatims not yet coded by {_coder_of(args)} ({report.replaced} earlier machine "
          "suggestions replaced)")
    print(SUGGESTION_NOTE)


def _queue(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import machine_coding
    from opencode.files.textout import format_table

    if args.kind == "learn":
        items = machine_coding.learning_queue(study, args.question, _coder_of(args), n=args.limit)
        if emit_table(args, items, "queue"):
            return
        print("code these next (the model is least sure about them; respondent ids as the desk's go-to takes them):")
        print(format_table(["respondent", "doubt", "code", "probability", "text"],
                           [[i["respondent"], i["uncertainty"], i["code"], i["probability"], i["text"][:70]]
                            for i in items], note="most doubtful first"))
    else:
        items = machine_coding.second_look_queue(study, args.question, args.coder, n=args.limit)
        if emit_table(args, items, "queue"):
            return
        print("hand codes worth a second look (the model strongly disagrees in cross-validation; respondent ids as "
              "the desk's go-to takes them):")
        print(format_table(["respondent", "coder", "code", "probability", "why", "text"],
                           [[i["respondent"], i["coder"], i["code"], i["probability"], i["why"], i["text"][:60]]
                            for i in items], note="strongest disagreement first"))


def _rules(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import rules
    from opencode.files.textout import format_table

    written = rules.apply_rules(study, args.question, coder=_coder_of(args))
    print(format_table(["code", "suggestions"], [[c, n] for c, n in sorted(written.items())], note="by code"))
    print(f"rule codes are suggestions for {_coder_of(args)}: they count only once a person accepts them at the desk")
