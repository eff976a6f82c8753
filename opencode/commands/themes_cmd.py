"""`oecode themes`: find themes in a question's verbatims, search k, and work with the runs kept in the study."""

from __future__ import annotations

import argparse
import sys
from typing import TYPE_CHECKING

from opencode.analysis.choices import SHORT_TEXT_NOTE, THEMES_MIN_DF
from opencode.commands.common import (
    add_action, add_actions, add_overwrite_option, add_table_output_options, emit_table, progress_bar, table_targets,
)
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter

if TYPE_CHECKING:
    from opencode.study.store import Study

S = "survey.study --question why"


def register(subparsers: argparse._SubParsersAction) -> None:
    verb = subparsers.add_parser(
        "themes", help="find themes (NMF or LDA) in a question's verbatims; list, show, compare and promote runs",
        description="Find themes in a question's verbatims and keep each run in the study.",
        epilog=f"example:\n  oecode themes search {S} --k-range 4:16\n\n{SHORT_TEXT_NOTE}",
        formatter_class=HelpFormatter)
    actions = add_actions(verb)

    fit = add_action(actions, "fit", "find k themes and keep the run", [
        f"oecode themes fit {S} --k 8 --by support --chart themes.png",
        f'oecode themes fit {S} --k 10 --seed-terms "safe,staff;hours,late"'], handler=run_themes,
        notes=SHORT_TEXT_NOTE)
    _question(fit, needed=True)
    fit.add_argument("--k", type=int, default=10, help="the number of themes (default 10)")
    _model_options(fit)
    fit.add_argument("--by", metavar="VAR", help="a closed-ended variable: each theme's share by its value labels, "
                     "tested (chi-square, Benjamini-Hochberg across themes)")
    seeds = fit.add_mutually_exclusive_group()
    seeds.add_argument("--seed-terms", metavar="'a,b;c,d'",
                       help="start themes from these term lists (';' between themes, ',' between terms); NMF only")
    seeds.add_argument("--seed-from-frame", nargs="?", const="all", metavar="CODES",
                       help="start themes from the question's codes (their rules, else their labels); optionally "
                       "only these code numbers, e.g. 1,2,5")
    fit.add_argument("--chart", metavar="PATH.png", help="write a chart of each theme's top terms")
    add_table_output_options(fit)
    _actor(fit)
    add_overwrite_option(fit)

    search = add_action(actions, "search", "score each k in a range and recommend one (the run is kept)", [
        f"oecode themes search {S} --k-range 4:16 --chart k.png"], handler=run_themes, notes=SHORT_TEXT_NOTE)
    _question(search, needed=True)
    search.add_argument("--k-range", metavar="FROM:TO", help="the range of k to score, e.g. 4:20 (needed): the "
                        "best mean of NPMI and stability ranks wins, leaving out a k with a catch-all theme (the "
                        "rule and why it chose k are printed)")
    _model_options(search)
    search.add_argument("--chart", metavar="PATH.png", help="write the k curve")
    add_table_output_options(search)
    _actor(search)
    add_overwrite_option(search)

    runs = add_action(actions, "list", "the runs kept for a question (or for every question)",
                      ["oecode themes list survey.study --question why"], handler=run_themes)
    _question(runs)
    add_table_output_options(runs)

    show = add_action(actions, "show", "a kept run again (or the verbatims no theme explains)",
                      ["oecode themes show survey.study 3 --unexplained"], handler=run_themes, usage="RUN_ID")
    show.add_argument("run_id", metavar="RUN_ID", help="the run's id (from list)")
    show.add_argument("--unexplained", action="store_true", help="list the verbatims no theme explains")
    add_table_output_options(show)

    compare = add_action(actions, "compare", "match the themes of two runs by their top terms",
                         ["oecode themes compare survey.study 3 4"], handler=run_themes, usage="RUN_A RUN_B")
    compare.add_argument("run_a", metavar="RUN_A", help="the first run's id")
    compare.add_argument("run_b", metavar="RUN_B", help="the second run's id")

    promote = add_action(actions, "promote", "add a theme as a draft code of the question's frame, its top "
                         "terms as the code's starting keyword rule",
                         ["oecode themes promote survey.study 3 2 --question why --hotkey s"], handler=run_themes,
                         usage="RUN_ID THEME")
    promote.add_argument("run_id", metavar="RUN_ID", help="the run's id (from list)")
    promote.add_argument("theme", metavar="THEME", help="the theme's number, as the run shows it")
    _question(promote)
    promote.add_argument("--label", help="the code's label (default: proposed from the theme's top terms)")
    promote.add_argument("--number", type=int, help="the code's number (default: one past the highest)")
    promote.add_argument("--hotkey", help="the code's desk hotkey (one character)")
    _actor(promote)

    delete = add_action(actions, "delete", "remove a kept run", ["oecode themes delete survey.study 3"],
                        handler=run_themes, usage="RUN_ID")
    delete.add_argument("run_id", metavar="RUN_ID", help="the run's id (from list)")
    _actor(delete)


def old_words(words: list[str]) -> list[str]:
    """A command line written before themes had actions of their own, read as today's (the words after
    `themes`, the action already moved first): no action meant fit (`oecode themes STUDY --question Q --k 8`),
    and fit with --k-range was a search."""
    searching = any(w == "--k-range" or w.startswith("--k-range=") for w in words)
    if words and not words[0].startswith("-") and words[0] not in HANDLERS \
            and (len(words) == 1 or words[1].startswith("-")):
        return ["search" if searching else "fit", *words]
    if words and words[0] == "fit" and searching:
        return ["search", *words[1:]]
    return words


def _question(parser: argparse.ArgumentParser, needed: bool = False) -> None:
    parser.add_argument("--question", help="the open question" + (" (needed)" if needed else ""))


def _actor(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--actor", default="oecode", help="who makes the change (for the audit trail)")


def _model_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--method", default="nmf", choices=["nmf", "lda"], help="NMF on tf-idf (default) or LDA")
    parser.add_argument("--loss", default="frobenius", choices=["frobenius", "kl"],
                        help="NMF loss: frobenius (default) or kl (Kullback-Leibler)")
    parser.add_argument("--min-df", type=int, default=THEMES_MIN_DF,
                        help=f"keep terms found in at least this many verbatims (default {THEMES_MIN_DF})")
    parser.add_argument("--random-state", type=int, default=0, help="the seed: the same seed gives the same themes")


def _whole(value: str, what: str) -> int:
    """A run id or theme number typed on the command line."""
    try:
        return int(value)
    except ValueError:
        raise OpenCodeError(f"{what} {value!r}: give a whole number") from None


def run_themes(args: argparse.Namespace) -> int:
    from opencode.files.targets import check_target
    from opencode.study.store import Study

    for path in [getattr(args, "chart", None), *table_targets(args)]:
        if path:
            check_target(path)  # before the slow work
    with Study.open(args.study) as study:
        return HANDLERS[args.action](study, args)


def _fit(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth
    from opencode.analysis.themes.charts import plot_theme_terms

    if not args.question:
        raise OpenCodeError("fit: name the open question with --question")
    seed_codes: bool | list[int] = False
    if args.seed_from_frame:
        seed_codes = True if args.seed_from_frame == "all" else [
            _whole(n.strip(), "--seed-from-frame code") for n in args.seed_from_frame.split(",") if n.strip()]
    result = sth.question_themes(study, args.question, k=args.k, by=args.by, seed_terms=args.seed_terms,
                                 seed_from_frame=seed_codes, progress=progress_bar("analysing verbatims"),
                                 **_common(args))
    data = emit_table(args, result.to_full_frame(), "themes")
    if not data:
        print(sth.format_question_themes(result))
    if args.chart:
        print(f"term chart written to {plot_theme_terms(result.run, args.chart)}", file=sys.stderr if data else sys.stdout)
    return 0


def _common(args: argparse.Namespace) -> dict:
    return {"method": args.method, "loss": args.loss, "min_df": args.min_df, "random_state": args.random_state,
            "actor": args.actor}


def _search(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth
    from opencode.analysis.themes.charts import plot_k_curve

    if not args.question:
        raise OpenCodeError("search: name the open question with --question")
    if not args.k_range:
        raise OpenCodeError("search: give the range of k with --k-range FROM:TO (e.g. 4:16)")
    bar = progress_bar("fitting k")
    result = sth.question_theme_search(study, args.question, args.k_range,
                                       progress=lambda done, total, k: bar(done, total), **_common(args))
    data = emit_table(args, result.search.table, "k search")
    if not data:
        print(sth.format_question_k_search(result))
    if args.chart:
        print(f"k curve written to {plot_k_curve(result.search, args.chart)}", file=sys.stderr if data else sys.stdout)
    return 0


def _list(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth

    table = sth.list_theme_runs(study, args.question)
    if not emit_table(args, table, "theme runs"):
        print(sth.format_run_list(table))
    return 0


def _show(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth

    run_id = _whole(args.run_id, "run id")
    loaded = sth.load_theme_run(study, run_id)
    if isinstance(loaded, sth.QuestionKSearch):
        if args.unexplained:
            raise OpenCodeError(f"run {run_id} is a k search: it has no unexplained verbatims to list")
        if not emit_table(args, loaded.search.table, "k search"):
            print(sth.format_question_k_search(loaded))
    elif args.unexplained:
        table = sth.unexplained_in_run(study, run_id)
        if emit_table(args, table, "unexplained verbatims"):
            return 0
        print(f"theme run {run_id}, question {loaded.question}: {len(table)} verbatim(s) with terms explained by "
              "no theme")
        print(sth.format_unexplained(table))
    elif not emit_table(args, loaded.to_full_frame(), "themes"):
        print(sth.format_question_themes(loaded))
    return 0


def _compare(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth
    from opencode.analysis.themes.format import format_comparison

    a, b = _whole(args.run_a, "run id"), _whole(args.run_b, "run id")
    print(f"themes of run {a} (A) matched to run {b} (B) by the Jaccard index of their top terms")
    print(format_comparison(sth.compare_theme_runs(study, a, b)))
    return 0


def _promote(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth

    run_id, theme = _whole(args.run_id, "run id"), _whole(args.theme, "theme number")
    code = sth.promote_theme(study, run_id, theme, question=args.question, label=args.label, number=args.number,
                             hotkey=args.hotkey, actor=args.actor)
    print(f"draft code {code.number} {code.label!r} added from theme {theme} of run {run_id}"
          + (f" (hotkey {code.hotkey})" if code.hotkey else ""))
    print(f"starting rule: {code.rule}")
    print("it is a draft: check its label, notes and rule before coding with it (oecode frame edit, oecode frame "
          "rule)", file=sys.stderr)
    return 0


def _delete(study: Study, args: argparse.Namespace) -> int:
    from opencode.analysis.themes import study as sth

    run_id = _whole(args.run_id, "run id")
    sth.delete_theme_run(study, run_id, actor=args.actor)
    print(f"theme run {run_id} deleted")
    return 0


HANDLERS = {"fit": _fit, "search": _search, "list": _list, "show": _show, "compare": _compare, "promote": _promote,
            "delete": _delete}
