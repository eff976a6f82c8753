"""The coded dataset: respondent ids, coded open questions and closed-ended variables.

Analysis builds it from a study (`coded_data.coded_dataset`); every exporter reads it and nothing else.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable, Mapping, Sequence

import numpy as np

from opencode.errors import OpenCodeError

MEASURES = ("nominal", "ordinal", "scale")


@dataclass(frozen=True)
class FrameCode:
    """One entry of a code frame: a code, or a net (a code whose members roll up into it)."""

    code: int
    label: str
    net: int | None = None
    is_net: bool = False


@dataclass
class CodedQuestion:
    """One open question: its code frame, each respondent's codes and optionally the verbatims.

    `codes` is aligned with the dataset's respondent ids (one iterable of code numbers per respondent)
    or a mapping from respondent id to codes (respondents left out have no codes). `base` (aligned with
    the ids) marks the respondents whose coding is known, the base of `oecode tables`; everyone else (no
    verbatim, a non-answer, not yet coded) is missing in every code column, never 0. None: everyone.
    """

    name: str
    label: str
    frame: Sequence[FrameCode]
    codes: Sequence[Iterable[int]] | Mapping[str | int, Iterable[int]]
    verbatims: Sequence[str | None] | None = None
    base: Sequence[bool] | None = None


@dataclass
class ClosedVariable:
    """A closed-ended variable carried along for merging and tabulation (numeric codes).

    `measure` is the level of measurement a statistics program shows: nominal, ordinal or scale (None:
    nominal with value labels, scale without).
    """

    name: str
    values: Sequence[float | int | None]
    label: str = ""
    value_labels: Mapping[int | float, str] = field(default_factory=dict)
    missing_codes: Sequence[int | float] = ()
    measure: str | None = None


@dataclass
class CodedDataset:
    """Respondent ids, coded open questions and closed-ended variables, ready for export."""

    respondent_ids: Sequence[str | int]
    questions: Sequence[CodedQuestion]
    closed: Sequence[ClosedVariable] = ()
    id_name: str = "respondent_id"
    title: str = ""

    def __post_init__(self) -> None:
        self.respondent_ids = list(self.respondent_ids)
        self.questions = list(self.questions)
        self.closed = list(self.closed)
        _validate(self)

    @property
    def n_respondents(self) -> int:
        """Number of respondents (rows of every layout)."""
        return len(self.respondent_ids)


def _validate(ds: CodedDataset) -> None:
    """Raise OpenCodeError naming the respondent, question or code that makes the dataset unusable."""
    ids = ds.respondent_ids
    if not ids:
        raise OpenCodeError("export: the dataset has no respondents")
    kinds = {type(i) for i in ids}
    if not (kinds <= {str} or all(isinstance(i, (int, np.integer)) and not isinstance(i, bool) for i in ids)):
        found = sorted(k.__name__ for k in kinds)
        raise OpenCodeError(f"export: respondent ids must be all text or all whole numbers, got {found}")
    seen: set = set()
    for i in ids:
        if i in seen:
            raise OpenCodeError(f"export: respondent id {i!r} appears more than once")
        seen.add(i)
    names: set[str] = set()
    for q in ds.questions:
        if q.name.lower() in names:
            raise OpenCodeError(f"export: question name {q.name!r} is used twice")
        names.add(q.name.lower())
        _validate_frame(q)
        if q.verbatims is not None and len(q.verbatims) != len(ids):
            raise OpenCodeError(
                f"export: question {q.name!r} has {len(q.verbatims)} verbatims for {len(ids)} respondents"
            )
        if q.base is not None and len(q.base) != len(ids):
            raise OpenCodeError(f"export: question {q.name!r} has a base of {len(q.base)} for {len(ids)} respondents")
        if not isinstance(q.codes, Mapping) and len(q.codes) != len(ids):
            raise OpenCodeError(
                f"export: question {q.name!r} has codes for {len(q.codes)} respondents, expected {len(ids)}"
            )
        if isinstance(q.codes, Mapping):
            unknown = [r for r in q.codes if r not in seen]
            if unknown:
                raise OpenCodeError(f"export: question {q.name!r} has codes for unknown respondent id {unknown[0]!r}")
    for v in ds.closed:
        if v.measure not in (None, *MEASURES):
            raise OpenCodeError(f"export: variable {v.name!r}: measure {v.measure!r} is not one of {', '.join(MEASURES)}")
        if v.name.lower() in names:
            raise OpenCodeError(f"export: variable name {v.name!r} is used twice")
        names.add(v.name.lower())
        if len(v.values) != len(ids):
            raise OpenCodeError(f"export: variable {v.name!r} has {len(v.values)} values for {len(ids)} respondents")


def _validate_frame(q: CodedQuestion) -> None:
    """Codes are unique positive whole numbers and every net reference points at a net of the frame."""
    if not q.frame:
        raise OpenCodeError(f"export: question {q.name!r} has an empty code frame")
    by_code: dict[int, FrameCode] = {}
    for c in q.frame:
        if isinstance(c.code, bool) or not isinstance(c.code, (int, np.integer)) or c.code < 1:
            raise OpenCodeError(f"export: question {q.name!r}: code {c.code!r} must be a whole number of 1 or more")
        if c.code in by_code:
            raise OpenCodeError(f"export: question {q.name!r}: code {c.code} appears twice in the code frame")
        by_code[c.code] = c
    for c in q.frame:
        parent = by_code.get(c.net) if c.net is not None else None
        if c.net is not None and (parent is None or not parent.is_net):
            raise OpenCodeError(
                f"export: question {q.name!r}: code {c.code} names net {c.net}, which is not a net of the frame"
            )
    for c in q.frame:
        chain, node = {c.code}, c
        while node.net is not None:
            if node.net in chain:
                raise OpenCodeError(f"export: question {q.name!r}: net {node.net} contains itself")
            chain.add(node.net)
            node = by_code[node.net]
