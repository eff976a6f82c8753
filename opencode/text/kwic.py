"""Keyword in context: every occurrence of a term's surface forms in the original verbatims."""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from opencode.errors import OpenCodeError
from opencode.text.matrix import TermMatrix
from opencode.files.textout import format_table
from opencode.text.tokenize import (
    EMAIL_PLACEHOLDER, EMAIL_RE, NEGATIONS, NUMBER_PLACEHOLDER, PLACEHOLDERS, URL_PLACEHOLDER, URL_RE, is_negation,
)

_GAP = r"[^\w.!?;:,]+(?:[\w'’\-]+[^\w.!?;:,]+){0,6}?"  # words allowed between a negation and its term


@dataclass
class KwicLine:
    """One occurrence: the verbatim's id, the text before, the match and the text after."""

    doc_id: Any
    left: str
    match: str
    right: str


class KwicLines(list):
    """The kwic lines found (up to the limit), with `total`: how many occurrences there are in all."""

    total: int = 0


def _word_pattern(word: str) -> str:
    """Regex for one surface word, matching either apostrophe and an optional hyphen."""
    if word == URL_PLACEHOLDER:
        return URL_RE.pattern
    if word == EMAIL_PLACEHOLDER:
        return EMAIL_RE.pattern
    if word == NUMBER_PLACEHOLDER:  # a number token as the tokenizer reads one (not part of "3-day")
        return r"(?<![\w'’\-])\d+(?:[.,:/]\d+)*(?:st|nd|rd|th|am|pm|s|k)?(?![\w'’\-])"
    escaped = re.escape(word).replace("'", "['’]").replace(r"\-", r"[-\s]?")
    return escaped


def surface_pattern(forms: Sequence[str]) -> re.Pattern[str]:
    """One case-insensitive regex for all surface forms of a term (longest first)."""
    alternatives = []
    for form in sorted(set(forms), key=len, reverse=True):
        words = form.split(" ")
        joined = _word_pattern(words[0])
        for prev, word in zip(words, words[1:]):
            gap = _GAP if is_negation(prev) or prev in NEGATIONS else r"[\s\-_]+"
            joined += gap + _word_pattern(word)
        alternatives.append(joined)
    return re.compile(r"(?<![\w'’])(?:" + "|".join(alternatives) + r")(?![\w])", re.IGNORECASE)


def _forms(tm: TermMatrix, col: int, term: str) -> list[str]:
    """The word forms to look for: all of the column's, except where the column stands for many values.
    A placeholder typed as itself (#number) finds every number; a literal number typed (2014, or a phrase
    holding one such as "unit 1") finds that number only, not every number the placeholder stands for."""
    name = tm.terms[col]
    if name in PLACEHOLDERS:
        typed = " ".join(term.split()).casefold()
        return [name] if typed in (name, tm.labels[col]) else [typed]
    if any(p in name for p in PLACEHOLDERS):
        typed = " ".join(term.split()).casefold()
        forms = [form for form, _ in tm.surfaces[col]]
        return [typed] if typed in forms else forms
    return [form for form, _ in tm.surfaces[col]]


def kwic(tm: TermMatrix, texts: Sequence[str], term: str, width: int = 40, limit: int | None = None) -> KwicLines:
    """Occurrences of a term in the verbatims that contain it; texts is the sequence given to build_matrix.

    At most `limit` lines are returned; the result's `total` counts every occurrence."""
    if len(texts) != tm.n_input:
        raise OpenCodeError(f"kwic got {len(texts)} verbatims but the matrix was built from {tm.n_input}")
    col = tm.column(term)
    pattern = surface_pattern(_forms(tm, col, term))
    column = tm.counts[:, col]
    lines = KwicLines()
    total = 0
    rows = sorted(column.nonzero()[0])
    for row in rows:
        text = texts[tm.rows_source[row]]
        for m in pattern.finditer(text):
            total += 1
            if limit is not None and len(lines) >= limit:
                continue
            left = " ".join(text[max(0, m.start() - width):m.start()].split())
            right = " ".join(text[m.end():m.end() + width].split())
            lines.append(KwicLine(tm.doc_ids[row], left[-width:], " ".join(m.group(0).split()), right[:width]))
    lines.total = total
    return lines


def kwic_summary(term: str, question: str, lines: Sequence[KwicLine]) -> str:
    """The line above a kwic table: how many occurrences are shown of how many ("8 of 238")."""
    total = getattr(lines, "total", len(lines))
    shown = f"{len(lines)} of {total:,}" if len(lines) < total else f"all {total:,}"
    return f"{term!r} in question {question}: {shown} occurrence{'s' if total != 1 else ''}, in verbatim order"


def fit_contexts(lines: Sequence[KwicLine], width: int, room: int) -> tuple[list[str], list[str]]:
    """Left and right contexts cut to share `room` characters beside the match (the left keeps its end)."""
    match = max([len("match")] + [len(line.match) for line in lines])
    side = max(8, min(width, (room - match - 4) // 2))  # two gaps of two spaces around the match
    lefts = [line.left[-side:].lstrip() for line in lines]
    rights = [line.right[:side].rstrip() for line in lines]
    side_left = max((len(t) for t in lefts), default=0)
    return [t.rjust(side_left) for t in lefts], rights


def format_kwic(lines: Sequence[KwicLine], width: int = 40, out_width: int | None = None) -> str:
    """Aligned kwic table: id, left context right-aligned, the match, right context; the contexts are cut to
    fit `out_width` (the terminal's width by default)."""
    from opencode.files.textout import output_width

    out_width = out_width or output_width()
    ids = max((len(str(line.doc_id)) for line in lines), default=2)
    lefts, rights = fit_contexts(lines, width, out_width - max(ids, 2) - 2)
    return format_table(
        ["id", "before", "match", "after"],
        [[line.doc_id, left, line.match, right] for line, left, right in zip(lines, lefts, rights)],
        align="lrll", wrap=[], width=out_width,
    )
