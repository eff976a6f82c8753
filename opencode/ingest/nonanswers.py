"""Recognise non-answers ("n/a", "no comment", "don't know", "-", blank...) from the per-language lists."""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pandas as pd

from opencode.resources import lexicon_dir, read_lexicon


def normalise(text: str) -> str:
    """Fold a short answer to compare it with the list: NFKC, lower case, letters and digits only."""
    return _normalise_series(pd.Series([text])).iloc[0]


def _normalise_series(texts: pd.Series) -> pd.Series:
    """`normalise` for a whole column at once (vectorised string operations)."""
    # Arrow strings use RE2, where \p{L} and \p{N} are Unicode letters and digits in any script. Spaces go
    # too ("dont know" and "don't know" both fold to "dontknow"): one pass, no run-collapsing needed.
    folded = texts.astype("string[pyarrow]").str.normalize("NFKC").str.lower()
    return folded.str.replace(r"[^\p{L}\p{N}]", "", regex=True)


@lru_cache(maxsize=None)
def nonanswer_phrases(languages: tuple[str, ...] | None = None) -> frozenset[str]:
    """The normalised phrases of the bundled lists (all languages when none are named)."""
    if languages is None:
        files = sorted(p.name for p in lexicon_dir().glob("nonanswers-*.txt"))
    else:
        files = [f"nonanswers-{code}.txt" for code in languages]
    entries = pd.Series([entry for name in files for entry in read_lexicon(name)], dtype="string[pyarrow]")
    return frozenset(_normalise_series(entries).tolist())


def flag_nonanswers(texts: pd.Series, extra: tuple[str, ...] = ()) -> np.ndarray:
    """True where a verbatim is a non-answer: blank, punctuation only, or a listed phrase. Texts stay as given."""
    phrases = nonanswer_phrases() | {normalise(e) for e in extra}
    longest = max((len(p) for p in phrases), default=0)
    flags = np.zeros(len(texts), dtype=bool)
    lengths = texts.str.len().to_numpy()
    # Non-answers are short: a text much longer than the longest listed phrase is never one.
    short = lengths <= 2 * longest + 8
    if short.any():
        folded = _normalise_series(texts[short])  # a boolean mask: far faster than positions on arrow strings
        flags[short] = ((folded == "") | folded.isin(phrases)).to_numpy(dtype=bool)
    return flags
