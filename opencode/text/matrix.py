"""Term-document matrix (documents x terms, scipy CSR) with vocabulary, labels and surface forms.

Serialised without pickle (numpy .npz with allow_pickle=False plus a JSON header) so the study can
cache it; cache_key() says when a cached matrix is still valid.
"""

from __future__ import annotations

import hashlib
import io
import json
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from importlib.metadata import version
import numpy as np
import scipy.sparse as sp

from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer, Progress
from opencode.text.tokenize import term_label

FORMAT_VERSION = 3  # 2: placeholders are named #number, #url, #email; 3: absent phrases apart from warnings
WEIGHTINGS = ("count", "tfidf")
_SHOW_IDS = 10


def _nltk_version() -> str:
    """The installed nltk's version (its stemmers shape the terms), read without importing nltk."""
    return version("nltk")


def _plain(value: Any) -> Any:
    """A document id as a JSON-safe Python value (numpy scalars unwrapped)."""
    return value.item() if hasattr(value, "item") else value


def check_corpus(texts: Sequence[str], exclude: Sequence[bool] | np.ndarray | None) -> np.ndarray:
    """The non-answer mask as a bool array, after checking the corpus can be analysed at all."""
    if texts is None or len(texts) == 0:
        raise OpenCodeError("the corpus is empty: there are no verbatims to analyse")
    if exclude is None:
        return np.zeros(len(texts), dtype=bool)
    mask = np.asarray(exclude, dtype=bool)
    if mask.shape != (len(texts),):
        raise OpenCodeError(f"the non-answer mask has {mask.size} entries but there are {len(texts)} verbatims")
    if mask.all():
        raise OpenCodeError(f"all {len(texts)} verbatims are non-answers: there is nothing to analyse")
    return mask


def _df_limit(value: float | int, n_docs: int, name: str) -> float:
    """A document-frequency limit as a count (ints are counts, floats in [0, 1] proportions)."""
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise OpenCodeError(f"{name}={value!r}: give a count (whole number) or a proportion between 0 and 1")
    if isinstance(value, (float, np.floating)):
        if not 0.0 <= value <= 1.0:
            raise OpenCodeError(f"{name}={value}: a proportion must lie between 0 and 1")
        return value * n_docs
    if value < 0:
        raise OpenCodeError(f"{name}={value}: a count cannot be negative")
    return float(value)


def check_limits(min_df: float | int, max_df: float | int, weighting: str, n_docs: int) -> tuple[float, float]:
    """The document-frequency limits as counts over n_docs analysed verbatims; a clear error for bad options."""
    if weighting not in WEIGHTINGS:
        raise OpenCodeError(f"weighting {weighting!r}: choose one of {', '.join(WEIGHTINGS)}")
    return _df_limit(min_df, n_docs, "min_df"), _df_limit(max_df, n_docs, "max_df")


@dataclass
class TermMatrix:
    """The analysed corpus: counts (docs x terms), vocabulary and what was left out."""

    counts: sp.csr_matrix
    terms: list[str]
    labels: list[str]
    surfaces: list[list[tuple[str, int]]]
    doc_ids: list[Any]
    rows_source: np.ndarray
    n_input: int
    excluded_doc_ids: list[Any] = field(default_factory=list)
    empty_doc_ids: list[Any] = field(default_factory=list)
    weighting: str = "count"
    warnings: list[str] = field(default_factory=list)
    #: Lexicon phrases found in none of the verbatims analysed. Kept apart from `warnings`, which every text
    #: command prints: the lexicon verb shows these once, where phrases are edited or looked at.
    absent_phrases: list[str] = field(default_factory=list)

    @property
    def df(self) -> np.ndarray:
        """Document frequency of each term (verbatims containing it)."""
        return np.bincount(self.counts.indices, minlength=self.counts.shape[1])

    @property
    def tf(self) -> np.ndarray:
        """Total occurrences of each term."""
        return np.asarray(self.counts.sum(axis=0)).ravel()

    @property
    def X(self) -> sp.csr_matrix:
        """The weighted matrix: counts, or tf-idf (scikit-learn TfidfTransformer defaults)."""
        if self.weighting == "count":
            return self.counts
        if getattr(self, "_tfidf", None) is None:
            from sklearn.feature_extraction.text import TfidfTransformer  # only here: words and kwic never need it
            self._tfidf = TfidfTransformer().fit_transform(self.counts).tocsr()
        return self._tfidf

    def column(self, term: str) -> int:
        """Column of a term given by its name, its label or any of its surface forms."""
        wanted = term.strip().casefold()
        for lookup in (self.terms, self.labels):
            if wanted in lookup:
                return lookup.index(wanted)
        for col, forms in enumerate(self.surfaces):
            if any(form == wanted for form, _ in forms):
                return col
        raise OpenCodeError(f"term {term!r} is not in the vocabulary ({len(self.terms)} terms)")

    def to_bytes(self) -> bytes:
        """Serialise without pickle: an .npz of arrays with a JSON header inside."""
        header = {
            "format": FORMAT_VERSION, "terms": self.terms, "labels": self.labels,
            "surfaces": self.surfaces, "doc_ids": self.doc_ids, "n_input": self.n_input,
            "excluded_doc_ids": self.excluded_doc_ids, "empty_doc_ids": self.empty_doc_ids,
            "weighting": self.weighting, "warnings": self.warnings, "absent_phrases": self.absent_phrases,
            "shape": list(self.counts.shape),
        }
        buffer = io.BytesIO()
        np.savez(
            buffer,
            header=np.frombuffer(json.dumps(header).encode("utf-8"), dtype=np.uint8),
            data=self.counts.data, indices=self.counts.indices, indptr=self.counts.indptr,
            rows_source=self.rows_source,
        )
        return buffer.getvalue()

    @classmethod
    def from_bytes(cls, blob: bytes) -> TermMatrix:
        """Read what to_bytes wrote (never unpickles)."""
        try:
            with np.load(io.BytesIO(blob), allow_pickle=False) as arrays:
                header = json.loads(arrays["header"].tobytes().decode("utf-8"))
                counts = sp.csr_matrix(
                    (arrays["data"], arrays["indices"], arrays["indptr"]), shape=tuple(header["shape"])
                )
                rows_source = arrays["rows_source"]
        except (ValueError, KeyError, OSError) as exc:
            raise OpenCodeError(f"cached term matrix is unreadable ({exc}); rebuild it") from exc
        if header.get("format") != FORMAT_VERSION:
            raise OpenCodeError(f"cached term matrix has format {header.get('format')}, expected {FORMAT_VERSION}")
        return cls(
            counts=counts, terms=header["terms"], labels=header["labels"],
            surfaces=[[(f, c) for f, c in forms] for forms in header["surfaces"]],
            doc_ids=header["doc_ids"], rows_source=rows_source, n_input=header["n_input"],
            excluded_doc_ids=header["excluded_doc_ids"], empty_doc_ids=header["empty_doc_ids"],
            weighting=header["weighting"], warnings=header["warnings"],
            absent_phrases=header.get("absent_phrases", []),
        )


def _surface_table(keys: np.ndarray, surfs: np.ndarray, counts: np.ndarray, col_of_key: np.ndarray,
                   n_terms: int, names: list[str]) -> list[list[tuple[str, int]]]:
    """Surface forms of each column with their counts, most frequent first (ties alphabetical)."""
    cols = col_of_key[keys]
    ok = cols >= 0
    cols, surfs, counts = cols[ok], surfs[ok], counts[ok]
    code = cols * (int(surfs.max()) + 1 if len(surfs) else 1) + surfs
    uniq, inverse = np.unique(code, return_inverse=True)
    totals = np.bincount(inverse.ravel(), weights=counts).astype(np.int64)
    width = int(surfs.max()) + 1 if len(surfs) else 1
    ucol, usurf = uniq // width, uniq % width
    forms = np.array([names[s] for s in usurf], dtype=object)
    order = np.lexsort((forms, -totals, ucol))
    table: list[list[tuple[str, int]]] = [[] for _ in range(n_terms)]
    for i in order:
        table[ucol[i]].append((forms[i], int(totals[i])))
    return table


def build_matrix(
    texts: Sequence[str],
    analyzer: Analyzer,
    *,
    doc_ids: Sequence[Any] | None = None,
    exclude: Sequence[bool] | np.ndarray | None = None,
    min_df: float | int = 1,
    max_df: float | int = 1.0,
    weighting: str = "count",
    progress: Progress = None,
) -> TermMatrix:
    """Analyse verbatims into a term-document matrix; non-answers (exclude mask) are left out and listed."""
    excluded = check_corpus(texts, exclude)
    ids = list(range(len(texts))) if doc_ids is None else [_plain(d) for d in doc_ids]
    if len(ids) != len(texts):
        raise OpenCodeError(f"{len(ids)} document ids were given for {len(texts)} verbatims")
    rows_source = np.flatnonzero(~excluded)
    docs = [texts[i] for i in rows_source]
    check_limits(min_df, max_df, weighting, len(docs))  # before the slow part
    n_docs = len(docs)

    vocabulary = analyzer.vocabulary()
    rows, cols, data, skeys, ssurf, scount = [], [], [], [], [], []
    hits: dict[int, int] = {}
    for start, chunk in vocabulary.iter_chunks(docs, progress):
        width = len(vocabulary.key_names)
        uniq, cnt = np.unique(chunk.doc * width + chunk.key, return_counts=True)
        rows.append(uniq // width + start)
        cols.append(uniq % width)
        data.append(cnt)
        swidth = len(vocabulary.surface_names)
        suniq, scnt = np.unique(chunk.key * swidth + chunk.surf, return_counts=True)
        skeys.append(suniq // swidth)
        ssurf.append(suniq % swidth)
        scount.append(scnt)
        for pid, n in chunk.phrase_hits.items():
            hits[pid] = hits.get(pid, 0) + n

    n_keys = len(vocabulary.key_names)
    row = np.concatenate(rows)
    col = np.concatenate(cols)
    val = np.concatenate(data).astype(np.int32)
    df = np.bincount(col, minlength=n_keys)
    kept = np.flatnonzero(df > 0)
    names = np.array(vocabulary.key_names, dtype=object)[kept]
    order = np.argsort(names, kind="stable")
    col_of_key = np.full(n_keys, -1, dtype=np.int64)
    col_of_key[kept[order]] = np.arange(len(kept))
    new_col = col_of_key[col]
    ok = new_col >= 0
    counts = sp.csr_matrix((val[ok], (row[ok], new_col[ok])), shape=(n_docs, len(kept)), dtype=np.int32)
    counts.sort_indices()

    absent = [phrase for phrase, pid in vocabulary.phrase_keys.items() if hits.get(pid, 0) == 0]
    surfaces = _surface_table(np.concatenate(skeys), np.concatenate(ssurf), np.concatenate(scount),
                              col_of_key, len(kept), vocabulary.surface_names)
    terms = [str(t) for t in names[order]]
    labels = [term_label(t, forms[0][0]) if forms else t for forms, t in zip(surfaces, terms)]
    whole = TermMatrix(
        counts=counts, terms=terms, labels=labels, surfaces=surfaces,
        doc_ids=[ids[i] for i in rows_source], rows_source=rows_source, n_input=len(texts),
        excluded_doc_ids=[ids[i] for i in np.flatnonzero(excluded)], empty_doc_ids=[],
        weighting="count", warnings=analyzer.notes(), absent_phrases=absent,
    )
    return restrict_terms(whole, min_df=min_df, max_df=max_df, weighting=weighting)


def _empty_note(empty_ids: Sequence[Any]) -> str:
    shown = ", ".join(str(d) for d in empty_ids[:_SHOW_IDS]) + (" ..." if len(empty_ids) > _SHOW_IDS else "")
    return f"{len(empty_ids)} verbatim(s) have no term left after the lexicon: {shown}"


def restrict_terms(tm: TermMatrix, *, min_df: float | int = 1, max_df: float | int = 1.0,
                   weighting: str = "count") -> TermMatrix:
    """The matrix keeping only terms within the document-frequency limits, with the given weighting.

    The same as building with those limits (build_matrix builds the whole vocabulary and calls this), so a
    matrix cached without limits serves every verb: themes (min_df 2) and drivers (min_df 5) read the one
    `words` cached instead of analysing the verbatims again. Verbatims left with no term are listed afresh.
    """
    n_docs = tm.counts.shape[0]
    low, high = check_limits(min_df, max_df, weighting, n_docs)
    df = tm.df
    keep = np.flatnonzero((df > 0) & (df >= low) & (df <= high))
    if len(keep) == 0:
        raise OpenCodeError(
            f"no term is left in any of the {n_docs} verbatims after the lexicon and the document-frequency "
            f"limits (min_df={min_df}, max_df={max_df}); loosen the limits or the stop words"
        )
    if len(keep) == tm.counts.shape[1]:
        counts, terms, labels, surfaces = tm.counts, tm.terms, tm.labels, tm.surfaces
    else:
        counts = tm.counts[:, keep].tocsr()
        counts.sort_indices()
        terms = [tm.terms[j] for j in keep]
        labels = [tm.labels[j] for j in keep]
        surfaces = [tm.surfaces[j] for j in keep]
    empty_rows = np.flatnonzero(np.diff(counts.indptr) == 0)
    empty_ids = [tm.doc_ids[r] for r in empty_rows]
    warnings = [w for w in tm.warnings if not (tm.empty_doc_ids and w == _empty_note(tm.empty_doc_ids))]
    if empty_ids:
        warnings.append(_empty_note(empty_ids))
    return TermMatrix(
        counts=counts, terms=list(terms), labels=list(labels), surfaces=list(surfaces), doc_ids=tm.doc_ids,
        rows_source=tm.rows_source, n_input=tm.n_input, excluded_doc_ids=tm.excluded_doc_ids,
        empty_doc_ids=empty_ids, weighting=weighting, warnings=warnings, absent_phrases=list(tm.absent_phrases),
    )


def cache_key(
    analyzer: Analyzer,
    texts: Sequence[str],
    *,
    doc_ids: Sequence[Any] | None = None,
    exclude: Sequence[bool] | np.ndarray | None = None,
    **matrix_options: Any,
) -> str:
    """A hash of everything a TermMatrix depends on: analyzer state, texts, ids, mask and options."""
    digest = hashlib.sha256()
    settings = {
        "format": FORMAT_VERSION, "nltk": _nltk_version(), "analyzer": analyzer.to_dict(),
        "options": matrix_options,
        "doc_ids": None if doc_ids is None else [_plain(d) for d in doc_ids],
    }
    digest.update(json.dumps(settings, sort_keys=True, default=str).encode("utf-8"))
    mask = np.zeros(len(texts), bool) if exclude is None else np.asarray(exclude, dtype=bool)
    digest.update(np.packbits(mask).tobytes())
    for text in texts:
        encoded = (text if isinstance(text, str) else "").encode("utf-8", "surrogatepass")
        digest.update(len(encoded).to_bytes(8, "little"))
        digest.update(encoded)
    return digest.hexdigest()
