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


def kwic(tm: TermMatrix, texts: Sequence[str], term: str, width: int = 40, limit: int | None = None) -> list[KwicLine]:
    """Occurrences of a term in the verbatims that contain it; texts is the sequence given to build_matrix."""
    if len(texts) != tm.n_input:
        raise OpenCodeError(f"kwic got {len(texts)} verbatims but the matrix was built from {tm.n_input}")
    col = tm.column(term)
    pattern = surface_pattern(_forms(tm, col, term))
    column = tm.counts[:, col]
    lines: list[KwicLine] = []
    rows = sorted(column.nonzero()[0])
    for row in rows:
        text = texts[tm.rows_source[row]]
        for m in pattern.finditer(text):
            left = " ".join(text[max(0, m.start() - width):m.start()].split())
            right = " ".join(text[m.end():m.end() + width].split())
            lines.append(KwicLine(tm.doc_ids[row], left[-width:], " ".join(m.group(0).split()), right[:width]))
            if limit is not None and len(lines) >= limit:
                return lines
    return lines


def format_kwic(lines: Sequence[KwicLine], width: int = 40) -> str:
    """Aligned kwic table: id, left context right-aligned, the match, right context."""
    return format_table(
        ["id", "before", "match", "after"],
        [[line.doc_id, line.left.rjust(width), line.match, line.right] for line in lines],
        align="lrll",
    )
