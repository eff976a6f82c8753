"""`oecode themes`: find themes in a question's verbatims, search k, and work with the runs kept in the study."""

from __future__ import annotations

import argparse
import sys

from opencode.analysis.themes import study as sth
from opencode.analysis.themes.charts import plot_k_curve, plot_theme_terms
from opencode.analysis.themes.format import format_comparison
from opencode.analysis.themes.finder import SHORT_TEXT_NOTE
from opencode.files.targets import check_target
from opencode.commands.common import progress_bar, add_overwrite_option
from opencode.errors import OpenCodeError
from opencode.study.store import Study

ACTIONS = {"fit": 0, "list": 0, "show": 1, "compare": 2, "promote": 2, "delete": 1}
#: Options that only one action reads (dest -> action), so a misplaced option is an error, not ignored.
ONLY_FOR = {"unexplained": "show", "label": "promote", "number": "promote", "hotkey": "promote"}
FIT_ONLY = ("k", "k_range", "method", "loss", "by", "seed_terms", "seed_from_frame", "min_df", "random_state")

USAGE_NOTE = """actions (fit is the default when no action is given):
  fit                      find k themes (--k), or search a range of k (--k-range) and keep the result
  list                     the runs kept for --question (or for every question)
  show RUN_ID              a kept run again; --unexplained lists verbatims no theme explains
  compare RUN_A RUN_B      match the themes of two runs by their top terms
  promote RUN_ID THEME     add theme THEME (numbered as shown) as a draft code of the question's frame,
                           its top terms as the code's starting keyword rule
  delete RUN_ID            remove a kept run

examples:
  oecode themes survey.study --question why --k-range 4:16 --chart k.png
  oecode themes survey.study --question why --k 8 --by support
  oecode themes survey.study fit --question why --k 10 --seed-terms "safe,staff;hours,late"
  oecode themes survey.study promote 3 2 --question why --hotkey s

""" + SHORT_TEXT_NOTE


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "themes", help="find themes (NMF or LDA) in a question's verbatims; list, show, compare and promote runs",
        usage="oecode themes STUDY [ACTION [ARGS ...]] [options]",
        description="Find themes in a question's verbatims and keep each run in the study.",
        epilog=USAGE_NOTE, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("study", help="the study file")
    parser.add_argument("action", nargs="?", default="fit", choices=list(ACTIONS), metavar="ACTION",
                        help=f"one of {', '.join(ACTIONS)} (default fit)")
    parser.add_argument("values", nargs="*", metavar="ARGS", help="run ids (show, compare, delete) or RUN_ID THEME "
                        "(promote)")
    parser.add_argument("--question", help="the open question (needed by fit; list and promote accept it)")
    parser.add_argument("--actor", default="oecode", help="who makes the change (for the audit trail)")
    fit = parser.add_argument_group("fit")
    size = fit.add_mutually_exclusive_group()
    size.add_argument("--k", type=int, help="the number of themes (default 10)")
    size.add_argument("--k-range", metavar="FROM:TO", help="score each k in the range (e.g. 4:20) and recommend one: "
                      "the best mean of NPMI and stability ranks, leaving out a k with a catch-all theme (the rule "
                      "and why it chose k are printed)")
    fit.add_argument("--method", default="nmf", choices=["nmf", "lda"], help="NMF on tf-idf (default) or LDA")
    fit.add_argument("--loss", default="frobenius", choices=["frobenius", "kl"],
                     help="NMF loss: frobenius (default) or kl (Kullback-Leibler)")
    fit.add_argument("--by", metavar="VAR", help="a closed-ended variable: each theme's share by its value labels, "
                     "tested (chi-square, Benjamini-Hochberg across themes)")
    seeds = fit.add_mutually_exclusive_group()
    seeds.add_argument("--seed-terms", metavar="'a,b;c,d'",
                       help="start themes from these term lists (';' between themes, ',' between terms); NMF only")
    seeds.add_argument("--seed-from-frame", nargs="?", const="all", metavar="CODES",
                       help="start themes from the question's codes (their rules, else their labels); optionally "
                       "only these code numbers, e.g. 1,2,5")
    fit.add_argument("--min-df", type=int, default=sth.DEFAULT_MIN_DF,
                     help=f"keep terms found in at least this many verbatims (default {sth.DEFAULT_MIN_DF})")
    fit.add_argument("--random-state", type=int, default=0, help="the seed: the same seed gives the same themes")
    fit.add_argument("--chart", metavar="PATH.png", help="write the term chart (fit) or the k curve (--k-range)")
    show = parser.add_argument_group("show")
    show.add_argument("--unexplained", action="store_true", help="list the verbatims no theme explains")
    promote = parser.add_argument_group("promote")
    promote.add_argument("--label", help="the code's label (default: proposed from the theme's top terms)")
    promote.add_argument("--number", type=int, help="the code's number (default: one past the highest)")
    promote.add_argument("--hotkey", help="the code's desk hotkey (one character)")
    add_overwrite_option(parser)
    parser.set_defaults(handler=run_themes)


def _check_args(args: argparse.Namespace) -> None:
    """The right number of values for the action, and no option the action would ignore."""
    wanted = ACTIONS[args.action]
    if len(args.values) != wanted:
        shapes = {"show": "RUN_ID", "compare": "RUN_A RUN_B", "promote": "RUN_ID THEME", "delete": "RUN_ID"}
        expected = f"themes STUDY {args.action} {shapes.get(args.action, '')}".rstrip()
        raise OpenCodeError(f"{args.action}: expected {wanted} value(s) ({expected}), got {len(args.values)}"
                            + (f": {' '.join(args.values)}" if args.values else ""))
    for dest, action in ONLY_FOR.items():
        if getattr(args, dest) not in (None, False) and args.action != action:
            raise OpenCodeError(f"--{dest.replace('_', '-')} applies to {action} only")
    if args.action != "fit":
        defaults = {"method": "nmf", "loss": "frobenius", "min_df": sth.DEFAULT_MIN_DF, "random_state": 0}
        for dest in FIT_ONLY + ("chart",):
            if getattr(args, dest) != defaults.get(dest):
                raise OpenCodeError(f"--{dest.replace('_', '-')} applies to fit only")


def _whole(value: str, what: str) -> int:
    """A run id or theme number typed on the command line."""
    try:
        return int(value)
    except ValueError:
        raise OpenCodeError(f"{what} {value!r}: give a whole number") from None


def run_themes(args: argparse.Namespace) -> int:
    _check_args(args)
    if getattr(args, "chart", None):
        check_target(args.chart)  # before the slow work
    with Study.open(args.study) as study:
        return HANDLERS[args.action](study, args)


def _fit(study: Study, args: argparse.Namespace) -> int:
    if not args.question:
        raise OpenCodeError("fit: name the open question with --question")
    common = {"method": args.method, "loss": args.loss, "min_df": args.min_df, "random_state": args.random_state,
              "actor": args.actor}
    if args.k_range:
        if args.by or args.seed_terms or args.seed_from_frame:
            raise OpenCodeError("--k-range scores k without --by or seeds; give those to the final --k run")
        bar = progress_bar("fitting k")
        result = sth.question_theme_search(study, args.question, args.k_range, progress=lambda done, total, k:
                                       bar(done, total), **common)
        print(sth.format_question_k_search(result))
        if args.chart:
            print(f"k curve written to {plot_k_curve(result.search, args.chart)}")
        return 0
    seed_codes: bool | list[int] = False
    if args.seed_from_frame:
        seed_codes = True if args.seed_from_frame == "all" else [
            _whole(n.strip(), "--seed-from-frame code") for n in args.seed_from_frame.split(",") if n.strip()]
    result = sth.question_themes(study, args.question, k=10 if args.k is None else args.k, by=args.by,
                                     seed_terms=args.seed_terms, seed_from_frame=seed_codes,
                                     progress=progress_bar("analysing verbatims"), **common)
    print(sth.format_question_themes(result))
    if args.chart:
        print(f"term chart written to {plot_theme_terms(result.run, args.chart)}")
    return 0


def _list(study: Study, args: argparse.Namespace) -> int:
    print(sth.format_run_list(sth.list_theme_runs(study, args.question)))
    return 0


def _show(study: Study, args: argparse.Namespace) -> int:
    run_id = _whole(args.values[0], "run id")
    loaded = sth.load_theme_run(study, run_id)
    if isinstance(loaded, sth.QuestionKSearch):
        if args.unexplained:
            raise OpenCodeError(f"run {run_id} is a k search: it has no unexplained verbatims to list")
        print(sth.format_question_k_search(loaded))
    elif args.unexplained:
        table = sth.unexplained_in_run(study, run_id)
        print(f"theme run {run_id}, question {loaded.question}: {len(table)} verbatim(s) with terms explained by "
              "no theme")
        print(sth.format_unexplained(table))
    else:
        print(sth.format_question_themes(loaded))
    return 0


def _compare(study: Study, args: argparse.Namespace) -> int:
    a, b = (_whole(v, "run id") for v in args.values)
    print(f"themes of run {a} (A) matched to run {b} (B) by the Jaccard index of their top terms")
    print(format_comparison(sth.compare_theme_runs(study, a, b)))
    return 0


def _promote(study: Study, args: argparse.Namespace) -> int:
    run_id, theme = _whole(args.values[0], "run id"), _whole(args.values[1], "theme number")
    code = sth.promote_theme(study, run_id, theme, question=args.question, label=args.label, number=args.number,
                             hotkey=args.hotkey, actor=args.actor)
    print(f"draft code {code.number} {code.label!r} added from theme {theme} of run {run_id}"
          + (f" (hotkey {code.hotkey})" if code.hotkey else ""))
    print(f"starting rule: {code.rule}")
    print("it is a draft: check its label, notes and rule before coding with it (oecode frame)", file=sys.stderr)
    return 0


def _delete(study: Study, args: argparse.Namespace) -> int:
    run_id = _whole(args.values[0], "run id")
    sth.delete_theme_run(study, run_id, actor=args.actor)
    print(f"theme run {run_id} deleted")
    return 0


HANDLERS = {"fit": _fit, "list": _list, "show": _show, "compare": _compare, "promote": _promote, "delete": _delete}
