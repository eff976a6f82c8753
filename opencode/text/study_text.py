"""Text analysis of a study's questions: the lexicon each question uses, its analyzer, and the cached
term-document matrix that themes, drivers, the machine coder and the desk all start from.

A question's lexicon is its own, else the study default (stored with no question), else the built-in
English default. Every lexicon change is one transaction with one audit row (before and after).
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.files.safe_write import atomic_open
from opencode.study.lexicon_store import (
    load_phrase_suggestions, read_lexicon_data, save_phrase_suggestions, write_lexicon_data,
)
from opencode.study.matrix_cache_store import load_matrix_blob, store_matrix_blob
from opencode.study.store import Study
from opencode.study.survey_data import Variable, get_question, get_variable, raw_values, respondent_keys, verbatims
from opencode.text.analyzer import Analyzer, Progress
from opencode.text.kwic import KwicLine, kwic
from opencode.text.lexicon import Lexicon
from opencode.text.matrix import TermMatrix, build_matrix, cache_key, check_limits, restrict_terms
from opencode.text.phrases import PhraseSuggestion, suggest_phrases
from opencode.text.stemming import SNOWBALL_LANGUAGES, language_name
from opencode.text.stoplists import bundled_stop_words, has_stop_list
from opencode.files.textout import format_table

OWN, STUDY_DEFAULT, BUILT_IN = "own", "study default", "built-in default"
_SHOW = 10


@dataclass
class LexiconChange:
    """The outcome of one lexicon edit: the lexicon now in force, what changed, and notes for the user."""

    lexicon: Lexicon
    action: str
    details: dict[str, Any] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    changed: bool = True


# -- reading lexicons ---------------------------------------------------------------------------------------------
def _question_id(study: Study, question: str | None) -> int | None:
    """The question's variable id (None stands for the study default lexicon)."""
    return None if question is None else get_question(study, question).id


def _stored(study: Study, question_id: int | None) -> Lexicon | None:
    data = read_lexicon_data(study, question_id)
    return None if data is None else Lexicon.from_dict(data)


def _resolve(study: Study, question_id: int | None) -> tuple[Lexicon, str]:
    """The lexicon in force for a question id and where it comes from."""
    if question_id is not None:
        own = _stored(study, question_id)
        if own is not None:
            return own, OWN
    default = _stored(study, None)
    if default is not None:
        return default, (OWN if question_id is None else STUDY_DEFAULT)
    return Lexicon(), BUILT_IN


def get_lexicon(study: Study, question: str | None = None) -> Lexicon:
    """The lexicon a question uses (its own, else the study default, else the built-in English one)."""
    return _resolve(study, _question_id(study, question))[0]


def lexicon_origin(study: Study, question: str | None = None) -> str:
    """Where a question's lexicon comes from: 'own', 'study default' or 'built-in default'."""
    return _resolve(study, _question_id(study, question))[1]


def analyzer_for(study: Study, question: str | None = None, **options: Any) -> Analyzer:
    """The analyzer for a question's lexicon; options set the other Analyzer parameters (negations, links...)."""
    return Analyzer.from_lexicon(get_lexicon(study, question), **options)


def check_lexicon(lexicon: Lexicon) -> list[str]:
    """Raise a clear error if an analyzer cannot be built from the lexicon; return its warnings."""
    if lexicon.stemmer == "snowball" and language_name(lexicon.language) not in SNOWBALL_LANGUAGES:
        raise OpenCodeError(
            f"no stemmer for language {lexicon.language!r} (stemmers exist for: {', '.join(SNOWBALL_LANGUAGES)}); "
            "to analyse these verbatims unstemmed, switch stemming off first (lexicon stem off), then set the "
            "language")
    return Analyzer.from_lexicon(lexicon).check()  # stemmer, merge chains and phrases are checked here


# -- changing lexicons --------------------------------------------------------------------------------------------
def _edit(study: Study, question: str | None, action: str, actor: str,
          apply: Callable[[dict[str, Any]], tuple[dict[str, Any], list[str]]]) -> LexiconChange:
    """Read the lexicon in force, apply one change, check it, store and audit it in one transaction."""
    question_id = _question_id(study, question)
    with study.transaction():
        before, origin = _resolve(study, question_id)
        data = before.to_dict()
        details, notes = apply(data)
        after = Lexicon.from_dict(data)
        notes = notes + check_lexicon(after)
        if after == before:
            return LexiconChange(before, action, details, notes, changed=False)
        write_lexicon_data(study, question_id, after.to_dict())
        study.audit(actor, f"lexicon-{action}", "lexicon", question_id, {
            "question": question, "change": details, "was": origin,
            "before": before.to_dict(), "after": after.to_dict()})
    return LexiconChange(after, action, details, notes)


def _words(words: Iterable[str], what: str) -> list[str]:
    """Stripped, lower-cased, de-duplicated entries in the order given."""
    cleaned = list(dict.fromkeys(" ".join(str(w).split()).lower() for w in words if str(w).strip()))
    if not cleaned:
        raise OpenCodeError(f"give at least one {what}")
    return cleaned


def set_lexicon(study: Study, question: str | None, lexicon: Lexicon, *, actor: str = "oecode",
                action: str = "replace") -> LexiconChange:
    """Replace a question's lexicon (None: the study default) as a whole."""
    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        data.clear()
        data.update(lexicon.to_dict())
        return {"version": lexicon.version_hash()}, []
    return _edit(study, question, action, actor, apply)


def add_stop_words(study: Study, question: str | None, words: Iterable[str], *, actor: str = "oecode") -> LexiconChange:
    """Put words on the question's stop list."""
    words = _words(words, "stop word")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        added, notes = [], []
        for word in words:
            if word in data["stop_remove"]:
                data["stop_remove"].remove(word)
                added.append(word)
            elif word in data["stop_add"]:
                notes.append(f"{word!r} is already on the stop list")
            else:
                data["stop_add"].append(word)
                added.append(word)
        return {"added": added}, notes
    return _edit(study, question, "stop-add", actor, apply)


def remove_stop_words(study: Study, question: str | None, words: Iterable[str], *,
                      actor: str = "oecode") -> LexiconChange:
    """Take words off the stop list (the study's own additions, or words of the bundled list)."""
    words = _words(words, "stop word")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        bundled = bundled_stop_words(data["language"])
        removed, notes = [], []
        for word in words:
            if word in data["stop_add"]:
                data["stop_add"].remove(word)
                removed.append(word)
            elif word in bundled and word not in data["stop_remove"]:
                data["stop_remove"].append(word)
                removed.append(word)
            else:
                notes.append(f"{word!r} is not a stop word; nothing to remove")
        return {"removed": removed}, notes
    return _edit(study, question, "stop-remove", actor, apply)


def add_phrases(study: Study, question: str | None, phrases: Iterable[str], *, actor: str = "oecode") -> LexiconChange:
    """Add multi-word phrases (each becomes one term)."""
    phrases = _words(phrases, "phrase")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        new = [p for p in phrases if p not in data["phrases"]]
        notes = [f"phrase {p!r} is already in the lexicon" for p in phrases if p not in new]
        data["phrases"].extend(new)
        return {"added": new}, notes
    return _edit(study, question, "phrase-add", actor, apply)


def remove_phrases(study: Study, question: str | None, phrases: Iterable[str], *,
                   actor: str = "oecode") -> LexiconChange:
    """Remove phrases; an unknown phrase is an error naming the phrases there are."""
    phrases = _words(phrases, "phrase")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        for phrase in phrases:
            if phrase not in data["phrases"]:
                known = ", ".join(repr(p) for p in data["phrases"]) or "(none)"
                raise OpenCodeError(f"phrase {phrase!r} is not in the lexicon (phrases: {known})")
            data["phrases"].remove(phrase)
        return {"removed": phrases}, []
    return _edit(study, question, "phrase-remove", actor, apply)


def parse_merge(spec: str) -> tuple[list[str], str]:
    """Read 'a,b->target' into (['a', 'b'], 'target')."""
    if "->" not in spec:
        raise OpenCodeError(f"merge {spec!r}: write it as 'word,other->target'")
    left, target = (part.strip() for part in spec.split("->", 1))
    sources = [s.strip() for s in left.split(",") if s.strip()]
    if not sources or not target:
        raise OpenCodeError(f"merge {spec!r}: needs at least one word before '->' and a target after it")
    return sources, target


def add_merge(study: Study, question: str | None, sources: Sequence[str], target: str, *,
              actor: str = "oecode") -> LexiconChange:
    """Merge words (or phrases) into one target term, e.g. libary, libraries -> library."""
    sources = _words(sources, "word to merge")
    target = _words([target], "merge target")[0]

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        if target in sources:
            raise OpenCodeError(f"merge: {target!r} cannot be merged into itself")
        for source in sources:
            data["merges"][source] = target
        return {"sources": sources, "target": target}, []
    return _edit(study, question, "merge-add", actor, apply)


def remove_merges(study: Study, question: str | None, sources: Sequence[str], *,
                  actor: str = "oecode") -> LexiconChange:
    """Undo merges by their source words; an unknown source is an error naming the merges there are."""
    sources = _words(sources, "merged word")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        removed = {}
        for source in sources:
            if source not in data["merges"]:
                known = ", ".join(f"{s} -> {t}" for s, t in data["merges"].items()) or "(none)"
                raise OpenCodeError(f"{source!r} is not merged into anything (merges: {known})")
            removed[source] = data["merges"].pop(source)
        return {"removed": removed}, []
    return _edit(study, question, "merge-remove", actor, apply)


def set_language(study: Study, question: str | None, language: str, *, actor: str = "oecode") -> LexiconChange:
    """Set the verbatims' language (its stop list and stemmer follow)."""
    name = language_name(language)
    if not name:
        raise OpenCodeError("give a language, e.g. english or fr")

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        before = data["language"]
        data["language"] = name
        notes = [] if has_stop_list(name) else [f"no bundled stop list for {name!r}: add stop words yourself"]
        return {"before": before, "after": name}, notes
    return _edit(study, question, "language", actor, apply)


def set_stemmer(study: Study, question: str | None, stemmer: str | None, *, actor: str = "oecode") -> LexiconChange:
    """Choose the stemmer: 'snowball', 'porter' (English) or None (unstemmed words)."""
    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        before = data["stemmer"]
        data["stemmer"] = stemmer
        return {"before": before, "after": stemmer}, []
    return _edit(study, question, "stemmer", actor, apply)


def set_numbers(study: Study, question: str | None, choice: str, *, actor: str = "oecode") -> LexiconChange:
    """How numbers are analysed: 'placeholder' (one term, shown as #number), 'keep' (each number a term of its
    own, e.g. a year or a unit number) or 'drop'."""
    choice = str(choice).strip().lower()

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        before = data.get("numbers", "placeholder")
        data["numbers"] = choice
        return {"before": before, "after": choice}, []
    return _edit(study, question, "numbers", actor, apply)


def set_negations(study: Study, question: str | None, choice: str, *, actor: str = "oecode") -> LexiconChange:
    """How negation words are analysed: 'keep' (they stay terms of their own), 'join' (each joins the next
    term of its clause: "no damage" becomes one term, so a theme or a label cannot lose the "no") or 'drop'
    (they are stop words)."""
    choice = str(choice).strip().lower()

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        before = data.get("negations", "keep")
        data["negations"] = choice
        return {"before": before, "after": choice}, []
    return _edit(study, question, "negations", actor, apply)


def set_stem_exception(study: Study, question: str | None, word: str, stem: str | None = None, *,
                       actor: str = "oecode", remove: bool = False) -> LexiconChange:
    """Force a word's stem (no stem: keep the word as it is); remove=True drops the exception."""
    word = _words([word], "word")[0]

    def apply(data: dict[str, Any]) -> tuple[dict[str, Any], list[str]]:
        before = data["stem_exceptions"].get(word)
        if remove:
            if before is None:
                known = ", ".join(data["stem_exceptions"]) or "(none)"
                raise OpenCodeError(f"{word!r} has no stem exception (exceptions: {known})")
            del data["stem_exceptions"][word]
            return {"word": word, "removed": before}, []
        data["stem_exceptions"][word] = (stem or word).strip().lower()
        return {"word": word, "before": before, "after": data["stem_exceptions"][word]}, []
    return _edit(study, question, "exception", actor, apply)


def import_lexicon(study: Study, question: str | None, path: str | os.PathLike, *,
                   actor: str = "oecode") -> LexiconChange:
    """Replace a question's lexicon by a lexicon text file (a bad line is named by its number)."""
    source = Path(path)
    if not source.is_file():
        raise OpenCodeError(f"{source}: no such lexicon file")
    try:
        text = source.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as error:
        raise OpenCodeError(f"{source}: not UTF-8 text ({error})") from error
    return set_lexicon(study, question, Lexicon.from_text(text, source=str(source)), actor=actor, action="import")


def export_lexicon(study: Study, question: str | None, path: str | os.PathLike) -> Path:
    """Write the lexicon a question uses as a lexicon text file (atomically)."""
    with atomic_open(path) as handle:
        handle.write(get_lexicon(study, question).to_text())
    return Path(path)


# -- the term matrix ----------------------------------------------------------------------------------------------
def _subset_mask(frame: pd.DataFrame, subset: Any) -> np.ndarray:
    """A subset (bool mask over the question's verbatims, or verbatim ids) as a bool mask."""
    values = np.asarray(subset)
    if values.dtype == bool:
        if values.shape != (len(frame),):
            raise OpenCodeError(f"the subset mask has {values.size} entries; the question has {len(frame)} verbatims")
        return values
    wanted = {int(v) for v in values.ravel()}
    unknown = sorted(wanted - set(frame["verbatim_id"].tolist()))
    if unknown:
        raise OpenCodeError(f"subset: verbatim id(s) {', '.join(map(str, unknown[:_SHOW]))} are not in this question")
    return frame["verbatim_id"].isin(wanted).to_numpy()


def verbatims_fingerprint(texts: Sequence[str], ids: Sequence[str], exclude: np.ndarray) -> str:
    """A hash of every verbatim's text, respondent id and non-answer flag, in order (a few C-level passes:
    the lengths make the joined strings unambiguous)."""
    digest = hashlib.sha256()
    for strings in (texts, [str(i) for i in ids]):
        digest.update(np.fromiter(map(len, strings), dtype=np.int64, count=len(strings)).tobytes())
        digest.update("".join(strings).encode("utf-8", "surrogatepass"))
    digest.update(np.packbits(np.asarray(exclude, dtype=bool)).tobytes())
    return digest.hexdigest()


def term_matrix(
    study: Study,
    question: str,
    *,
    min_df: float | int = 1,
    max_df: float | int = 1.0,
    weighting: str = "count",
    subset: Sequence[bool] | Sequence[int] | np.ndarray | None = None,
    analyzer: Analyzer | None = None,
    progress: Progress = None,
) -> tuple[TermMatrix, pd.DataFrame]:
    """The question's term-document matrix and its verbatims, from the study's cache when still valid.

    Returns (tm, frame). `frame` holds the question's verbatims in study order (verbatim_id, respondent_id,
    respondent, text, nonanswer, matrix_row); with `subset` (a bool mask over those verbatims, or verbatim
    ids) only the chosen ones. Non-answers are left out of the matrix and listed in tm.excluded_doc_ids.
    Row i of tm.counts is frame.iloc[tm.rows_source[i]]; frame.matrix_row is -1 for rows left out.
    tm.doc_ids are respondent ids; `kwic(tm, frame.text.tolist(), term)` works on the pair.

    The study caches one matrix per analyzer and verbatims, with every term and counts; min_df, max_df and
    weighting are applied to it on the way out (text.matrix.restrict_terms, the same as building with them),
    so a verb asking for other limits reads the matrix another verb cached. The cache key (text.matrix.
    cache_key over the analyzer, with verbatims_fingerprint standing in for the texts) covers the analyzer
    (the lexicon, or the `analyzer` given), every verbatim's text, respondent and non-answer flag, so an edit
    to any of them rebuilds. A hit costs the verbatims query, one hash over their text, one SELECT and
    TermMatrix.from_bytes: no tokenizing.
    """
    question_id = get_question(study, question).id
    frame = verbatims(study, question)
    if subset is not None:
        frame = frame[_subset_mask(frame, subset)].reset_index(drop=True)
    if frame.empty:
        raise OpenCodeError(f"question {question!r} has no verbatims" + (" in the subset" if subset is not None else "")
                            + ": there is nothing to analyse")
    exclude = frame["nonanswer"].to_numpy(dtype=bool)
    if exclude.all():
        raise OpenCodeError(f"all {len(frame)} verbatims of question {question!r} are non-answers: "
                            "there is nothing to analyse")
    analyzer = analyzer if analyzer is not None else analyzer_for(study, question)
    texts = frame["text"].tolist()
    ids = frame["respondent"].tolist()
    check_limits(min_df, max_df, weighting, int((~exclude).sum()))  # before any slow work
    # One cached matrix per analyzer and verbatims: the whole vocabulary, counts. Every verb's limits and
    # weighting are applied to it (restrict_terms), so words, themes, drivers and kwic share one analysis.
    key = cache_key(analyzer, [verbatims_fingerprint(texts, ids, exclude)], min_df=1, max_df=1.0,
                    weighting="count")
    blob = load_matrix_blob(study, key)
    whole = None
    if blob is not None:
        try:
            whole = TermMatrix.from_bytes(blob)
        except OpenCodeError:
            whole = None  # unreadable (e.g. written by another format version): rebuild below
    if whole is None:
        whole = build_matrix(texts, analyzer, doc_ids=ids, exclude=exclude, progress=progress)
        try:
            store_matrix_blob(study, question_id, key, whole.to_bytes())
        except OpenCodeError as error:
            whole.warnings.append(f"the term matrix was not cached ({error})")
    tm = restrict_terms(whole, min_df=min_df, max_df=max_df, weighting=weighting)
    matrix_row = np.full(len(frame), -1, dtype=np.int64)
    matrix_row[tm.rows_source] = np.arange(len(tm.rows_source))
    frame["matrix_row"] = matrix_row
    return tm, frame


def missing_phrases(tm: TermMatrix, analyzer: Analyzer, phrases: Iterable[str] | None = None) -> list[str]:
    """The lexicon phrases (or the given ones) that never occur in the matrix's verbatims."""
    vocabulary = analyzer.vocabulary()  # holds the phrase table
    keys = vocabulary.phrase_keys
    wanted = keys if phrases is None else {
        p: keys[p] for p in (" ".join(x.split()).lower() for x in phrases) if p in keys}
    present = set(tm.terms)
    return [p for p, pid in wanted.items() if vocabulary.key_names[pid] not in present]


def absent_phrase_notes(study: Study, question: str | None, progress: Progress = None) -> list[str]:
    """One sentence per lexicon phrase that occurs in none of the question's verbatims (none for the study
    default, which has no verbatims of its own). Shown where the lexicon is looked at or edited, not by every
    text command."""
    if question is None:
        return []
    tm, _ = term_matrix(study, question, progress=progress)
    return [f"phrase {phrase!r} never occurs in the verbatims of question {question} (kept in the lexicon)"
            for phrase in tm.absent_phrases]


def stop_word_effect(study: Study, question: str, before: Lexicon, progress: Progress = None) -> list[Any]:
    """Respondent ids of verbatims that had terms under `before` but none under the current lexicon."""
    old, _ = term_matrix(study, question, analyzer=Analyzer.from_lexicon(before), progress=progress)
    new, _ = term_matrix(study, question, progress=progress)
    was_empty = set(old.empty_doc_ids)
    return [d for d in new.empty_doc_ids if d not in was_empty]


# -- phrase suggestions -------------------------------------------------------------------------------------------
def suggest_question_phrases(study: Study, question: str, *, min_count: int = 5, top: int = 30,
                             progress: Progress = None) -> list[PhraseSuggestion]:
    """Candidate phrases for a question (non-answers left out), remembered so one can be accepted by rank."""
    question_id = get_question(study, question).id
    frame = verbatims(study, question)
    if frame.empty:
        raise OpenCodeError(f"question {question!r} has no verbatims: there is nothing to analyse")
    rows = suggest_phrases(frame["text"].tolist(), analyzer_for(study, question),
                           exclude=frame["nonanswer"].to_numpy(dtype=bool), min_count=min_count, top=top,
                           progress=progress)
    save_phrase_suggestions(study, question_id, [{"phrase": r.phrase, "count": r.count, "g2": r.g2} for r in rows])
    return rows


def accept_phrase_suggestions(study: Study, question: str, ranks: Sequence[int], *,
                              actor: str = "oecode") -> LexiconChange:
    """Add phrases from the question's last suggestion list by their rank (1 = first)."""
    saved = load_phrase_suggestions(study, get_question(study, question).id)
    if not saved:
        raise OpenCodeError(f"no phrase suggestions saved for question {question!r}: make some first (phrases suggest)")
    if not ranks:
        raise OpenCodeError("give the rank of at least one suggestion")
    for rank in ranks:
        if not 1 <= rank <= len(saved):
            raise OpenCodeError(f"no suggestion number {rank}: the last list for question {question!r} "
                                f"has {len(saved)} (1-{len(saved)})")
    return add_phrases(study, question, [saved[r - 1]["phrase"] for r in ranks], actor=actor)


# -- closed-ended variables beside verbatims ----------------------------------------------------------------------
def _display(variable: Variable, value: Any) -> str:
    """A stored value as its value label (multiple response: labels joined; empty: '')."""
    if value is None:
        return ""
    if isinstance(value, (list, tuple)):
        return ", ".join(_display(variable, v) for v in value)
    if isinstance(value, (int, float, np.integer, np.floating)):
        return "" if np.isnan(value) else variable.display(float(value))
    return str(value)


def _aligned(study: Study, frame: pd.DataFrame, name: str) -> tuple[Variable, list[Any]]:
    """A variable and its stored values in the order of the frame's verbatims."""
    variable = get_variable(study, name)
    values = raw_values(study, name)
    position = {key: i for i, key in enumerate(respondent_keys(study))}
    return variable, [values[position[key]] for key in frame["respondent"]]


def closed_labels(study: Study, frame: pd.DataFrame, name: str) -> list[str]:
    """A closed-ended variable's value labels for each verbatim of the frame."""
    variable, values = _aligned(study, frame, name)
    return [_display(variable, v) for v in values]


def group_mask(study: Study, frame: pd.DataFrame, spec: str) -> tuple[np.ndarray, str]:
    """Verbatims whose respondent has VAR=CODE (a code or its value label), and a readable description."""
    if "=" not in spec:
        raise OpenCodeError(f"group {spec!r}: write it as VARIABLE=CODE, e.g. support=1")
    name, wanted = (part.strip() for part in spec.split("=", 1))
    variable, values = _aligned(study, frame, name)
    code = _code_of(variable, wanted)
    if variable.kind == "multiple":
        mask = np.array([bool(v) and code in {float(c) for c in v} for v in values], dtype=bool)
    elif variable.kind in ("single", "numeric"):
        mask = np.asarray(values, dtype=float) == code
    else:
        raise OpenCodeError(f"variable {name!r} is {variable.kind}: groups need a single, multiple or numeric item")
    return mask, f"{name} = {variable.display(code)}"


def _code_of(variable: Variable, wanted: str) -> float:
    """The code for a number or a value label (case-insensitive); unknown labels list the labels there are."""
    try:
        return float(wanted)
    except ValueError:
        pass
    for code, label in variable.value_labels.items():
        if label.casefold() == wanted.casefold():
            return code
    labels = ", ".join(f"{variable.display(c)}={lab}" for c, lab in variable.value_labels.items()) or "(no labels)"
    raise OpenCodeError(f"variable {variable.name!r} has no code or label {wanted!r} (codes: {labels})")


def question_kwic(study: Study, question: str, term: str, *, width: int = 40, limit: int | None = None,
                  show: Sequence[str] = (), matrix: tuple[TermMatrix, pd.DataFrame] | None = None,
                  ) -> tuple[list[KwicLine], dict[str, list[str]]]:
    """Keyword in context for a question, with chosen closed-ended variables' labels for each line.

    matrix: the question's (tm, frame) from term_matrix when the caller has it already (saves reading it twice).
    """
    tm, frame = matrix if matrix is not None else term_matrix(study, question)
    lines = kwic(tm, frame["text"].tolist(), term, width=width, limit=limit)
    row_of = {key: i for i, key in enumerate(frame["respondent"])}
    columns = {}
    for name in show:
        labels = closed_labels(study, frame, name)
        columns[name] = [labels[row_of[line.doc_id]] for line in lines]
    return lines, columns


def format_question_kwic(lines: Sequence[KwicLine], columns: dict[str, list[str]] | None = None,
                         width: int = 40, out_width: int | None = None) -> str:
    """Aligned kwic lines: respondent id, the shown variables, left context right-aligned, match, right context;
    the contexts are cut so that the table fits `out_width` (the terminal's width by default), the shown
    variables' labels wrap when they must."""
    from opencode.files.textout import GAP, LABEL_MIN, output_width
    from opencode.text.kwic import fit_contexts

    columns = columns or {}
    out_width = out_width or output_width()
    fixed = max([len("respondent")] + [len(str(line.doc_id)) for line in lines]) + GAP
    for name, values in columns.items():
        fixed += min(max([len(name)] + [len(str(v)) for v in values]), LABEL_MIN) + GAP
    lefts, rights = fit_contexts(lines, width, out_width - fixed)
    return format_table(
        ["respondent", *columns, "before", "match", "after"],
        [[line.doc_id, *(values[i] for values in columns.values()), lefts[i], line.match, rights[i]]
         for i, line in enumerate(lines)],
        align="l" * (1 + len(columns)) + "rll", wrap=list(range(1, 1 + len(columns))), width=out_width,
    )
