"""The input every exporter takes (a coded dataset) and the two table layouts built from it.

The study maps itself onto `CodedDataset`; the writers (tabular, spss_stata, triple_s) only read it.
Layouts: `flags` (one 0/1 indicator per code and per net, `Q_c3`) and `mentions`
(`Q_m1..Q_mk` holding the code numbers a respondent got, with value labels). Respondents outside a
question's base (no verbatim, a non-answer, not yet coded) are missing in every code column of that
question, so a plain frequency of `Q_c3` in any statistics program gives the base and percentage of
`oecode tables`.
"""

from __future__ import annotations

import itertools
import os
import re
import unicodedata
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterable, Literal, Mapping, Sequence

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError
from opencode.analysis.tables.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode
from opencode.files.masking import mask_identifiers

VerbatimMode = Literal["omit", "masked", "raw"]
VERBATIM_MODES = ("omit", "masked", "raw")

MAX_NAME_LENGTH = 32  # Stata's limit; SPSS allows 64, so one scheme satisfies both.
DICHOTOMY_LABELS = {0: "not coded", 1: "coded"}

# Reserved words: SPSS (ALL AND BY EQ GE GT LE LT NE NOT OR TO WITH) and Stata's reserved names.
_RESERVED = {
    "all", "and", "by", "eq", "ge", "gt", "le", "lt", "ne", "not", "or", "to", "with",
    "_all", "_b", "byte", "_coef", "_cons", "double", "float", "if", "in", "int", "long", "_n", "_pi",
    "_pred", "_rc", "_skip", "strl", "using",
}


@dataclass
class LabelledTable:
    """A layout ready for a writer: data, variable labels, value labels and user-missing codes."""

    data: pd.DataFrame
    column_labels: dict[str, str]
    value_labels: dict[str, dict[int | float, str]]
    missing_codes: dict[str, list[int | float]]
    code_frame: pd.DataFrame
    measures: dict[str, str] = field(default_factory=dict)
    question_columns: dict[str, list[str]] = field(default_factory=dict)  # question -> its 0/1 columns


@dataclass
class QuestionCodes:
    """One question's codes as arrays: frame order, 0/1 indicators per code and net, assigned (row, code) pairs."""

    question: CodedQuestion
    frame_codes: np.ndarray
    indicators: np.ndarray
    rows: np.ndarray
    assigned: np.ndarray


def _ascii_name(text: str) -> str:
    """Fold a name to letters, digits and underscores, starting with a letter."""
    folded = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    name = re.sub(r"[^A-Za-z0-9_]+", "_", folded).strip("_")
    if not name or not name[0].isalpha():
        name = "v" + ("_" + name if name else "")
    return name


def safe_name(text: str, max_length: int = MAX_NAME_LENGTH, taken: set[str] | None = None) -> str:
    """A variable name valid in SPSS and Stata (letter first, <= 32 chars, not reserved), unique in `taken`."""
    name = _ascii_name(text)[:max_length].rstrip("_") or "v"
    if name.lower() in _RESERVED:
        name = (name + "_v")[:max_length]
    if taken is None:
        return name
    candidate, n = name, 1
    while candidate.lower() in taken:
        n += 1
        tail = f"_{n}"
        candidate = name[: max_length - len(tail)] + tail
    taken.add(candidate.lower())
    return candidate


def _row_codes(ds: CodedDataset, q: CodedQuestion) -> list[Iterable[int]]:
    """Each respondent's codes in respondent order, whichever form the question gave them in."""
    if isinstance(q.codes, Mapping):
        return [q.codes.get(r, ()) for r in ds.respondent_ids]
    return list(q.codes)


def _net_closure(frame: Sequence[FrameCode], frame_codes: np.ndarray) -> np.ndarray:
    """Boolean matrix (code x code): column j is true for every code that rolls up into code j."""
    index = {int(c): i for i, c in enumerate(frame_codes)}
    parent = {c.code: c.net for c in frame}
    closure = np.eye(len(frame_codes), dtype=bool)
    for c in frame:
        node = parent[c.code]
        while node is not None:
            closure[index[c.code], index[node]] = True
            node = parent[node]
    return closure


_SIZED = (set, frozenset, list, tuple)


def question_codes(ds: CodedDataset, q: CodedQuestion) -> QuestionCodes:
    """Vectorised indicators for one question: a respondent is in a net once if any member code is theirs."""
    frame_codes = np.array([c.code for c in q.frame], dtype=np.int64)
    row_codes = [c if isinstance(c, _SIZED) else list(c) for c in _row_codes(ds, q)]
    lengths = np.fromiter(map(len, row_codes), dtype=np.int64, count=len(row_codes))
    try:
        assigned = np.fromiter(itertools.chain.from_iterable(row_codes), dtype=np.int64, count=int(lengths.sum()))
    except (TypeError, ValueError, OverflowError):
        raise OpenCodeError(f"export: question {q.name!r}: codes must be whole numbers") from None
    rows = np.repeat(np.arange(len(row_codes)), lengths)
    span = int(assigned.max()) - int(assigned.min()) + 1 if len(assigned) else 1
    key = rows * span + (assigned - (assigned.min() if len(assigned) else 0))
    by_row = np.argsort(key, kind="stable")
    key, rows, assigned = key[by_row], rows[by_row], assigned[by_row]
    distinct = np.ones(len(key), dtype=bool)
    distinct[1:] = key[1:] != key[:-1]
    rows, assigned = rows[distinct], assigned[distinct]
    order = np.argsort(frame_codes)
    pos = np.searchsorted(frame_codes[order], assigned)
    pos = np.minimum(pos, len(frame_codes) - 1)
    bad = frame_codes[order][pos] != assigned
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        raise OpenCodeError(
            f"export: question {q.name!r}: respondent {ds.respondent_ids[rows[first]]!r} has code "
            f"{assigned[first]}, which is not in the code frame"
        )
    columns = order[pos]
    direct = np.zeros((len(row_codes), len(frame_codes)), dtype=bool)
    direct[rows, columns] = True
    closure = _net_closure(q.frame, frame_codes)
    indicators = direct.view(np.int8).copy()
    for net in np.flatnonzero(closure.sum(axis=0) > 1):
        indicators[:, net] = direct[:, closure[:, net]].any(axis=1)
    return QuestionCodes(q, frame_codes, indicators, rows, assigned)


def question_base(ds: CodedDataset, q: CodedQuestion) -> np.ndarray:
    """Respondents whose coding of `q` is known (its `base`; everyone when the question gives none)."""
    if q.base is None:
        return np.ones(ds.n_respondents, dtype=bool)
    return np.asarray(q.base, dtype=bool)


def category_matrix(qc: QuestionCodes, n_rows: int) -> np.ndarray:
    """Multiple-category layout: row i holds its assigned codes ascending, padded with NaN (at least one column)."""
    counts = np.bincount(qc.rows, minlength=n_rows)
    width = max(1, int(counts.max()) if n_rows else 1)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    rank = np.arange(len(qc.rows)) - starts[qc.rows]
    out = np.full((n_rows, width), np.nan)
    out[qc.rows, rank] = qc.assigned
    return out


def question_stems(ds: CodedDataset) -> list[str]:
    """Unique name stems per question, short enough that `stem_c<code>` and `stem_m<k>` fit 32 chars."""
    taken = {safe_name(ds.id_name).lower()} | {safe_name(v.name).lower() for v in ds.closed}
    stems = []
    for q in ds.questions:
        longest_suffix = max(len(f"_c{max(c.code for c in q.frame)}"), len(f"_m{ds.n_respondents}"), len("_text"))
        stems.append(safe_name(q.name, MAX_NAME_LENGTH - longest_suffix, taken))
    return stems


def frame_table(ds: CodedDataset, variables: Mapping[tuple[str, int], str]) -> pd.DataFrame:
    """The code frames as one table: question, indicator variable, code, label, kind, parent net."""
    rows = []
    for q in ds.questions:
        for c in q.frame:
            rows.append({
                "question": q.name,
                "question_label": q.label,
                "variable": variables[(q.name, c.code)],
                "code": c.code,
                "label": c.label,
                "kind": "net" if c.is_net else "code",
                "net": c.net,
            })
    table = pd.DataFrame(rows, columns=["question", "question_label", "variable", "code", "label", "kind", "net"])
    table["net"] = table["net"].astype("Int64")
    return table


def verbatim_texts(q: CodedQuestion, mode: VerbatimMode) -> list[str]:
    """The verbatims of a question as export text: masked unless `mode` is "raw"; missing becomes ""."""
    if q.verbatims is None:
        raise OpenCodeError(f"export: question {q.name!r} has no verbatims to include")
    texts = ["" if t is None or (isinstance(t, float) and np.isnan(t)) else str(t) for t in q.verbatims]
    return [mask_identifiers(t) for t in texts] if mode == "masked" else texts


def check_verbatim_mode(mode: str) -> None:
    """Reject an unknown verbatim option with the allowed choices."""
    if mode not in VERBATIM_MODES:
        raise OpenCodeError(f"export: verbatims must be one of {', '.join(VERBATIM_MODES)}, got {mode!r}")


def _closed_column(v: ClosedVariable) -> np.ndarray:
    """A closed variable's values as float (None -> NaN), or an error naming the variable."""
    try:
        return np.array([np.nan if x is None else x for x in v.values], dtype=float)
    except (TypeError, ValueError) as exc:
        raise OpenCodeError(f"export: variable {v.name!r} must hold numbers ({exc})") from None


def build_table(
    ds: CodedDataset,
    *,
    mention_columns: bool = False,
    verbatims: VerbatimMode = "omit",
) -> LabelledTable:
    """Build the export layout: id, closed variables, then per question its 0/1 indicators (codes and nets),
    optionally its `_m1.._mk` code columns and its verbatim text (masked by default)."""
    check_verbatim_mode(verbatims)
    n = ds.n_respondents
    taken: set[str] = set()
    id_col = safe_name(ds.id_name, taken=taken)
    ids = ds.respondent_ids
    id_values = (np.asarray(ids, dtype=np.int64) if not isinstance(ids[0], str) else pd.array(ids, dtype=object))
    columns: dict[str, object] = {id_col: id_values}
    labels: dict[str, str] = {id_col: "Respondent id"}
    value_labels: dict[str, dict[int | float, str]] = {}
    missing: dict[str, list[int | float]] = {}
    measures: dict[str, str] = {}
    for v in ds.closed:
        name = safe_name(v.name, taken=taken)
        columns[name] = _closed_column(v)
        labels[name] = v.label or v.name
        if v.value_labels:
            value_labels[name] = dict(v.value_labels)
        if v.missing_codes:
            missing[name] = list(v.missing_codes)
        measures[name] = v.measure or ("nominal" if v.value_labels else "scale")
    indicator_names: dict[tuple[str, int], str] = {}
    question_columns: dict[str, list[str]] = {}
    for q, stem in zip(ds.questions, question_stems(ds)):
        qc = question_codes(ds, q)
        outside = ~question_base(ds, q)
        code_labels = {c.code: c.label for c in q.frame}
        question_columns[q.name] = []
        for j, c in enumerate(q.frame):
            name = safe_name(f"{stem}_c{c.code}", taken=taken)
            indicator_names[(q.name, c.code)] = name
            column = qc.indicators[:, j].astype(float)
            column[outside] = np.nan
            columns[name] = column
            kind = "net " if c.is_net else ""
            labels[name] = f"{q.name}: {kind}{c.label}"
            value_labels[name] = dict(DICHOTOMY_LABELS)
            measures[name] = "nominal"
            question_columns[q.name].append(name)
        if mention_columns:
            matrix = category_matrix(qc, n)
            matrix[outside] = np.nan
            for k in range(matrix.shape[1]):
                name = safe_name(f"{stem}_m{k + 1}", taken=taken)
                columns[name] = matrix[:, k]
                labels[name] = f"{q.name}: code {k + 1} of {matrix.shape[1]}"
                value_labels[name] = dict(code_labels)
                measures[name] = "nominal"
        if verbatims != "omit":
            name = safe_name(f"{stem}_text", taken=taken)
            columns[name] = pd.array(verbatim_texts(q, verbatims), dtype=object)
            labels[name] = f"{q.name}: {q.label}" + (" (masked)" if verbatims == "masked" else "")
    data = pd.DataFrame(columns, copy=False)
    return LabelledTable(data, labels, value_labels, missing, frame_table(ds, indicator_names), measures,
                         question_columns)


def sibling_path(path: str | os.PathLike, suffix: str = "-frame.csv") -> Path:
    """`out/name.ext` -> `out/name-frame.csv`: where the code frame goes beside a data file."""
    p = Path(path)
    return p.with_name(p.stem + suffix)
