"""A study's lexicon: language, stemmer, stop-word edits, phrases, merges and stem exceptions.

Stored as a JSON-safe dict, exchanged as a small sectioned plain-text file of our own:

    [language]      one line, e.g. english
    [stemmer]       snowball, porter or none
    [stop+]         words added to the stop list, one a line
    [stop-]         words taken off the stop list
    [phrases]       multi-word terms, e.g. opening hours
    [merges]        source -> target   (e.g. libary -> library)
    [stems]         word -> forced stem   (or "word ->" to keep the word as it is)
    [numbers]       placeholder (every number is one term, shown as #number), keep (each number a term of
                    its own, e.g. a year) or drop
    [negations]     keep (negation words stay terms: "no", "not"), join (joined to the next term: "no damage"
                    is one term) or drop (negation words are stop words)
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field
from typing import Any

from opencode.errors import OpenCodeError

_SECTIONS = ("language", "stemmer", "stop+", "stop-", "phrases", "merges", "stems", "numbers", "negations")
NUMBER_OPTIONS = ("placeholder", "keep", "drop")
NEGATION_OPTIONS = ("keep", "join", "drop")
#: Settings added after the first lexicons were stored: left out of the version hash while at their default,
#: so a lexicon that does not use them keeps the hash it always had.
_LATER_DEFAULTS = {"numbers": "placeholder", "negations": "keep"}
_ARROW = "->"
# A comment starts with "#" at the start of a line or after a space, except a placeholder term (#number...).
_COMMENT = re.compile(r"(?:^|(?<=\s))#(?!(?:number|url|email)\b).*$")


def _clean_words(words: Any, what: str) -> list[str]:
    """Stripped, de-duplicated, sorted entries of a word list (order carries no meaning)."""
    if isinstance(words, str):
        raise OpenCodeError(f"lexicon {what}: expected a list of words, got the single string {words!r}")
    return sorted({str(w).strip() for w in words if str(w).strip()})


def _clean_map(mapping: Any, what: str) -> dict[str, str]:
    """Stripped, key-sorted word -> word mapping."""
    if not isinstance(mapping, dict):
        raise OpenCodeError(f"lexicon {what}: expected a mapping of word -> word")
    out = {}
    for key, value in mapping.items():
        key = str(key).strip()
        if not key:
            raise OpenCodeError(f"lexicon {what}: an entry has an empty word on the left of '->'")
        out[key] = str(value).strip() if value is not None and str(value).strip() else key
    return dict(sorted(out.items()))


@dataclass
class Lexicon:
    """What a study changes about text analysis; the Analyzer is built from it."""

    language: str = "english"
    stemmer: str | None = "snowball"
    stop_add: list[str] = field(default_factory=list)
    stop_remove: list[str] = field(default_factory=list)
    phrases: list[str] = field(default_factory=list)
    merges: dict[str, str] = field(default_factory=dict)
    stem_exceptions: dict[str, str] = field(default_factory=dict)
    numbers: str = "placeholder"
    negations: str = "keep"

    def __post_init__(self) -> None:
        self.language = str(self.language).strip().lower()
        if not self.language:
            raise OpenCodeError("lexicon: the language is empty")
        if self.stemmer in ("", "none"):
            self.stemmer = None
        self.stop_add = _clean_words(self.stop_add, "stop+")
        self.stop_remove = _clean_words(self.stop_remove, "stop-")
        self.phrases = sorted({" ".join(p.split()).lower() for p in _clean_words(self.phrases, "phrases")})
        for phrase in self.phrases:
            if len(phrase.split()) < 2:
                raise OpenCodeError(f"lexicon phrase {phrase!r}: a phrase needs at least two words")
        self.merges = _clean_map(self.merges, "merges")
        self.stem_exceptions = _clean_map(self.stem_exceptions, "stems")
        for name, allowed in (("numbers", NUMBER_OPTIONS), ("negations", NEGATION_OPTIONS)):
            value = str(getattr(self, name)).strip().lower()
            if value not in allowed:
                raise OpenCodeError(f"lexicon {name} {getattr(self, name)!r}: choose one of {', '.join(allowed)}")
            setattr(self, name, value)

    def to_dict(self) -> dict[str, Any]:
        """A JSON-safe dict of the lexicon."""
        return {
            "language": self.language,
            "stemmer": self.stemmer,
            "stop_add": list(self.stop_add),
            "stop_remove": list(self.stop_remove),
            "phrases": list(self.phrases),
            "merges": dict(self.merges),
            "stem_exceptions": dict(self.stem_exceptions),
            "numbers": self.numbers,
            "negations": self.negations,
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> Lexicon:
        """The lexicon stored by to_dict (unknown keys are an error, naming the key)."""
        unknown = set(data) - set(cls().to_dict())
        if unknown:
            raise OpenCodeError(f"lexicon: unknown field(s) {', '.join(sorted(unknown))}")
        return cls(**data)

    def version_hash(self) -> str:
        """A stable hash of the lexicon's content (same content, same hash, on every machine)."""
        data = {k: v for k, v in self.to_dict().items() if _LATER_DEFAULTS.get(k, object()) != v}
        payload = json.dumps(data, sort_keys=True, ensure_ascii=True, separators=(",", ":"))
        return hashlib.sha256(payload.encode("ascii")).hexdigest()[:16]

    def to_text(self) -> str:
        """The lexicon in the plain-text exchange format."""
        lines = ["# oecode lexicon", "[language]", self.language, "[stemmer]", self.stemmer or "none"]
        for section, words in (("stop+", self.stop_add), ("stop-", self.stop_remove), ("phrases", self.phrases)):
            lines.append(f"[{section}]")
            lines.extend(words)
        lines.append("[merges]")
        lines.extend(f"{s} {_ARROW} {t}" for s, t in self.merges.items())
        lines.append("[stems]")
        lines.extend(f"{w} {_ARROW}" if w == s else f"{w} {_ARROW} {s}" for w, s in self.stem_exceptions.items())
        lines += ["[numbers]", self.numbers, "[negations]", self.negations]
        return "\n".join(lines) + "\n"

    @classmethod
    def from_text(cls, text: str, source: str = "lexicon text") -> Lexicon:
        """Parse the plain-text exchange format; errors name the source and line number."""
        sections: dict[str, list[tuple[int, str]]] = {name: [] for name in _SECTIONS}
        current = None
        for number, raw in enumerate(text.splitlines(), start=1):
            line = _COMMENT.sub("", raw).strip()
            if not line:
                continue
            if line.startswith("[") and line.endswith("]"):
                current = line[1:-1].strip().lower()
                if current not in sections:
                    raise OpenCodeError(
                        f"{source}, line {number}: unknown section [{current}]; "
                        f"sections are {', '.join(f'[{s}]' for s in _SECTIONS)}"
                    )
                continue
            if current is None:
                raise OpenCodeError(f"{source}, line {number}: {line!r} comes before any [section]")
            sections[current].append((number, line))
        fields: dict[str, Any] = {}
        for name, key in (("language", "language"), ("stemmer", "stemmer"), ("numbers", "numbers"),
                          ("negations", "negations")):
            entries = sections[name]
            if len(entries) > 1:
                raise OpenCodeError(f"{source}, line {entries[1][0]}: [{name}] takes one line")
            if entries:
                fields[key] = entries[0][1]
        fields["stop_add"] = [w for _, w in sections["stop+"]]
        fields["stop_remove"] = [w for _, w in sections["stop-"]]
        fields["phrases"] = [w for _, w in sections["phrases"]]
        fields["merges"] = _parse_arrows(sections["merges"], source, "merges", need_target=True)
        fields["stem_exceptions"] = _parse_arrows(sections["stems"], source, "stems", need_target=False)
        return cls(**fields)


def _parse_arrows(entries: list[tuple[int, str]], source: str, section: str, need_target: bool) -> dict[str, str]:
    """Parse 'word -> target' lines of a section."""
    out: dict[str, str] = {}
    for number, line in entries:
        if _ARROW not in line:
            raise OpenCodeError(f"{source}, line {number}: [{section}] lines look like 'word -> target', got {line!r}")
        left, right = (part.strip() for part in line.split(_ARROW, 1))
        if not left or (need_target and not right):
            raise OpenCodeError(f"{source}, line {number}: [{section}] needs a word on both sides of '->'")
        out[left] = right or left
    return out
