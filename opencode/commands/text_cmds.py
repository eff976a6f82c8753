"""`oecode words | kwic | phrases ACTION | lexicon ACTION`: a question's terms, keyword in context, phrases and
the lexicon."""

from __future__ import annotations

import argparse
import sys

from typing import TYPE_CHECKING

from opencode.commands.common import (
    add_action, add_actions, add_overwrite_option, add_table_output_options, add_verb, emit_table, progress_bar,
)
from opencode.errors import OpenCodeError
from opencode.files.help_text import HelpFormatter

if TYPE_CHECKING:
    from opencode.study.store import Study
    from opencode.text import study_text as st

SMALL_BASE = 30  # common practice (no published source): read percentages on fewer than 30 with care
_SHOW_IDS = 20
S = "survey.study --question why"


def register(subparsers: argparse._SubParsersAction) -> None:
    words = add_verb(subparsers, "words", "a question's top terms with counts, %% of verbatims and word forms",
                     [f"oecode words {S} --top 15", f"oecode words {S} --top 10 --where support=1"])
    _common(words)
    words.add_argument("--top", type=int, default=30, help="how many terms (default 30)")
    words.add_argument("--where", metavar="VAR=CODE", action="append", default=[],
                       help="only respondents with this code or value label (repeat: all must hold)")
    add_table_output_options(words)
    words.set_defaults(handler=run_words)

    kw = add_verb(subparsers, "kwic", "every occurrence of a term in its verbatims, aligned",
                  ["oecode kwic survey.study safe --question why --show support age_band --limit 8"])
    kw.add_argument("study")
    kw.add_argument("term", help="a term, or any word form of it")
    kw.add_argument("--question", required=True, help="the open question")
    kw.add_argument("--width", type=int, default=40, help="characters of context each side (default 40)")
    kw.add_argument("--limit", type=int, default=50, help="at most this many lines (default 50)")
    kw.add_argument("--show", nargs="+", action="extend", default=[], metavar="VAR",
                    help="closed-ended variables to show beside each line (by value label)")
    add_table_output_options(kw)
    kw.set_defaults(handler=run_kwic)

    ph = subparsers.add_parser("phrases", help="suggest, add, accept or remove multi-word phrases",
                               description="Multi-word phrases (one term each): suggestions by Dunning's "
                               "log-likelihood, and the phrases of a question's lexicon.",
                               epilog=f"example:\n  oecode phrases suggest {S} --top 10",
                               formatter_class=HelpFormatter)
    actions = add_actions(ph)
    p = add_action(actions, "suggest", "word pairs seen together more than chance (log-likelihood, PMI)",
                   [f"oecode phrases suggest {S} --top 10 --min-count 3"])
    _question(p)
    p.add_argument("--min-count", type=int, default=5, help="pairs seen at least this often (default 5)")
    p.add_argument("--top", type=int, default=30, help="how many suggestions (default 30)")
    add_table_output_options(p)
    p = add_action(actions, "accept", "add suggestions by their rank in the last list",
                   [f"oecode phrases accept survey.study 1 3 --question why"], usage="RANK [RANK ...]")
    p.add_argument("values", nargs="+", metavar="RANK", help="ranks from the last suggestion list")
    _question(p)
    _actor(p)
    for name, what in (("add", "add phrases to the question's lexicon"),
                       ("remove", "remove phrases from the question's lexicon")):
        p = add_action(actions, name, what, [f'oecode phrases {name} survey.study "opening hours" --question why'],
                       usage="PHRASE [PHRASE ...]")
        p.add_argument("values", nargs="+", metavar="PHRASE", help="a phrase (in quotes)")
        _question(p)
        _actor(p)
    for p in actions.choices.values():
        p.set_defaults(handler=run_phrases)

    lex = subparsers.add_parser("lexicon", help="a question's stop words, merges, stemming, language, "
                                "non-answers; import or export it",
                                description="A question's lexicon (or the study's default one): stop words, "
                                "merges, stemming, language, stem exceptions, numbers, negations; and which "
                                "verbatims count as non-answers.",
                                epilog=f"example:\n  oecode lexicon show {S}",
                                formatter_class=HelpFormatter)
    actions = add_actions(lex)
    for name, what, usage, metavar, nargs, example in LEXICON_ACTIONS:
        p = add_action(actions, name, what, [f"oecode lexicon {name} survey.study {example}".replace("  ", " ")
                                             + " --question why"], usage=usage)
        if metavar:
            p.add_argument("values", nargs=nargs, metavar=metavar, help=LEXICON_VALUES.get(name, "the words"))
        else:
            p.set_defaults(values=[])
        where = p.add_mutually_exclusive_group(required=True)
        where.add_argument("--question", help="the open question whose lexicon to use")
        where.add_argument("--study-default", action="store_true",
                           help="the study's default lexicon (used by questions without their own)")
        if name == "exception":
            p.add_argument("--remove", action="store_true", help="drop the word's stem exception")
        if name not in ("show", "variants", "export"):
            _actor(p)
        if name == "export":
            add_overwrite_option(p)
        p.set_defaults(handler=run_lexicon, remove=False)
    p = add_action(actions, "nonanswers", "list the verbatims flagged as non-answers, or count some as answers",
                   [f"oecode lexicon nonanswers {S}",
                    f"oecode lexicon nonanswers {S} --text none --text nothing --set answer",
                    f"oecode lexicon nonanswers {S} --respondent R17 --set nonanswer --dry-run"],
                   handler=run_nonanswers,
                   notes="Non-answers are flagged at import when they read like an entry of the non-answer lists "
                   "(case, spaces and punctuation ignored); flagged verbatims are kept but left out of the "
                   "coding queue, the bases and the machine coder.")
    _question(p)
    p.add_argument("--text", action="append", default=[], metavar="TEXT",
                   help="verbatims reading this (case, spaces and punctuation ignored; repeat)")
    p.add_argument("--respondent", action="append", default=[], metavar="ID",
                   help="this survey respondent id's verbatim (repeat)")
    p.add_argument("--set", choices=("answer", "nonanswer"), dest="set_to",
                   help="count the chosen verbatims as answers, or flag them as non-answers")
    p.add_argument("--dry-run", action="store_true", help="list what would change; write nothing")
    _actor(p)


#: lexicon actions: name, help, usage after STUDY, values metavar, nargs, example values
LEXICON_ACTIONS = (
    ("show", "the lexicon as text", "", None, None, ""),
    ("stop-add", "add stop words (left out of every term list)", "WORD [WORD ...]", "WORD", "+", "open late"),
    ("stop-remove", "take words off the stop list", "WORD [WORD ...]", "WORD", "+", "late"),
    ("merge", "count several words as one term", "'A,B->TERM'", "MERGE", 1, "'libary,liberry->library'"),
    ("unmerge", "undo merges", "TERM [TERM ...]", "TERM", "+", "library"),
    ("stem", "stemming on or off (or the stemmer)", "on|off|snowball|porter", "STEMMER", 1, "off"),
    ("language", "the language of stop words and stemming", "LANGUAGE", "LANGUAGE", 1, "english"),
    ("exception", "keep a word from stemming, or give its stem", "WORD[=STEM]", "WORD", 1, "news=news"),
    ("numbers", "how numbers count", "placeholder|keep|drop", "MODE", 1, "keep"),
    ("negations", "how negation words count", "keep|join|drop", "MODE", 1, "join"),
    ("variants", "likely spelling variants of the question's terms, to merge", "", None, None, ""),
    ("import", "replace the lexicon by a lexicon file", "FILE", "FILE", 1, "lexicon.txt"),
    ("export", "write the lexicon to a file", "FILE", "FILE", 1, "lexicon.txt"),
)
LEXICON_VALUES = {
    "merge": "the merge: 'a,b->target'", "unmerge": "the merged terms (or 'a,b->target' merges) to undo",
    "stem": "on, off, snowball or porter", "language": "the language name (english, french, ...)",
    "exception": "WORD (never stemmed) or WORD=STEM",
    "numbers": "placeholder (every number one term, shown as #number), keep (each number its own term) or drop",
    "negations": "keep, join (\"no damage\" becomes one term) or drop", "import": "the lexicon file",
    "export": "the file to write"}


def _question(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--question", required=True, help="the open question")


def _actor(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--actor", default="oecode", help="who makes the change (for the audit trail)")


def _common(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("study")
    parser.add_argument("--question", required=True, help="the open question")


def _warn(message: str) -> None:
    print(f"warning: {message}", file=sys.stderr)


def _ids(ids: list) -> str:
    return ", ".join(map(str, ids[:_SHOW_IDS])) + (f" ... ({len(ids)} in all)" if len(ids) > _SHOW_IDS else "")


def _matrix(study: Study, question: str) -> tuple:
    from opencode.text import study_text as st

    tm, frame = st.term_matrix(study, question, progress=progress_bar("analysing verbatims"))
    for message in tm.warnings:
        _warn(message)
    return tm, frame


# -- words ----------------------------------------------------------------------------------------------------------
def run_words(args: argparse.Namespace) -> int:
    import numpy as np

    from opencode.study.store import Study
    from opencode.text import study_text as st
    from opencode.text.words import format_top_terms, top_terms

    if args.top < 1:
        raise OpenCodeError(f"--top {args.top}: give a number of terms of 1 or more")
    with Study.open(args.study) as study:
        tm, frame = _matrix(study, args.question)
        subset, groups = None, []
        for spec in args.where:
            mask, label = st.group_mask(study, frame, spec)
            subset = mask if subset is None else subset & mask
            groups.append(label)
        group = " and ".join(groups)
        rows = top_terms(tm, args.top, subset)
        if emit_table(args, [{"term": r.term, "label": r.label, "count": r.count, "verbatims": r.verbatims,
                              "percent": r.percent, "forms": "; ".join(f"{f} ({n})" for f, n in r.surfaces)}
                             for r in rows], "terms"):
            return 0
        chosen = np.ones(len(frame), dtype=bool) if subset is None else subset
        base = int(chosen[tm.rows_source].sum())
        left_out = int((chosen & frame["nonanswer"].to_numpy(dtype=bool)).sum())
        print(f"question {args.question}: {base:,} verbatims analysed" + (f" ({group})" if group else "")
              + f"; {left_out:,} non-answers left out")
        if base < SMALL_BASE:
            _warn(f"small base: only {base} verbatims; read the percentages with care")
        print(format_top_terms(rows))
        if group:
            print("(counts are within the group; the word forms listed are counted over the whole question)")
    return 0


# -- kwic -------------------------------------------------------------------------------------------------------------
def run_kwic(args: argparse.Namespace) -> int:
    from opencode.study.store import Study
    from opencode.text import study_text as st
    from opencode.text.kwic import kwic_summary

    if args.width < 1 or args.limit < 1:
        raise OpenCodeError("--width and --limit must be 1 or more")
    with Study.open(args.study) as study:
        matrix = _matrix(study, args.question)  # builds (with a progress bar) or loads the cached matrix
        lines, columns = st.question_kwic(study, args.question, args.term, width=args.width, limit=args.limit,
                                          show=args.show, matrix=matrix)
        if emit_table(args, [{"respondent": line.doc_id, **{name: values[i] for name, values in columns.items()},
                              "before": line.left, "match": line.match, "after": line.right}
                             for i, line in enumerate(lines)], "kwic lines"):
            return 0
        print(kwic_summary(args.term, args.question, lines))
        if lines:
            print(st.format_question_kwic(lines, columns, args.width))
    return 0


# -- phrases ------------------------------------------------------------------------------------------------------------
def run_phrases(args: argparse.Namespace) -> int:
    from opencode.study.store import Study
    from opencode.text import study_text as st
    from opencode.text.phrases import format_phrase_suggestions

    with Study.open(args.study) as study:
        q = args.question
        if args.action == "suggest":
            rows = st.suggest_question_phrases(study, q, min_count=args.min_count, top=args.top,
                                               progress=progress_bar("finding phrases"))
            if not rows:
                print(f"no word pair occurs {args.min_count} times or more in question {q}")
                return 0
            if emit_table(args, [{"rank": rank, "phrase": r.phrase, "first": r.terms[0], "second": r.terms[1],
                                   "count": r.count, "g2": r.g2, "pmi": r.pmi}
                                  for rank, r in enumerate(rows, start=1)], "phrase suggestions"):
                return 0
            print(format_phrase_suggestions(rows, ranked=True))
            print(f"accept with: oecode phrases accept {args.study} RANK [RANK ...] --question {q}")
            return 0
        if args.action == "accept":
            try:
                ranks = [int(v) for v in args.values]
            except ValueError as error:
                raise OpenCodeError(f"phrases accept: ranks are whole numbers, got {' '.join(args.values)}") from error
            change = st.accept_phrase_suggestions(study, q, ranks, actor=args.actor)
        elif args.action == "add":
            change = st.add_phrases(study, q, args.values, actor=args.actor)
        else:
            change = st.remove_phrases(study, q, args.values, actor=args.actor)
        _report(change)
        if args.action != "remove" and change.details.get("added"):
            tm, _ = st.term_matrix(study, q, progress=progress_bar("analysing verbatims"))
            for phrase in st.missing_phrases(tm, st.analyzer_for(study, q), change.details["added"]):
                _warn(f"phrase {phrase!r} never occurs in the verbatims of question {q} (kept in the lexicon)")
    return 0


def _report(change: st.LexiconChange) -> None:
    for note in change.notes:
        print(f"note: {note}")
    if not change.changed:
        print("lexicon unchanged")
        return
    details = "; ".join(f"{k}: {_plain(v)}" for k, v in change.details.items() if v not in (None, [], {}))
    print(f"lexicon {change.action}" + (f" ({details})" if details else "") + f"; version {change.lexicon.version_hash()}")


def _plain(value: object) -> str:
    if isinstance(value, dict):
        return ", ".join(f"{k} -> {v}" for k, v in value.items())
    if isinstance(value, list):
        return ", ".join(map(str, value))
    return str(value)


# -- lexicon -----------------------------------------------------------------------------------------------------------
def run_nonanswers(args: argparse.Namespace) -> int:
    from opencode.ingest.nonanswers import nonanswer_counts, set_nonanswers
    from opencode.study.store import Study

    chosen = bool(args.text or args.respondent)
    if chosen != bool(args.set_to):
        raise OpenCodeError("lexicon nonanswers: --text/--respondent and --set go together "
                            "(--set answer or --set nonanswer); with neither, the flagged texts are listed")
    with Study.open(args.study) as study:
        if not chosen:
            counts = nonanswer_counts(study, args.question)
            print(f"{sum(n for _, n in counts):,} verbatims of question {args.question} flagged as non-answers"
                  + (":" if counts else ""))
            for text, n in counts:
                print(f"{n:>8,}  {text!r}")
            return 0
        change = set_nonanswers(study, args.question, flag=args.set_to == "nonanswer", texts=args.text,
                                respondents=args.respondent, dry_run=args.dry_run, actor=args.actor)
    what = "flagged as non-answers" if change.flag else "counted as answers"
    if args.dry_run:
        print(f"{len(change.respondents):,} verbatims would be {what} (dry run, nothing written):")
        for key, text in zip(change.respondents, change.texts):
            print(f"  {key}  {text!r}")
        return 0
    if not change.changed:
        print(f"nothing changed: the chosen verbatims are already {what}")
        return 0
    texts = " ".join(repr(t) for t in dict.fromkeys(change.texts))
    now = "now count as answers" if not change.flag else "are now non-answers"
    noun = "verbatim" if change.changed == 1 else "verbatims"
    if change.changed == 1:
        now = "now counts as an answer" if not change.flag else "is now a non-answer"
    print(f"{change.changed:,} {noun} {texts} {now}; bases of question {args.question} change")
    return 0


def _one(args: argparse.Namespace, what: str) -> str:
    if len(args.values) != 1:
        raise OpenCodeError(f"lexicon {args.action}: give exactly one {what}")
    return args.values[0]


def run_lexicon(args: argparse.Namespace) -> int:
    from opencode.study.store import Study
    from opencode.text import study_text as st
    from opencode.text.spelling_variants import format_variants, suggest_variants

    q = None if args.study_default else args.question
    who = "the study default" if q is None else f"question {q}"
    with Study.open(args.study) as study:
        action = args.action
        if action == "show":
            print(f"lexicon of {who} ({st.lexicon_origin(study, q)}), version {st.get_lexicon(study, q).version_hash()}")
            print(st.get_lexicon(study, q).to_text(), end="")
            for note in st.absent_phrase_notes(study, q, progress_bar("analysing verbatims")):
                _warn(note)
            return 0
        if action == "export":
            path = st.export_lexicon(study, q, _one(args, "file"))
            print(f"wrote the lexicon of {who} to {path}")
            return 0
        if action == "variants":
            if q is None:
                raise OpenCodeError("lexicon variants: needs --question (variants come from a question's verbatims)")
            tm, _ = _matrix(study, q)
            rows = suggest_variants(tm)
            print(format_variants(rows) if rows else f"no likely spelling variants in question {q}")
            if rows:
                print(f"merge one with: oecode lexicon merge {args.study} \"RARE->TERM\" --question {q}")
            return 0
        before = st.get_lexicon(study, q)
        change = _change(study, q, args)
        _report(change)
        if action == "stop-add" and change.changed and q is not None:
            emptied = st.stop_word_effect(study, q, before, progress=progress_bar("checking verbatims"))
            if emptied:
                _warn(f"{len(emptied)} verbatim(s) now have no term left (respondent ids): {_ids(emptied)}")
    return 0


def _change(study: Study, q: str | None, args: argparse.Namespace) -> st.LexiconChange:
    from opencode.text import study_text as st

    action, actor = args.action, args.actor
    if action == "stop-add":
        return st.add_stop_words(study, q, args.values, actor=actor)
    if action == "stop-remove":
        return st.remove_stop_words(study, q, args.values, actor=actor)
    if action == "merge":
        sources, target = st.parse_merge(_one(args, "merge such as \"libary,liberry->library\""))
        return st.add_merge(study, q, sources, target, actor=actor)
    if action == "unmerge":
        return st.remove_merges(study, q, args.values, actor=actor)
    if action == "stem":
        choice = _one(args, "of on, off, snowball, porter").lower()
        stemmers = {"on": "snowball", "snowball": "snowball", "porter": "porter", "off": None}
        if choice not in stemmers:
            raise OpenCodeError(f"lexicon stem {choice!r}: choose on, off, snowball or porter")
        return st.set_stemmer(study, q, stemmers[choice], actor=actor)
    if action == "language":
        return st.set_language(study, q, _one(args, "language"), actor=actor)
    if action == "numbers":
        return st.set_numbers(study, q, _one(args, "of placeholder, keep, drop"), actor=actor)
    if action == "negations":
        return st.set_negations(study, q, _one(args, "of keep, join, drop"), actor=actor)
    if action == "exception":
        word, _, stem = _one(args, "WORD or WORD=STEM").partition("=")
        return st.set_stem_exception(study, q, word, stem or None, actor=actor, remove=args.remove)
    return st.import_lexicon(study, q, _one(args, "file"), actor=actor)

