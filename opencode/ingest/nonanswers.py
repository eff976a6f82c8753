"""Recognise non-answers ("n/a", "no comment", "don't know", "-", blank...) from the per-language lists."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.resources import lexicon_dir, read_lexicon
from opencode.study import survey_data
from opencode.study.store import Study


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


@dataclass(frozen=True)
class FlagChange:
    """The verbatims a non-answer flag change touches (or would touch, on a dry run)."""

    question: str
    flag: bool
    respondents: tuple[str, ...]  # survey respondent ids, in study order
    texts: tuple[str, ...]  # their texts as typed, same order
    changed: int  # how many flags changed (0 on a dry run)


def set_nonanswers(study: Study, question: str, *, flag: bool, texts: Sequence[str] = (),
                   respondents: Sequence[str] = (), dry_run: bool = False, actor: str = "oecode") -> FlagChange:
    """Mark (flag=True) or count as answers (flag=False) a question's verbatims chosen by text, folded as the
    import folds them against the non-answer lists, and/or by survey respondent id. A text matching no verbatim
    or an unknown respondent id is an error and nothing is written; otherwise one transaction, one audit row."""
    q = survey_data.get_question(study, question)
    frame = survey_data.verbatims(study, question)
    if not texts and not respondents:
        raise OpenCodeError(f"question {question}: choose verbatims by text or by respondent id")
    chosen = np.zeros(len(frame), dtype=bool)
    if texts:
        folded = _normalise_series(frame["text"].astype("string"))
        for text in texts:
            hit = (folded == normalise(text)).to_numpy(dtype=bool)
            if not hit.any():
                raise OpenCodeError(f"question {question}: no verbatim reads {text!r} (nothing changed)")
            chosen |= hit
    if respondents:
        keys = frame["respondent"].astype(str)
        for key in respondents:
            hit = (keys == str(key)).to_numpy(dtype=bool)
            if not hit.any():
                raise OpenCodeError(f"question {question}: no verbatim of respondent {key!r} (nothing changed)")
            chosen |= hit
    if not flag:
        text = frame["text"].astype("string")
        empty = (text.isna() | (text.str.strip() == "")).to_numpy(dtype=bool) & chosen
        if empty.any():
            raise OpenCodeError(f"question {question}: {int(empty.sum()):,} chosen verbatims are empty (respondent "
                                f"{frame['respondent'].astype(str)[empty].iloc[0]} first); an empty verbatim has "
                                "nothing to code and stays a non-answer (nothing changed)")
    todo = frame[chosen & (frame["nonanswer"].to_numpy(dtype=bool) != bool(flag))]
    keys, typed = tuple(todo["respondent"].astype(str)), tuple(todo["text"].astype(str))
    if dry_run or todo.empty:
        return FlagChange(question, flag, keys, typed, 0)
    with study.transaction():
        changed = survey_data.set_nonanswer_flags(study, todo["verbatim_id"].tolist(), flag)
        study.audit(actor, "flag-nonanswer" if flag else "unflag-nonanswer", "question", q.id,
                    {"verbatim_ids": [int(v) for v in todo["verbatim_id"]], "respondents": list(keys),
                     "texts": list(texts), "before": not flag, "after": bool(flag)})
    return FlagChange(question, flag, keys, typed, changed)


def nonanswer_counts(study: Study, question: str) -> list[tuple[str, int]]:
    """The texts of a question's verbatims flagged as non-answers, with counts, most frequent first."""
    return survey_data.nonanswer_text_counts(study, survey_data.get_question(study, question).id)
