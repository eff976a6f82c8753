"""`oecode model STUDY ACTION --question Q`: keyword-rule pre-coding and the machine coder.

Machine and rule codes are suggestions until a person accepts them at the desk.
"""

from __future__ import annotations

import argparse

from opencode.coding import rules
from opencode.coding import machine_coding
from opencode.commands.common import progress_line
from opencode.study.store import Study
from opencode.files.textout import format_table

ACTIONS = ("train", "report", "curve", "suggest", "apply", "queue", "rules")
SUGGESTION_NOTE = "machine codes are suggestions: they count only once a person accepts them at the desk"


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("model", help="pre-code by keyword rules; train and use the machine coder")
    p.add_argument("study")
    p.add_argument("action", choices=ACTIONS)
    p.add_argument("--question", required=True)
    p.add_argument("--coder", help="train: learn from this coder only; apply/rules/suggest/queue: for this coder "
                   "(default final)")
    p.add_argument("--threshold", type=float, help="apply: code only verbatims the model is this sure about; "
                   "curve: show per-code precision and recall at this threshold (default 0.80)")
    p.add_argument("--target-accuracy", type=float, help="apply: pick the threshold reaching this accuracy")
    p.add_argument("--kind", choices=("learn", "second-look"), default="learn", help="queue: which queue")
    p.add_argument("--limit", type=int, default=20, help="suggest/queue: how many to show")
    p.add_argument("--min-examples", type=int, default=5, help="train: skip codes with fewer coded examples")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    with Study.open(args.study) as study:
        globals()[f"_{args.action.replace('-', '_')}"](study, args)
    return 0


def _coder(args: argparse.Namespace) -> str:
    return args.coder or machine_coding.FINAL


def _train(study: Study, args: argparse.Namespace) -> None:
    progress_line("analysing verbatims and cross-validating each code")
    trained = machine_coding.train(study, args.question, coder=args.coder, min_examples=args.min_examples)
    print(f"model {trained.id}: suggests {len(trained.model.classes_)} of {len(trained.model.codes_)} codes")
    _report(study, args)


def _report(study: Study, args: argparse.Namespace) -> None:
    trained = machine_coding.load_model(study, args.question)
    for note in trained.notes:
        print(note)
    rows = machine_coding.code_report(study, args.question)
    print("cross-validated, machine versus human (probability 0.5):")
    print(format_table(["code", "label", "examples", "precision", "recall", "F1", "kappa"],
                       [[r["code"], r["label"][:40], r["examples"], r["precision"], r["recall"], r["f1"], r["kappa"]]
                        if r["suggests"] else [r["code"], r["label"][:40], r["examples"], "cannot suggest", "", "", ""]
                        for r in rows], note="in code-frame order"))


def _share(value: float) -> str:
    return "-" if value != value else f"{value:.1%}"


def _ratio(value: float) -> str:
    return "-" if value != value else f"{value:.3f}"


def _curve(study: Study, args: argparse.Namespace) -> None:
    report = machine_coding.curve(study, args.question, code_threshold=0.8 if args.threshold is None
                                  else args.threshold)
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
    print("pick a threshold whose accuracy you accept; then: oecode model STUDY apply --question Q --threshold T")


def _suggest(study: Study, args: argparse.Namespace) -> None:
    proba = machine_coding.suggest(study, args.question, coder=_coder(args))
    rows = []
    for verbatim_id, values in proba.head(args.limit).iterrows():
        best = values.sort_values(ascending=False).head(3)
        rows.append([int(verbatim_id), "  ".join(f"{int(c)}:{p:.2f}" for c, p in best.items())])
    print(f"{len(proba)} verbatims not yet coded by {_coder(args)}; first {len(rows)}:")
    print(format_table(["verbatim", "likeliest codes (probability)"], rows, note="in verbatim order"))
    print(SUGGESTION_NOTE)


def _apply(study: Study, args: argparse.Namespace) -> None:
    report = machine_coding.apply_machine(study, args.question, args.threshold, args.target_accuracy, coder=_coder(args))
    print(f"threshold {report.threshold:.2f}: {report.assignments} machine codes on {report.verbatims} of "
          f"{report.candidates} verbatims not yet coded by {_coder(args)} ({report.replaced} earlier machine "
          "suggestions replaced)")
    print(SUGGESTION_NOTE)


def _queue(study: Study, args: argparse.Namespace) -> None:
    if args.kind == "learn":
        items = machine_coding.learning_queue(study, args.question, _coder(args), n=args.limit)
        print("code these next (the model is least sure about them):")
        print(format_table(["verbatim", "doubt", "code", "probability", "text"],
                           [[i["verbatim_id"], i["uncertainty"], i["code"], i["probability"], i["text"][:70]]
                            for i in items], note="most doubtful first"))
    else:
        items = machine_coding.second_look_queue(study, args.question, args.coder, n=args.limit)
        print("hand codes worth a second look (the model strongly disagrees in cross-validation):")
        print(format_table(["verbatim", "coder", "code", "probability", "why", "text"],
                           [[i["verbatim_id"], i["coder"], i["code"], i["probability"], i["why"], i["text"][:60]]
                            for i in items], note="strongest disagreement first"))


def _rules(study: Study, args: argparse.Namespace) -> None:
    written = rules.apply_rules(study, args.question, coder=_coder(args))
    print(format_table(["code", "suggestions"], [[c, n] for c, n in sorted(written.items())], note="by code"))
    print(f"rule codes are suggestions for {_coder(args)}: they count only once a person accepts them at the desk")
