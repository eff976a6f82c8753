"""The Analyzer: normalise, tokenize, stop lists, phrases, merges, stems, negations -> term stream.

The Analyzer holds only its parameters (scikit-learn style). The ids of the terms and word forms met while
analysing live in a Vocabulary (`analyzer.vocabulary()`), one per corpus, so analysing text never changes
the analyzer. Phrases and negations are applied on integer arrays,
chunk by chunk.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from opencode.errors import OpenCodeError
from opencode.text import tokenize as tk
from opencode.text.lexicon import Lexicon
from opencode.text.negation import join_negations
from opencode.text.phrases import PhraseMatcher
from opencode.text.stemming import language_name, make_stemmer
from opencode.text.stoplists import bundled_stop_words, has_stop_list

# Kinds of token position in the analysed stream.
K_SEP, K_BOUND, K_DROP, K_TERM, K_STOP, K_NEG, K_GONE = range(7)

_LINK_OPTIONS = ("placeholder", "keep", "drop")
_KEEP_DROP = ("keep", "drop")
CHUNK_DOCS = 5000

Progress = Callable[[int, int], None] | None


@dataclass
class Chunk:
    """Kept positions of an analysed chunk: local document index, term key id and surface id."""

    doc: np.ndarray
    key: np.ndarray
    surf: np.ndarray
    n_docs: int
    phrase_hits: dict[int, int]


def batches(texts: Sequence[str], progress: Progress = None,
            chunk_docs: int = CHUNK_DOCS) -> Iterator[tuple[int, list[str]]]:
    """(offset, documents) batches of a corpus, reporting progress(done, total) after each."""
    total = len(texts)
    for start in range(0, total, chunk_docs):
        yield start, [t if isinstance(t, str) else "" for t in texts[start:start + chunk_docs]]
        if progress is not None:
            progress(min(start + chunk_docs, total), total)


class Analyzer:
    """Turns verbatims into terms; parameters only in __init__, serialisable with to_dict()."""

    def __init__(
        self,
        language: str = "english",
        stemmer: str | None = "snowball",
        stop_words: bool = True,
        stop_add: Sequence[str] = (),
        stop_remove: Sequence[str] = (),
        phrases: Sequence[str] = (),
        merges: dict[str, str] | None = None,
        stem_exceptions: dict[str, str] | None = None,
        keep_negations: bool = True,
        join_negations: bool = False,
        urls: str = "placeholder",
        emails: str = "placeholder",
        numbers: str = "placeholder",
        digits: str = "keep",
        emoji: str = "keep",
        min_length: int = 2,
    ) -> None:
        self.language = language
        self.stemmer = stemmer
        self.stop_words = stop_words
        self.stop_add = stop_add
        self.stop_remove = stop_remove
        self.phrases = phrases
        self.merges = merges
        self.stem_exceptions = stem_exceptions
        self.keep_negations = keep_negations
        self.join_negations = join_negations
        self.urls = urls
        self.emails = emails
        self.numbers = numbers
        self.digits = digits
        self.emoji = emoji
        self.min_length = min_length

    # -- parameters ---------------------------------------------------------------------------------

    _PARAMS = (
        "language", "stemmer", "stop_words", "stop_add", "stop_remove", "phrases", "merges",
        "stem_exceptions", "keep_negations", "join_negations", "urls", "emails", "numbers", "digits",
        "emoji", "min_length",
    )

    def get_params(self, deep: bool = True) -> dict[str, Any]:
        """The constructor parameters (scikit-learn convention)."""
        return {name: getattr(self, name) for name in self._PARAMS}

    def set_params(self, **params: Any) -> Analyzer:
        """Change constructor parameters (scikit-learn convention)."""
        for name, value in params.items():
            if name not in self._PARAMS:
                raise OpenCodeError(f"analyzer: unknown parameter {name!r}")
            setattr(self, name, value)
        return self

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe parameters (lists sorted where order carries no meaning)."""
        return {
            "language": self.language,
            "stemmer": self.stemmer,
            "stop_words": bool(self.stop_words),
            "stop_add": sorted(self.stop_add),
            "stop_remove": sorted(self.stop_remove),
            "phrases": sorted(self.phrases),
            "merges": dict(sorted((self.merges or {}).items())),
            "stem_exceptions": dict(sorted((self.stem_exceptions or {}).items())),
            "keep_negations": bool(self.keep_negations),
            "join_negations": bool(self.join_negations),
            "urls": self.urls,
            "emails": self.emails,
            "numbers": self.numbers,
            "digits": self.digits,
            "emoji": self.emoji,
            "min_length": int(self.min_length),
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> Analyzer:
        """The analyzer stored by to_dict."""
        unknown = set(data) - set(cls._PARAMS)
        if unknown:
            raise OpenCodeError(f"analyzer: unknown parameter(s) {', '.join(sorted(unknown))}")
        return cls(**data)

    @classmethod
    def from_lexicon(cls, lexicon: Lexicon, **options: Any) -> Analyzer:
        """An analyzer for a study lexicon (its numbers and negations settings included); options set or
        override the remaining parameters (links, emoji...)."""
        params: dict[str, Any] = {
            "language": lexicon.language,
            "stemmer": lexicon.stemmer,
            "stop_add": list(lexicon.stop_add),
            "stop_remove": list(lexicon.stop_remove),
            "phrases": list(lexicon.phrases),
            "merges": dict(lexicon.merges),
            "stem_exceptions": dict(lexicon.stem_exceptions),
            "numbers": lexicon.numbers,
            "join_negations": lexicon.negations == "join",
            "keep_negations": lexicon.negations != "drop",
        }
        params.update(options)
        return cls(**params)

    # -- compiled rules and vocabularies ------------------------------------------------------------

    def _validate(self) -> None:
        """Check parameter values, naming the parameter and its allowed values."""
        for name, allowed in (("urls", _LINK_OPTIONS), ("emails", _LINK_OPTIONS), ("numbers", _LINK_OPTIONS),
                              ("digits", _KEEP_DROP), ("emoji", _KEEP_DROP)):
            if getattr(self, name) not in allowed:
                raise OpenCodeError(f"analyzer {name}={getattr(self, name)!r}: choose one of {', '.join(allowed)}")
        if not isinstance(self.min_length, int) or self.min_length < 1:
            raise OpenCodeError(f"analyzer min_length={self.min_length!r}: must be a whole number >= 1")
        for name in ("stop_add", "stop_remove", "phrases"):
            if isinstance(getattr(self, name), str):
                raise OpenCodeError(f"analyzer {name}: expected a list of entries, got a single string")

    def _rules(self) -> _Rules:
        """The rules these parameters compile to (built afresh: well under a millisecond, and it keeps the
        analyzer free of any state but its parameters)."""
        self._validate()
        return _Rules(self)

    def vocabulary(self) -> Vocabulary:
        """A new, empty vocabulary for analysing a corpus with these settings (term ids grow there)."""
        return Vocabulary(self._rules())

    def check(self) -> list[str]:
        """Raise a clear error when these settings cannot analyse text (stemmer, merge loops, phrases);
        return notes for the user about them (e.g. no bundled stop list for the language)."""
        self.vocabulary()
        return self.notes()

    def notes(self) -> list[str]:
        """Notes for the user about these settings (prose for a result object to carry, not analyzer state)."""
        return list(self._rules().notes)

    def tokens(self, text: str) -> list[str]:
        """The terms of one text, in order (the stream the term-document matrix counts); the analyzer is
        left unchanged."""
        return self.vocabulary().terms(text)

    def term_lists(self, texts: Sequence[str]) -> list[list[str]]:
        """The terms of many texts, in order, through one vocabulary (chunk by chunk)."""
        return self.vocabulary().term_lists(texts)

    @property
    def language_name(self) -> str:
        """The language's full lower-case name."""
        return language_name(self.language)


class _Rules:
    """What an analyzer's parameters compile to: stemmer, stop sets, merges and phrases. Built once per
    parameter set and never changed afterwards."""

    def __init__(self, analyzer: Analyzer) -> None:
        self.notes: list[str] = []
        self.language = analyzer.language
        self.stem_fn = make_stemmer(analyzer.language, analyzer.stemmer)
        self.keep_negations = bool(analyzer.keep_negations)
        self.join_negations = bool(analyzer.join_negations)
        self.urls, self.emails, self.numbers = analyzer.urls, analyzer.emails, analyzer.numbers
        self.digits, self.emoji, self.min_length = analyzer.digits, analyzer.emoji, analyzer.min_length
        stop = set(bundled_stop_words(analyzer.language)) if analyzer.stop_words else set()
        if analyzer.stop_words and not has_stop_list(analyzer.language):
            self.notes.append(
                f"no bundled stop list for language {analyzer.language!r}; only the study's own stop words apply"
            )
        stop_add = {tk.normalise(w).strip() for w in analyzer.stop_add}
        self.explicit_stop = frozenset(stop_add)
        stop |= stop_add
        stop -= {tk.normalise(w).strip() for w in analyzer.stop_remove}
        if self.keep_negations:
            stop -= {w for w in stop if tk.is_negation(w) and w not in stop_add}
        self.stop = frozenset(stop)
        self.exceptions = {tk.normalise(w): tk.normalise(s) for w, s in (analyzer.stem_exceptions or {}).items()}
        self._stems: dict[str, str] = {}
        self.merge_map = self._resolve_merges(analyzer.merges or {})
        self.stop_keys = frozenset(self.merge_map.get(k, k) for k in (self.base_key(w) for w in stop_add) if k)
        self.phrases: list[tuple[str, list[str], str]] = []
        self.phrase_parts: dict[tuple[str, ...], str] = {}
        for phrase in analyzer.phrases:
            words = self.words_of(phrase)
            if len(words) < 2:
                raise OpenCodeError(f"phrase {phrase!r}: a phrase needs at least two words")
            name = "_".join(self.phrase_word(w) for w in words)
            name = self.merge_map.get(name, name)
            self.phrases.append((phrase, words, name))
            self.phrase_parts[tuple(self.stem(self.strip_possessive(w)) for w in words)] = name
        self._stems = {}  # the compile-time memo is dropped: a vocabulary keeps its own

    @staticmethod
    def words_of(text: str) -> list[str]:
        """The cleaned word forms of a lexicon entry (punctuation and separators left out)."""
        return [f for kind, f in (tk.classify(t) for t in tk.TOKEN_RE.findall(tk.normalise(text)))
                if kind not in (tk.SEP, tk.BOUND, tk.DROP)]

    def phrase_word(self, form: str) -> str:
        """A phrase word as it names the phrase term: a number or link stands as its placeholder when the
        settings turn it into one (the phrase "unit 1" matches "unit 579" too, so it is named unit_#number)."""
        kind, _ = tk.classify(form)
        if kind == tk.NUM and self.numbers == "placeholder":
            return tk.NUMBER_PLACEHOLDER
        return form

    def stem(self, word: str, cache: dict[str, str] | None = None) -> str:
        """Stem of one word (exceptions first; hyphenated words stem each part)."""
        cache = self._stems if cache is None else cache
        cached = cache.get(word)
        if cached is not None:
            return cached
        if word in self.exceptions:
            stem = self.exceptions[word]
        elif "-" in word:
            stem = "_".join(self.stem(part, cache) for part in word.split("-") if part)
        elif self.stem_fn is None or "'" in word:
            stem = word
        else:
            stem = self.stem_fn(word)
        cache[word] = stem
        return stem

    @staticmethod
    def strip_possessive(form: str) -> str:
        """people's -> people, parents' -> parents."""
        if form.endswith("'s"):
            return form[:-2]
        return form.rstrip("'")

    def base_key(self, text: str) -> str:
        """The unmerged term key of a word or a multi-word entry (words joined with '_')."""
        words = self.words_of(text)
        return "_".join(words) if len(words) > 1 else (self.stem(self.strip_possessive(words[0])) if words else "")

    def _resolve_merges(self, merges: dict[str, str]) -> dict[str, str]:
        """Merge map on term keys, chains followed (a -> b -> c gives a -> c); cycles are an error."""
        direct = {}
        for source, target in merges.items():
            s, t = self.base_key(source), self.base_key(target)
            if not s or not t:
                raise OpenCodeError(f"merge {source!r} -> {target!r}: both sides need a word")
            if s != t:
                direct[s] = t
        resolved = {}
        for s in direct:
            seen, t = {s}, direct[s]
            while t in direct:
                if t in seen:
                    raise OpenCodeError(f"merges form a loop through {s!r}; remove one of the merges")
                seen.add(t)
                t = direct[t]
            resolved[s] = t
        return resolved


class Vocabulary:
    """The growing part of analysis: ids of the raw tokens, term keys and surface forms met so far.

    Every distinct raw token is resolved once (stemmed, checked against stop lists and merges) and the result
    kept in lookup arrays, so analysing a corpus is a few dictionary and numpy operations per token. One
    vocabulary serves one corpus (or one text); the analyzer that made it is not changed by using it.
    """

    def __init__(self, rules: _Rules) -> None:
        self.rules = rules
        self._raw: dict[str, int] = {}
        self._kind = np.zeros(0, dtype=np.int8)
        self._key = np.zeros(0, dtype=np.int64)
        self._surf = np.zeros(0, dtype=np.int64)
        self._stems: dict[str, str] = {}
        self.key_names: list[str] = []
        self._key_ids: dict[str, int] = {}
        self.surface_names: list[str] = []
        self._surface_ids: dict[str, int] = {}
        self.phrase_keys: dict[str, int] = {}
        table: dict[tuple[int, ...], int] = {}
        for phrase, words, name in rules.phrases:
            ids = tuple(self._resolve(w)[1] for w in words)
            table[ids] = self.key_id(name)
            self.phrase_keys[phrase] = table[ids]
        self._matcher = PhraseMatcher(table)

    def key_id(self, name: str) -> int:
        """Id of a term key, added on first sight."""
        kid = self._key_ids.get(name)
        if kid is None:
            kid = self._key_ids[name] = len(self.key_names)
            self.key_names.append(name)
        return kid

    def surface_id(self, form: str) -> int:
        """Id of a surface form, added on first sight."""
        sid = self._surface_ids.get(form)
        if sid is None:
            sid = self._surface_ids[form] = len(self.surface_names)
            self.surface_names.append(form)
        return sid

    def _resolve(self, token: str) -> tuple[int, int, int]:
        """Kind, term key id and surface id of one distinct raw token."""
        rules = self.rules
        kind, form = tk.classify(token)
        if kind == tk.SEP:
            return K_SEP, -1, -1
        if kind in (tk.BOUND, tk.DROP):
            return (K_BOUND if kind == tk.BOUND else K_DROP), -1, -1
        surf = self.surface_id(form)
        if kind == tk.PLACEHOLDER:
            return K_TERM, self.key_id(form), surf
        if kind == tk.EMOJI:
            return (K_TERM if rules.emoji == "keep" else K_DROP), self.key_id(form), surf
        if kind == tk.NUM:
            if rules.numbers == "drop":
                return K_DROP, self.key_id(tk.NUMBER_PLACEHOLDER), surf
            name = tk.NUMBER_PLACEHOLDER if rules.numbers == "placeholder" else form
            return K_TERM, self.key_id(name), surf
        base = rules.strip_possessive(form)
        key = rules.stem(base, self._stems)
        parts = tuple(rules.stem(p, self._stems) for p in base.split("-") if p) if "-" in base else ()
        key = rules.phrase_parts.get(parts, key)
        key = rules.merge_map.get(key, key)
        kid = self.key_id(key)
        if rules.keep_negations and tk.is_negation(form) and form not in rules.explicit_stop:
            return K_NEG, self.key_id(form), surf
        if form in rules.stop or base in rules.stop or key in rules.stop_keys:
            return K_STOP, kid, surf
        if (len(base) < rules.min_length) or (rules.digits == "drop" and any(c.isdigit() for c in base)):
            return K_DROP, kid, surf
        return K_TERM, kid, surf

    def _extend_lookups(self) -> None:
        """Resolve raw tokens first seen in the latest chunk."""
        start = len(self._kind)
        if start == len(self._raw):
            return
        new = list(self._raw)[start:]
        resolved = np.array([self._resolve(t) for t in new], dtype=np.int64).reshape(-1, 3)
        self._kind = np.concatenate([self._kind, resolved[:, 0].astype(np.int8)])
        self._key = np.concatenate([self._key, resolved[:, 1]])
        self._surf = np.concatenate([self._surf, resolved[:, 2]])

    def stream_chunk(self, texts: Sequence[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[int, int]]:
        """Kind, term key id and surface id of every token position (separators included) of a batch,
        with phrases and negations applied, plus how often each phrase key matched."""
        rules = self.rules
        raw = tk.tokenize_chunk(texts, rules.urls, rules.emails, self._raw)
        self._extend_lookups()
        kind = self._kind[raw]
        key = self._key[raw]
        surf = self._surf[raw]
        hits = self._matcher.apply(kind, key, surf, self)
        if rules.join_negations:
            join_negations(kind, key, surf, self)
        return kind, key, surf, hits

    def analyse_chunk(self, texts: Sequence[str]) -> Chunk:
        """Analyse a batch of documents into kept positions (doc index, term key id, surface id)."""
        kind, key, surf, hits = self.stream_chunk(texts)
        doc = np.cumsum(kind == K_SEP, dtype=np.int64)
        keep = (kind == K_TERM) | (kind == K_NEG)
        if self.rules.stop_keys:
            stop_ids = [self._key_ids[k] for k in self.rules.stop_keys if k in self._key_ids]
            keep &= ~np.isin(key, stop_ids)
        return Chunk(doc=doc[keep], key=key[keep], surf=surf[keep], n_docs=len(texts), phrase_hits=hits)

    def iter_chunks(self, texts: Sequence[str], progress: Progress = None) -> Iterator[tuple[int, Chunk]]:
        """Analyse a corpus chunk by chunk, yielding (offset of the chunk's first doc, chunk)."""
        for start, batch in batches(texts, progress):
            yield start, self.analyse_chunk(batch)

    def terms(self, text: str) -> list[str]:
        """The terms of one text, in order."""
        chunk = self.analyse_chunk([text if isinstance(text, str) else ""])
        return [self.key_names[k] for k in chunk.key]

    def term_lists(self, texts: Sequence[str]) -> list[list[str]]:
        """The terms of many texts, in order (chunk by chunk)."""
        out: list[list[str]] = [[] for _ in texts]
        for start, chunk in self.iter_chunks(list(texts)):
            names = np.asarray(self.key_names, dtype=object)[chunk.key]
            bounds = np.searchsorted(chunk.doc, np.arange(chunk.n_docs + 1))
            for i in range(chunk.n_docs):
                out[start + i] = names[bounds[i]:bounds[i + 1]].tolist()
        return out
