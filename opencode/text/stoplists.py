"""Bundled stop lists (our own plain-text files in lexicons/, one word a line)."""

from __future__ import annotations

from functools import lru_cache

from opencode.resources import lexicon_dir, read_lexicon
from opencode.text.stemming import language_code


def stop_list_file(language: str) -> str:
    """File name of the bundled stop list for a language (e.g. 'stop-en.txt')."""
    return f"stop-{language_code(language)}.txt"


def has_stop_list(language: str) -> bool:
    """True when a stop list ships for this language."""
    return (lexicon_dir() / stop_list_file(language)).is_file()


@lru_cache(maxsize=32)
def bundled_stop_words(language: str) -> frozenset[str]:
    """The bundled stop words for a language (empty when none ships), case-folded."""
    if not has_stop_list(language):
        return frozenset()
    return frozenset(w.casefold().replace("’", "'") for w in read_lexicon(stop_list_file(language)))
