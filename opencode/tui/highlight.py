"""Which words of a verbatim to highlight: those whose analyzer term appears in any active code's rule."""

from __future__ import annotations

import re
from functools import lru_cache
from typing import Any, Iterable

from opencode.coding.features import default_analyzer, terms_of
from opencode.coding.rules import parse_rule
from opencode.errors import OpenCodeError

_WORD = re.compile(r"[\w'’\-]+")


class RuleHighlighter:
    """Finds the character spans of rule words in a text (words pass through the same analyzer as rules)."""

    def __init__(self, rules: Iterable[str], analyzer: Any = None):
        rules = [r for r in rules if r.strip()]
        self.analyzer = analyzer or (default_analyzer() if rules else None)
        self.terms: set[str] = set()
        self.broken: list[str] = []
        for rule in rules:
            try:
                self.terms |= parse_rule(rule, self.analyzer).terms
            except OpenCodeError:
                self.broken.append(rule)
        self._terms_of_word = lru_cache(maxsize=20000)(self._word_terms)

    def _word_terms(self, word: str) -> frozenset[str]:
        return frozenset(terms_of(self.analyzer, word))

    def spans(self, text: str) -> list[tuple[int, int]]:
        """(start, end) of each word in `text` whose term a rule uses."""
        if not self.terms or not text:
            return []
        return [(m.start(), m.end()) for m in _WORD.finditer(text)
                if self._terms_of_word(m.group(0).lower()) & self.terms]
