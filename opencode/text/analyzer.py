"""The Analyzer: normalise, tokenize, stop lists, phrases, merges, stems, negations -> term stream.

Every distinct raw token is resolved once (stemmed, checked against stop lists and merges) and the
result kept in lookup arrays, so analysing a corpus is a few dictionary and numpy operations per
token. Phrases and negations are applied on integer arrays, chunk by chunk.
"""

from __future__ import annotations

import json
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
        """An analyzer for a study lexicon; options set the remaining parameters (negations, links...)."""
        return cls(
            language=lexicon.language,
            stemmer=lexicon.stemmer,
            stop_add=list(lexicon.stop_add),
            stop_remove=list(lexicon.stop_remove),
            phrases=list(lexicon.phrases),
            merges=dict(lexicon.merges),
            stem_exceptions=dict(lexicon.stem_exceptions),
            **options,
        )

    # -- preparation --------------------------------------------------------------------------------

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

    def _prepare(self) -> None:
        """Build (or reuse) the lookup state for the current parameters."""
        signature = json.dumps(self.to_dict(), sort_keys=True)
        if getattr(self, "_signature", None) == signature:
            return
        self._validate()
        self.warnings_: list[str] = []
        self._stem_fn = make_stemmer(self.language, self.stemmer)
        stop = set(bundled_stop_words(self.language)) if self.stop_words else set()
        if self.stop_words and not has_stop_list(self.language):
            self.warnings_.append(
                f"no bundled stop list for language {self.language!r}; only the study's own stop words apply"
            )
        stop_add = {tk.normalise(w).strip() for w in self.stop_add}
        self._explicit_stop = stop_add
        stop |= stop_add
        stop -= {tk.normalise(w).strip() for w in self.stop_remove}
        if self.keep_negations:
            stop -= {w for w in stop if tk.is_negation(w) and w not in stop_add}
        self._stop = stop
        self._exceptions = {tk.normalise(w): tk.normalise(s) for w, s in (self.stem_exceptions or {}).items()}
        self._stem_cache: dict[str, str] = {}
        self._merge_map: dict[str, str] = {}
        self._merge_map = self._resolve_merges()
        self._stop_keys = {self._merge_map.get(k, k) for k in (self._base_key(w) for w in stop_add) if k}
        self._vocab: dict[str, int] = {}
        self._kind = np.zeros(0, dtype=np.int8)
        self._key = np.zeros(0, dtype=np.int64)
        self._surf = np.zeros(0, dtype=np.int64)
        self.key_names_: list[str] = []
        self._key_ids: dict[str, int] = {}
        self.surface_names_: list[str] = []
        self._surface_ids: dict[str, int] = {}
        self._phrase_parts: dict[tuple[str, ...], str] = {}
        self._matcher = self._build_matcher()
        self._signature = signature

    def _stem(self, word: str) -> str:
        """Stem of one word (cached; exceptions first; hyphenated words stem each part)."""
        cached = self._stem_cache.get(word)
        if cached is not None:
            return cached
        if word in self._exceptions:
            stem = self._exceptions[word]
        elif "-" in word:
            stem = "_".join(self._stem(part) for part in word.split("-") if part)
        elif self._stem_fn is None or "'" in word:
            stem = word
        else:
            stem = self._stem_fn(word)
        self._stem_cache[word] = stem
        return stem

    @staticmethod
    def _strip_possessive(form: str) -> str:
        """people's -> people, parents' -> parents."""
        if form.endswith("'s"):
            return form[:-2]
        return form.rstrip("'")

    def _base_key(self, text: str) -> str:
        """The unmerged term key of a word or a multi-word entry (words joined with '_')."""
        words = [f for kind, f in (tk.classify(t) for t in tk.TOKEN_RE.findall(tk.normalise(text)))
                 if kind not in (tk.SEP, tk.BOUND, tk.DROP)]
        return "_".join(words) if len(words) > 1 else (self._stem(self._strip_possessive(words[0])) if words else "")

    def _resolve_merges(self) -> dict[str, str]:
        """Merge map on term keys, chains followed (a -> b -> c gives a -> c); cycles are an error."""
        direct = {}
        for source, target in (self.merges or {}).items():
            s, t = self._base_key(source), self._base_key(target)
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

    def _key_id(self, name: str) -> int:
        """Id of a term key, added on first sight."""
        kid = self._key_ids.get(name)
        if kid is None:
            kid = self._key_ids[name] = len(self.key_names_)
            self.key_names_.append(name)
        return kid

    def _surface_id(self, form: str) -> int:
        """Id of a surface form, added on first sight."""
        sid = self._surface_ids.get(form)
        if sid is None:
            sid = self._surface_ids[form] = len(self.surface_names_)
            self.surface_names_.append(form)
        return sid

    def _resolve(self, token: str) -> tuple[int, int, int]:
        """Kind, term key id and surface id of one distinct raw token."""
        kind, form = tk.classify(token)
        if kind == tk.SEP:
            return K_SEP, -1, -1
        if kind in (tk.BOUND, tk.DROP):
            return (K_BOUND if kind == tk.BOUND else K_DROP), -1, -1
        surf = self._surface_id(form)
        if kind == tk.PLACEHOLDER:
            return K_TERM, self._key_id(form), surf
        if kind == tk.EMOJI:
            return (K_TERM if self.emoji == "keep" else K_DROP), self._key_id(form), surf
        if kind == tk.NUM:
            if self.numbers == "drop":
                return K_DROP, self._key_id(tk.NUMBER_PLACEHOLDER), surf
            name = tk.NUMBER_PLACEHOLDER if self.numbers == "placeholder" else form
            return K_TERM, self._key_id(name), surf
        base = self._strip_possessive(form)
        key = self._stem(base)
        parts = tuple(self._stem(p) for p in base.split("-") if p) if "-" in base else ()
        key = self._phrase_parts.get(parts, key)
        key = self._merge_map.get(key, key)
        kid = self._key_id(key)
        if self.keep_negations and tk.is_negation(form) and form not in self._explicit_stop:
            return K_NEG, self._key_id(form), surf
        if form in self._stop or base in self._stop or key in self._stop_keys:
            return K_STOP, kid, surf
        if (len(base) < self.min_length) or (self.digits == "drop" and any(c.isdigit() for c in base)):
            return K_DROP, kid, surf
        return K_TERM, kid, surf

    def _build_matcher(self) -> PhraseMatcher:
        """The phrase matcher for the user phrases (key-id sequences -> phrase key id)."""
        table: dict[tuple[int, ...], int] = {}
        self.phrase_keys_: dict[str, int] = {}
        for phrase in self.phrases:
            words = [f for kind, f in (tk.classify(t) for t in tk.TOKEN_RE.findall(tk.normalise(phrase)))
                     if kind not in (tk.SEP, tk.BOUND, tk.DROP)]
            if len(words) < 2:
                raise OpenCodeError(f"phrase {phrase!r}: a phrase needs at least two words")
            name = "_".join(words)
            name = self._merge_map.get(name, name)
            ids = tuple(self._resolve(w)[1] for w in words)
            table[ids] = self._key_id(name)
            self.phrase_keys_[phrase] = table[ids]
            self._phrase_parts[tuple(self._stem(self._strip_possessive(w)) for w in words)] = name
        return PhraseMatcher(table)

    def _extend_lookups(self) -> None:
        """Resolve raw tokens first seen in the latest chunk."""
        start = len(self._kind)
        if start == len(self._vocab):
            return
        new = list(self._vocab)[start:]
        resolved = np.array([self._resolve(t) for t in new], dtype=np.int64).reshape(-1, 3)
        self._kind = np.concatenate([self._kind, resolved[:, 0].astype(np.int8)])
        self._key = np.concatenate([self._key, resolved[:, 1]])
        self._surf = np.concatenate([self._surf, resolved[:, 2]])

    # -- analysis -----------------------------------------------------------------------------------

    def stream_chunk(self, texts: Sequence[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[int, int]]:
        """Kind, term key id and surface id of every token position (separators included) of a batch,
        with phrases and negations applied, plus how often each phrase key matched."""
        self._prepare()
        raw = tk.tokenize_chunk(texts, self.urls, self.emails, self._vocab)
        self._extend_lookups()
        kind = self._kind[raw]
        key = self._key[raw]
        surf = self._surf[raw]
        hits = self._matcher.apply(kind, key, surf, self)
        if self.join_negations:
            join_negations(kind, key, surf, self)
        return kind, key, surf, hits

    def analyse_chunk(self, texts: Sequence[str]) -> Chunk:
        """Analyse a batch of documents into kept positions (doc index, term key id, surface id)."""
        kind, key, surf, hits = self.stream_chunk(texts)
        doc = np.cumsum(kind == K_SEP, dtype=np.int64)
        keep = (kind == K_TERM) | (kind == K_NEG)
        if self._stop_keys:
            stop_ids = [self._key_ids[k] for k in self._stop_keys if k in self._key_ids]
            keep &= ~np.isin(key, stop_ids)
        return Chunk(doc=doc[keep], key=key[keep], surf=surf[keep], n_docs=len(texts), phrase_hits=hits)

    def iter_chunks(self, texts: Sequence[str], progress: Progress = None) -> Iterator[tuple[int, Chunk]]:
        """Analyse a corpus chunk by chunk, yielding (offset of the chunk's first doc, chunk)."""
        for start, batch in batches(texts, progress):
            yield start, self.analyse_chunk(batch)

    def tokens(self, text: str) -> list[str]:
        """The terms of one text, in order (the stream the term-document matrix counts)."""
        chunk = self.analyse_chunk([text])
        return [self.key_names_[k] for k in chunk.key]

    @property
    def language_name(self) -> str:
        """The language's full lower-case name."""
        return language_name(self.language)
