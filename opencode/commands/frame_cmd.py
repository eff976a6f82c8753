"""`oecode frame STUDY ACTION --question Q`: build and change code frames, import existing codes, keyword rules."""

from __future__ import annotations

import argparse

from opencode.coding import codebook, done_marks, frame_io, frames, history, import_codes, rules
from opencode.coding.assignments import code_counts
from opencode.errors import OpenCodeError
from opencode.study.store import Study
from opencode.files.textout import format_table
from opencode.commands.common import add_overwrite_option

ACTIONS = ("list", "add", "edit", "net", "merge", "renumber", "retire", "restore", "delete", "share", "import",
           "export", "codebook", "import-codes", "rule", "undo", "redo", "done", "not-done")


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser("frame", help="code frames: codes, nets, hotkeys, rules; import existing codes")
    p.add_argument("study")
    p.add_argument("action", choices=ACTIONS)
    p.add_argument("--question", help="the open question whose frame to use")
    p.add_argument("--code", type=int, help="the code number acted on")
    p.add_argument("--number", type=int, help="add: the new code's number; renumber: the new number")
    p.add_argument("--label")
    p.add_argument("--kind", choices=frames.KINDS, default="code")
    p.add_argument("--net", type=int, help="the parent net's number (net: 0 takes the code out of its net)")
    p.add_argument("--hotkey")
    p.add_argument("--description")
    p.add_argument("--include", help="what belongs under the code")
    p.add_argument("--exclude", help="what does not (and where it goes)")
    p.add_argument("--example", action="append", help="an example verbatim (repeat)")
    p.add_argument("--special", choices=frames.SPECIALS)
    p.add_argument("--into", type=int, help="merge / delete: the code receiving the assignments")
    p.add_argument("--with-question", help="share: the question whose frame to use")
    p.add_argument("--file", help="import / export / codebook: the file (.csv or .json; .md or .html)")
    p.add_argument("--coder", help="import-codes: whose codes; codebook: count one coder; undo/redo: whose change")
    p.add_argument("--actor", default=None, help="who makes a frame change (for the audit trail and undo)")
    p.add_argument("--column", action="append", help="import-codes: the column(s) holding codes (wildcards ok)")
    p.add_argument("--from", dest="source", help="import-codes: the survey file (default: the study's variables)")
    p.add_argument("--id", dest="id_column", help="import-codes: the respondent id column")
    p.add_argument("--coder-column", help="import-codes: a column naming each row's coder (long layout)")
    p.add_argument("--question-column", help="import-codes: a column naming each row's question (long layout)")
    p.add_argument("--layout", choices=import_codes.LAYOUTS, default="auto")
    p.add_argument("--create", action="store_true", help="import-codes: add codes the frame lacks")
    p.add_argument("--delimiter", help="import-codes: what separates several codes in one cell "
                   f"(default: any of {' '.join(import_codes.DEFAULT_DELIMITERS)})")
    p.add_argument("--blank-means", choices=import_codes.BLANK_MEANINGS,
                   help="import-codes: a blank code cell on an answered verbatim is not coded yet (uncoded), or "
                   "coded with no code (no-code: marked done, in the base); default uncoded, no-code for the long layout")
    p.add_argument("--which", choices=tuple(done_marks.FILTERS), default="answered-without-codes",
                   help="done / not-done: the verbatims to mark for --coder (default answered-without-codes)")
    p.add_argument("--set", dest="rule", help="rule: the keyword rule (AND OR NOT NEAR/n, quotes, parentheses)")
    p.add_argument("--dry-run", action="store_true", help="rule: show what the rule would pre-code")
    p.add_argument("--show", type=int, default=10, help="rule --dry-run: how many matches to print")
    add_overwrite_option(p)
    p.set_defaults(handler=run)


def _need(args: argparse.Namespace, *names: str) -> None:
    for name in names:
        if getattr(args, name.replace("-", "_")) is None:
            raise OpenCodeError(f"frame {args.action}: --{name} is needed")


def run(args: argparse.Namespace) -> int:
    with Study.open(args.study) as study:
        if args.action in ("undo", "redo"):
            return _undo_redo(study, args)
        _need(args, "question")
        handler = globals()[f"_{args.action.replace('-', '_')}"]
        return handler(study, args) or 0


def _actor(args: argparse.Namespace) -> str:
    return args.actor or args.coder or "oecode"


def _list(study: Study, args: argparse.Namespace) -> None:
    frame = frames.load_frame(study, args.question)
    counts = code_counts(study, args.question, args.coder) if args.coder else None
    print(f"frame {frame.name}: {sum(not c.is_net for c in frame.codes)} codes, "
          f"{sum(c.is_net for c in frame.codes)} nets" + (f"; counts: hand codes of {args.coder}" if counts else ""))
    print(frames.format_frame(frame, counts))


def _add(study: Study, args: argparse.Namespace) -> None:
    _need(args, "label")
    code = frames.add_code(study, args.question, args.label, args.number, kind=args.kind, net=args.net,
                           hotkey=args.hotkey, description=args.description or "", include=args.include or "",
                           exclude=args.exclude or "", examples=args.example or [], special=args.special,
                           actor=_actor(args))
    print(f"added {code.kind} {code.number}: {code.label}")


def _edit(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code")
    fields = {k: getattr(args, k) for k in ("label", "description", "include", "exclude", "hotkey", "special")
              if getattr(args, k) is not None}
    if args.example:
        fields["examples"] = args.example
    if not fields:
        raise OpenCodeError("frame edit: say what to change (--label, --description, --include, --exclude, "
                            "--example, --hotkey, --special)")
    code = frames.edit_code(study, args.question, args.code, actor=_actor(args), **fields)
    print(f"changed code {code.number}: {code.label}")


def _net(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code", "net")
    code = frames.set_net(study, args.question, args.code, args.net or None, actor=_actor(args))
    print(f"code {code.number} is now " + (f"in net {code.net}" if code.net else "outside any net"))


def _merge(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code", "into")
    code = frames.merge_codes(study, args.question, args.code, args.into, actor=_actor(args))
    print(f"merged code {args.code} into {code.number} ({code.label}); its assignments moved")


def _renumber(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code", "number")
    code = frames.renumber_code(study, args.question, args.code, args.number, actor=_actor(args))
    print(f"code {args.code} is now {code.number} ({code.label}); its assignments followed")


def _retire(study: Study, args: argparse.Namespace, active: bool = False) -> None:
    _need(args, "code")
    code = frames.retire_code(study, args.question, args.code, actor=_actor(args), active=active)
    print(f"code {code.number} ({code.label}) is {'active' if code.active else 'retired'}")


def _restore(study: Study, args: argparse.Namespace) -> None:
    _retire(study, args, active=True)


def _delete(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code")
    frames.delete_code(study, args.question, args.code, merge_into=args.into, actor=_actor(args))
    print(f"deleted code {args.code}" + (f" (assignments moved to {args.into})" if args.into else ""))


def _share(study: Study, args: argparse.Namespace) -> None:
    _need(args, "with-question")
    frames.share_frame(study, args.question, args.with_question, actor=_actor(args))
    print(f"question {args.question} now uses the frame of {args.with_question}")


def _import(study: Study, args: argparse.Namespace) -> None:
    _need(args, "file")
    counts = frame_io.import_frame(study, args.question, args.file, actor=_actor(args))
    print(f"imported {args.file}: {counts['added']} codes added, {counts['updated']} updated")


def _export(study: Study, args: argparse.Namespace) -> None:
    _need(args, "file")
    print(f"wrote {frame_io.export_frame(study, args.question, args.file)}")


def _codebook(study: Study, args: argparse.Namespace) -> None:
    _need(args, "file")
    print(f"wrote {codebook.write_codebook(study, args.question, args.file, coder=args.coder)}")


def _import_codes(study: Study, args: argparse.Namespace) -> None:
    _need(args, "column")
    report = import_codes.import_codes(
        study, args.question, args.column, args.coder, args.source, id_column=args.id_column,
        coder_column=args.coder_column, question_column=args.question_column, layout=args.layout,
        create=args.create, actor=_actor(args), delimiter=args.delimiter, blank_means=args.blank_means)
    print(f"layout: {report.layout}")
    rows = [[who, report.verbatims[who], report.added[who]] for who in sorted(report.added)]
    print(format_table(["coder", "verbatims", "codes added"], rows))
    if report.already:
        print(f"{report.already} codes were already there by hand (kept once)")
    for number, label in report.created:
        print(f"created code {number}: {label}")
    for who, blank in sorted(report.blank_answered.items()):
        if report.blank_means == "uncoded":
            print(f"{blank:,} answered verbatims have a blank code cell for {who}: left not coded (out of the base); "
                  f"if blank means no code applies, run again with --blank-means no-code or mark them with: "
                  f"oecode frame {args.study} done --question {args.question} --coder {who}")
        else:
            print(f"{blank:,} answered verbatims have a blank code cell for {who}: marked done with no code")
    if report.unmatched_respondents:
        shown = ", ".join(report.unmatched_respondents[:10])
        print(f"warning: {len(report.unmatched_respondents)} rows name respondents without a verbatim for "
              f"{args.question}: {shown}")


def _done(study: Study, args: argparse.Namespace, done: bool = True) -> None:
    _need(args, "coder")
    report = done_marks.set_done(study, args.question, args.coder, args.which, done=done)
    state = "done" if done else "not done"
    print(f"{args.question}: {report.changed:,} of {report.chosen:,} verbatims ({args.which}) marked {state} for "
          f"{args.coder}; undo with: oecode frame {args.study} undo --coder {args.coder}")


def _not_done(study: Study, args: argparse.Namespace) -> None:
    _done(study, args, done=False)


def _rule(study: Study, args: argparse.Namespace) -> None:
    _need(args, "code")
    text = args.rule if args.rule is not None else rules.code_rule(study, args.question, args.code)
    if not text:
        raise OpenCodeError(f"code {args.code} has no rule; give one with --set \"...\"")
    if args.dry_run:
        hits = rules.rule_hits(study, args.question, text, code=args.code)
        print(f"rule for code {args.code}: {text}")
        print(f"would pre-code {hits.count} of {hits.total} verbatims (nothing written)")
        shown = list(zip(hits.verbatim_ids, hits.texts))[: args.show]
        if shown:
            print(format_table(["verbatim", "text"], [[i, " ".join(t.split())] for i, t in shown], align="rl",
                               note=f"{len(shown)} of {hits.count} matches, in verbatim order"))
        return
    rules.set_rule(study, args.question, args.code, text, actor=_actor(args))
    print(f"code {args.code} rule set: {text}" if text else f"code {args.code} rule removed")


def _undo_redo(study: Study, args: argparse.Namespace) -> int:
    who = _actor(args)
    action = (history.undo if args.action == "undo" else history.redo)(study, who)
    print(f"{args.action}: {action}" if action else f"nothing to {args.action} for {who}")
    return 0
