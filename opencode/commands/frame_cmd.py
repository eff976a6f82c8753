"""`oecode frame ACTION STUDY --question Q`: build and change code frames, import existing codes, keyword rules."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from opencode.coding.choices import BLANK_MEANINGS, DEFAULT_DELIMITERS, FILTERS, KINDS, LAYOUTS, SPECIALS
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter
from opencode.commands.common import (
    add_action, add_actions, add_overwrite_option, add_table_output_options, emit_table,
)

if TYPE_CHECKING:
    from opencode.study.store import Study



def register(subparsers: argparse._SubParsersAction) -> None:
    verb = subparsers.add_parser("frame", help="code frames: codes, nets, hotkeys, rules; import existing codes",
                                 description="Build and change a question's code frame: codes, nets, hotkeys, "
                                 "keyword rules; import and export frames; import existing codes.",
                                 epilog="example:\n  oecode frame list survey.study --question why",
                                 formatter_class=HelpFormatter)
    actions = add_actions(verb)
    S = "survey.study --question why"

    p = add_action(actions, "list", "the frame's codes and nets (with one coder's counts)", [f"oecode frame list {S}"])
    _question(p)
    p.add_argument("--coder", help="count this coder's hand codes beside each code")
    add_table_output_options(p)

    p = add_action(actions, "add", "add a code (or a net) to the frame",
                   [f'oecode frame add {S} --label "Opening hours" --hotkey h',
                    f'oecode frame add {S} --label "Staffing" --kind net --number 90'])
    _question(p)
    p.add_argument("--label", help="the code's label (needed)")
    p.add_argument("--number", type=int, help="the new code's number (default: one past the highest)")
    p.add_argument("--kind", choices=KINDS, default="code", help="code (default) or net")
    p.add_argument("--net", type=int, help="the parent net's number")
    _code_fields(p)
    _actor_option(p)

    p = add_action(actions, "edit", "change a code's label, notes, examples, hotkey or special meaning",
                   [f'oecode frame edit {S} --code 3 --label "Safety after dark" --include "feeling unsafe"'])
    _question(p)
    _code(p)
    p.add_argument("--label", help="the new label")
    _code_fields(p)
    _actor_option(p)

    p = add_action(actions, "net", "put a code into a net (0: take it out of its net)",
                   [f"oecode frame net {S} --code 3 --net 90"])
    _question(p)
    _code(p)
    p.add_argument("--net", type=int, help="the net's number; 0 takes the code out of its net (needed)")
    _actor_option(p)

    p = add_action(actions, "merge", "merge a code into another; its assignments move",
                   [f"oecode frame merge {S} --code 7 --into 3"])
    _question(p)
    _code(p)
    p.add_argument("--into", type=int, help="the code receiving the assignments (needed)")
    _actor_option(p)

    p = add_action(actions, "renumber", "give a code a new number; its assignments follow",
                   [f"oecode frame renumber {S} --code 7 --number 12"])
    _question(p)
    _code(p)
    p.add_argument("--number", type=int, help="the new number (needed)")
    _actor_option(p)

    for name, what in (("retire", "retire a code: kept with its assignments, no longer offered"),
                       ("restore", "make a retired code active again")):
        p = add_action(actions, name, what, [f"oecode frame {name} {S} --code 7"])
        _question(p)
        _code(p)
        _actor_option(p)

    p = add_action(actions, "delete", "delete a code (its assignments removed, or moved with --into)",
                   [f"oecode frame delete {S} --code 7 --into 3"])
    _question(p)
    _code(p)
    p.add_argument("--into", type=int, help="move the code's assignments to this code first")
    _actor_option(p)

    p = add_action(actions, "share", "make a question use another question's frame",
                   ["oecode frame share survey.study --question improve --with-question why"])
    _question(p)
    p.add_argument("--with-question", help="the question whose frame to use (needed)")
    _actor_option(p)

    p = add_action(actions, "import", "add or update codes from a frame file (.csv or .json)",
                   [f"oecode frame import {S} --file frame.csv"])
    _question(p)
    p.add_argument("--file", help="the frame file, .csv or .json (needed)")
    _actor_option(p)

    p = add_action(actions, "export", "write the frame as a file (.csv or .json)",
                   [f"oecode frame export {S} --file frame.json"])
    _question(p)
    p.add_argument("--file", help="the file to write, .csv or .json (needed)")
    add_overwrite_option(p)

    p = add_action(actions, "codebook", "write the codebook (.md or .html): codes, notes, examples, counts",
                   [f"oecode frame codebook {S} --file codebook.html --coder final"])
    _question(p)
    p.add_argument("--file", help="the file to write, .md or .html (needed)")
    p.add_argument("--coder", help="count this coder's codes")
    add_overwrite_option(p)

    p = add_action(actions, "import-codes", "import codes given earlier, from the survey file or a study variable",
                   [f"oecode frame import-codes {S} --column why_code --create --coder legacy",
                    f"oecode frame import-codes {S} --from codes.csv --id resp --column 'why_c*' --coder legacy"])
    _question(p)
    p.add_argument("--column", action="append", help="the column(s) holding codes (wildcards ok; repeat; needed)")
    p.add_argument("--coder", help="whose codes they are (default: the --coder-column, else 'final')")
    p.add_argument("--from", dest="source", help="the survey file (default: the study's variables)")
    p.add_argument("--id", dest="id_column", help="the survey file's respondent id column")
    p.add_argument("--coder-column", help="a column naming each row's coder (long layout)")
    p.add_argument("--question-column", help="a column naming each row's question (long layout)")
    p.add_argument("--layout", choices=LAYOUTS, default="auto", help="how the codes are laid out (default auto)")
    p.add_argument("--create", action="store_true", help="add codes the frame lacks")
    p.add_argument("--delimiter", help="what separates several codes in one cell "
                   f"(default: any of {' '.join(DEFAULT_DELIMITERS)})")
    p.add_argument("--blank-means", choices=BLANK_MEANINGS,
                   help="a blank code cell on an answered verbatim is not coded yet (uncoded), or coded with no "
                   "code (no-code: marked done, in the base); default uncoded, no-code for the long layout")
    _actor_option(p)

    p = add_action(actions, "rule", "show, set or try a code's keyword rule (AND OR NOT NEAR/n, quotes)",
                   [f"oecode frame rule {S} --code 1 --dry-run",
                    f'oecode frame rule {S} --code 1 --set "(safe OR unsafe) AND NOT car"'])
    _question(p)
    _code(p)
    p.add_argument("--set", dest="rule", help="the keyword rule (AND OR NOT NEAR/n, quotes, parentheses; "
                   "\"\" removes it)")
    p.add_argument("--dry-run", action="store_true", help="show what the rule would pre-code; write nothing")
    p.add_argument("--show", type=int, default=10, help="--dry-run: how many matches to print (default 10)")
    _actor_option(p)

    for name, what in (("undo", "undo someone's last frame change or marking"),
                       ("redo", "redo what undo took back")):
        p = add_action(actions, name, what, [f"oecode frame {name} survey.study --coder ash"])
        p.add_argument("--coder", help="whose change (default: --actor, else 'oecode')")
        _actor_option(p)
        p.add_argument("--question", help=argparse.SUPPRESS)  # accepted as before actions came first: undo takes
        # back the person's last change, whichever question it was on

    for name, what in (("done", "mark verbatims finished with no code for a coder (one undoable step)"),
                       ("not-done", "take back done marks for a coder")):
        p = add_action(actions, name, what, [f"oecode frame {name} {S} --coder ash --which answered-without-codes"])
        _question(p)
        p.add_argument("--coder", help="the coder whose verbatims to mark (needed)")
        p.add_argument("--which", choices=tuple(FILTERS), default="answered-without-codes",
                       help="the verbatims to mark (default answered-without-codes)")
    for p in actions.choices.values():
        p.set_defaults(handler=run)


def _question(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--question", help="the open question whose frame to use (needed)")


def _code(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--code", type=int, help="the code number acted on (needed)")


def _actor_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--actor", default=None, help="who makes the change (for the audit trail and undo)")


def _code_fields(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--hotkey", help="the desk hotkey (one character)")
    parser.add_argument("--description", help="what the code means")
    parser.add_argument("--include", help="what belongs under the code")
    parser.add_argument("--exclude", help="what does not (and where it goes)")
    parser.add_argument("--example", action="append", help="an example verbatim (repeat)")
    parser.add_argument("--special", choices=SPECIALS, help="the code's special meaning")


def _need(args: argparse.Namespace, *names: str) -> None:
    for name in names:
        if getattr(args, name.replace("-", "_"), None) is None:
            raise OpenCodeError(f"frame {args.action}: --{name} is needed")


def run(args: argparse.Namespace) -> int:
    from opencode.study.store import Study

    with Study.open(args.study) as study:
        if args.action in ("undo", "redo"):
            return _undo_redo(study, args)
        _need(args, "question")
        handler = globals()[f"_{args.action.replace('-', '_')}"]
        return handler(study, args) or 0


def _actor(args: argparse.Namespace) -> str:
    return args.actor or getattr(args, "coder", None) or "oecode"


def _list(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames
    from opencode.coding.assignments import code_counts

    frame = frames.load_frame(study, args.question)
    counts = code_counts(study, args.question, args.coder) if args.coder else None
    if emit_table(args, frames.frame_records(frame, counts), "frame"):
        return
    print(f"frame {frame.name}: {sum(not c.is_net for c in frame.codes)} codes, "
          f"{sum(c.is_net for c in frame.codes)} nets" + (f"; counts: hand codes of {args.coder}" if counts else ""))
    print(frames.format_frame(frame, counts))


def _add(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

    _need(args, "label")
    code = frames.add_code(study, args.question, args.label, args.number, kind=args.kind, net=args.net,
                           hotkey=args.hotkey, description=args.description or "", include=args.include or "",
                           exclude=args.exclude or "", examples=args.example or [], special=args.special,
                           actor=_actor(args))
    print(f"added {code.kind} {code.number}: {code.label}")


def _edit(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

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
    from opencode.coding import frames

    _need(args, "code", "net")
    code = frames.set_net(study, args.question, args.code, args.net or None, actor=_actor(args))
    print(f"code {code.number} is now " + (f"in net {code.net}" if code.net else "outside any net"))


def _merge(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

    _need(args, "code", "into")
    code = frames.merge_codes(study, args.question, args.code, args.into, actor=_actor(args))
    print(f"merged code {args.code} into {code.number} ({code.label}); its assignments moved")


def _renumber(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

    _need(args, "code", "number")
    code = frames.renumber_code(study, args.question, args.code, args.number, actor=_actor(args))
    print(f"code {args.code} is now {code.number} ({code.label}); its assignments followed")


def _retire(study: Study, args: argparse.Namespace, active: bool = False) -> None:
    from opencode.coding import frames

    _need(args, "code")
    code = frames.retire_code(study, args.question, args.code, actor=_actor(args), active=active)
    print(f"code {code.number} ({code.label}) is {'active' if code.active else 'retired'}")


def _restore(study: Study, args: argparse.Namespace) -> None:
    _retire(study, args, active=True)


def _delete(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

    _need(args, "code")
    frames.delete_code(study, args.question, args.code, merge_into=args.into, actor=_actor(args))
    print(f"deleted code {args.code}" + (f" (assignments moved to {args.into})" if args.into else ""))


def _share(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frames

    _need(args, "with-question")
    frames.share_frame(study, args.question, args.with_question, actor=_actor(args))
    print(f"question {args.question} now uses the frame of {args.with_question}")


def _import(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frame_io

    _need(args, "file")
    counts = frame_io.import_frame(study, args.question, args.file, actor=_actor(args))
    print(f"imported {args.file}: {counts['added']} codes added, {counts['updated']} updated")


def _export(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import frame_io

    _need(args, "file")
    print(f"wrote {frame_io.export_frame(study, args.question, args.file)}")


def _codebook(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import codebook

    _need(args, "file")
    print(f"wrote {codebook.write_codebook(study, args.question, args.file, coder=args.coder)}")


def _import_codes(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import import_codes
    from opencode.files.textout import format_table

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
                  f"oecode frame done {args.study} --question {args.question} --coder {who}")
        else:
            print(f"{blank:,} answered verbatims have a blank code cell for {who}: marked done with no code")
    if report.unmatched_respondents:
        shown = ", ".join(report.unmatched_respondents[:10])
        print(f"warning: {len(report.unmatched_respondents)} rows name respondents without a verbatim for "
              f"{args.question}: {shown}")


def _done(study: Study, args: argparse.Namespace, done: bool = True) -> None:
    from opencode.coding import done_marks

    _need(args, "coder")
    report = done_marks.set_done(study, args.question, args.coder, args.which, done=done)
    state = "done" if done else "not done"
    print(f"{args.question}: {report.changed:,} of {report.chosen:,} verbatims ({args.which}) marked {state} for "
          f"{args.coder}; undo with: oecode frame undo {args.study} --coder {args.coder}")


def _not_done(study: Study, args: argparse.Namespace) -> None:
    _done(study, args, done=False)


def _rule(study: Study, args: argparse.Namespace) -> None:
    from opencode.coding import rules
    from opencode.files.textout import format_table

    _need(args, "code")
    text = args.rule if args.rule is not None else rules.code_rule(study, args.question, args.code)
    if not text:
        raise OpenCodeError(f"code {args.code} has no rule; give one with --set \"...\"")
    if args.dry_run:
        hits = rules.rule_hits(study, args.question, text, code=args.code)
        print(f"rule for code {args.code}: {text}")
        print(f"would pre-code {hits.count} of {hits.total} verbatims (nothing written)")
        shown = list(zip(hits.respondents, hits.texts))[: args.show]
        if shown:
            print(format_table(["respondent", "text"], [[r, " ".join(t.split())] for r, t in shown], align="ll",
                               note=f"{len(shown)} of {hits.count} matches, in verbatim order; respondent ids as the "
                               "desk's go-to takes them"))
        return
    rules.set_rule(study, args.question, args.code, text, actor=_actor(args))
    print(f"code {args.code} rule set: {text}" if text else f"code {args.code} rule removed")


def _undo_redo(study: Study, args: argparse.Namespace) -> int:
    from opencode.coding import history

    who = _actor(args)
    action = (history.undo if args.action == "undo" else history.redo)(study, who)
    print(f"{args.action}: {action}" if action else f"nothing to {args.action} for {who}")
    return 0
