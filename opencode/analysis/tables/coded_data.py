"""The study as inputs for tables, exports and the report: one coder's codes as arrays, banners, weights.

A respondent enters a question's base when the chosen coder has coded their verbatim (a code of an included
source, or a done mark) and it is not a non-answer. By default only confirmed codes count (source hand);
machine and rule codes are suggestions until a person accepts them, and `include_suggestions` adds them
while saying how many were added.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
from scipy import sparse

from opencode.analysis.tables import crosstab as tables
from opencode.coding.assignments import FINAL, SUGGESTED, assignments
from opencode.coding.frames import Code, load_frame
from opencode.errors import OpenCodeError
from opencode.analysis.tables import dataset as export
from opencode.study import assignments_store as astore
from opencode.study import frames_store as fstore
from opencode.study import survey_data
from opencode.study.store import Study

CONFIRMED = ("hand",)
_PLAIN_INTEGER = re.compile(r"-?(?:0|[1-9][0-9]{0,17})")
#: Values of the `<question>_status` variable written beside each exported question.
STATUS_LABELS = {1: "coded", 2: "non-answer", 3: "not yet coded", 4: "no verbatim"}


@dataclass
class QuestionCoding:
    """One coder's coding of one question as arrays aligned with the study's respondents.

    `indicators` (respondents x `codes`, CSR 0/1) holds every code the coder gave from the included sources;
    `answered` marks coded verbatims that are not non-answers (the base); `non_answer` the non-answers;
    `uncoded` answered verbatims the coder has not coded yet (left out of the base).
    """

    question: str
    label: str
    coder: str
    respondent_ids: list[str]
    codes: list[Code]
    nets: list[Code]
    indicators: sparse.csr_matrix
    answered: np.ndarray
    non_answer: np.ndarray
    uncoded: np.ndarray
    has_verbatim: np.ndarray
    verbatim_text: list[str | None]
    suggestions: int
    include_suggestions: bool
    flagged_but_coded: int = 0  # flagged non-answers that hold a substantive code: counted as answers
    coded_non_answers: int = 0  # unflagged verbatims given only a non-answer code: counted as non-answers

    @property
    def notes(self) -> list[str]:
        """Plain sentences a reader of any output must see (suggestions included, verbatims not yet coded)."""
        out = []
        if self.include_suggestions:
            out.append(f"{self.question}: includes {self.suggestions:,} machine/rule suggestions not yet reviewed "
                       "by a person" if self.suggestions else
                       f"{self.question}: suggestions were asked for, but coder {self.coder!r} has none")
        if self.flagged_but_coded or self.coded_non_answers:
            out.append(f"{self.question}: non-answers follow the codes of {self.coder!r} where they differ from the "
                       f"import's flag ({self.flagged_but_coded:,} flagged verbatims hold a code and count as answers; "
                       f"{self.coded_non_answers:,} others were coded as non-answers), so the count differs from "
                       "`oecode info`")
        left = int(self.uncoded.sum())
        if left:
            out.append(f"{self.question}: {left:,} answered verbatims not yet coded by {self.coder!r} are left out "
                       "of the base")
        return out

    @property
    def output_label(self) -> str:
        """The question label for outputs; with suggestions included it says how many."""
        if not self.include_suggestions:
            return self.label
        return f"{self.label} [includes {self.suggestions:,} machine/rule suggestions not yet reviewed by a person]"

    @property
    def status(self) -> np.ndarray:
        """Per respondent: 1 coded, 2 non-answer, 3 not yet coded, 4 no verbatim (STATUS_LABELS)."""
        return np.select([self.answered, self.non_answer, self.uncoded], [1, 2, 3], default=4).astype(float)


def load_coding(study: Study, question: str, coder: str = FINAL, *, include_suggestions: bool = False) -> QuestionCoding:
    """A question's codes by one coder as a respondents x codes matrix with its base masks."""
    variable = survey_data.get_question(study, question)
    frame = load_frame(study, question)
    sources = None if include_suggestions else CONFIRMED
    given = assignments(study, question, [coder], sources)
    if given.empty and not astore.marked_ids(study, variable.id, coder):
        raise OpenCodeError(_no_codes_message(study, question, coder, include_suggestions))
    keys = survey_data.respondent_keys(study)
    texts = survey_data.verbatims(study, question)
    rows = pd.Index(keys).get_indexer(texts["respondent"])
    n = len(keys)
    codes = [c for c in frame.codes if not c.is_net]
    nets = [c for c in frame.codes if c.is_net]

    row_of_verbatim = pd.Series(rows, index=texts["verbatim_id"].to_numpy())
    given_rows = row_of_verbatim.reindex(given["verbatim_id"].to_numpy()).to_numpy()
    given_cols = pd.Index([c.number for c in codes]).get_indexer(given["number"])
    indicators = sparse.csr_matrix((np.ones(len(given), dtype=np.int8), (given_rows, given_cols)), shape=(n, len(codes)))
    indicators.sum_duplicates()
    indicators.data[:] = 1

    has_verbatim = np.zeros(n, dtype=bool)
    has_verbatim[rows] = True
    flagged = np.zeros(n, dtype=bool)
    flagged[rows] = texts["nonanswer"].to_numpy()
    marked = row_of_verbatim.reindex(list(astore.marked_ids(study, variable.id, coder))).dropna().to_numpy(int)
    coded = np.zeros(n, dtype=bool)
    coded[marked] = True
    coded[given_rows] = True
    special = np.array([c.special == "nonanswer" for c in codes], dtype=bool)
    substantive = np.asarray(indicators[:, ~special].sum(axis=1)).ravel() > 0
    nonanswer_coded = np.asarray(indicators[:, special].sum(axis=1)).ravel() > 0
    text_column = np.full(n, None, dtype=object)
    text_column[rows] = texts["text"].to_numpy(dtype=object)
    empty = np.zeros(n, dtype=bool)
    empty[rows] = texts["text"].fillna("").str.strip().eq("").to_numpy()
    # A person's code overrules the import's flag ("no" can be an answer), but an empty verbatim has no answer
    # to code: codes on it (e.g. imported from another column) stay out of the base.
    non_answer = has_verbatim & ((~substantive & (flagged | nonanswer_coded)) | empty)
    answered = has_verbatim & coded & ~non_answer
    return QuestionCoding(
        question=question, label=variable.label or question, coder=coder, respondent_ids=keys, codes=codes,
        nets=nets, indicators=indicators, answered=answered, non_answer=non_answer,
        uncoded=has_verbatim & ~coded & ~non_answer, has_verbatim=has_verbatim, verbatim_text=text_column.tolist(),
        suggestions=int(given["source"].isin(SUGGESTED).sum()) if include_suggestions else 0,
        include_suggestions=include_suggestions,
        flagged_but_coded=int((has_verbatim & flagged & substantive & ~empty).sum()),
        coded_non_answers=int((non_answer & ~flagged).sum()),
    )


def _no_codes_message(study: Study, question: str, coder: str, include_suggestions: bool) -> str:
    """Why there is nothing to tabulate, with the coders that do hold codes for the question."""
    every = assignments(study, question)
    if every.empty:
        return f"question {question!r}: nobody has coded it yet (code it at the desk or import codes first)"
    counts = every.groupby(["coder", "source"]).size().unstack(fill_value=0)
    hand = counts["hand"] if "hand" in counts else pd.Series(0, index=counts.index)
    suggested = counts.drop(columns="hand", errors="ignore").sum(axis=1)
    listed = ", ".join(
        f"{name} ({int(hand[name]):,} confirmed" + (f", {int(suggested[name]):,} suggestions)" if suggested[name] else ")")
        for name in counts.index)
    own = "" if include_suggestions or coder not in counts.index or not suggested[coder] else (
        f"; {coder!r} holds only machine/rule suggestions: review them, or add --with-suggestions")
    kind = "codes" if include_suggestions else "confirmed codes"
    return (f"question {question!r}: coder {coder!r} has no {kind}{own}. Coders with codes: {listed}; "
            "choose one with --coder")


def table_question(coding: QuestionCoding) -> tables.CodedQuestion:
    """The tables library's input: non-answer codes left to the non-answer row, unused retired codes dropped."""
    used = np.asarray(coding.indicators.sum(axis=0)).ravel() > 0
    keep = [i for i, c in enumerate(coding.codes) if c.special != "nonanswer" and (c.active or used[i])]
    kept = [coding.codes[i] for i in keep]
    return tables.CodedQuestion(
        name=coding.question, label=coding.output_label, indicators=coding.indicators[:, keep],
        codes=[tables.Code(c.number, c.label) for c in kept], answered=coding.answered, non_answer=coding.non_answer,
        nets=[tables.Net(n.number, n.label, members) for n, members in kept_nets(coding.nets, kept)],
        respondent_ids=coding.respondent_ids, has_verbatim=coding.has_verbatim,
    )


def kept_nets(nets: Sequence[Code], kept: Sequence[Code]) -> list[tuple[Code, tuple[int, ...]]]:
    """Nets with their direct members among the kept codes and non-empty inner nets; empty nets dropped."""
    parent = {n.number: n.net for n in nets}
    alive: dict[int, tuple[int, ...]] = {}
    for net in sorted(nets, key=lambda n: n.net is None):  # inner nets (those inside another net) first
        members = sorted([c.number for c in kept if c.net == net.number]
                         + [n for n in alive if parent[n] == net.number])
        if members:
            alive[net.number] = tuple(members)
    return [(net, alive[net.number]) for net in nets if net.number in alive]


def banner_variable(study: Study, name: str) -> tables.BannerVariable:
    """A single-choice closed-ended variable as a banner: codes per respondent, value labels in order, missing codes."""
    variable = survey_data.get_variable(study, name)
    if variable.kind != "single":
        raise OpenCodeError(f"{study.path}: banner variable {name!r} is {variable.kind}; a banner needs a "
                            "single-choice closed-ended variable")
    return tables.BannerVariable(
        name=name, values=np.asarray(survey_data.raw_values(study, name), dtype=float),
        value_labels=list(variable.value_labels.items()), missing=sorted(variable.missing_codes),
        label=variable.label or name)


def survey_weight(study: Study, name: str | None = None) -> tables.SurveyWeight | None:
    """The named weight, else the study's variable with role weight (None if it has none)."""
    if name is None:
        found = survey_data.list_variables(study, role="weight")
        if not found:
            return None
        if len(found) > 1:
            names = ", ".join(v.name for v in found)
            raise OpenCodeError(f"{study.path}: several weight variables ({names}); choose one with --weight")
        name = found[0].name
    variable = survey_data.get_variable(study, name)
    if variable.kind not in ("numeric", "single"):
        raise OpenCodeError(f"{study.path}: weight {name!r} is {variable.kind}, not numeric")
    values = survey_data.analysis_values(study, name)
    if not np.isfinite(values).any():
        raise OpenCodeError(f"{study.path}: weight {name!r} is empty (no respondent has a value)")
    return tables.SurveyWeight(name, values)


def closed_variables(study: Study, names: Sequence[str] | None = None) -> list[export.ClosedVariable]:
    """Closed-ended variables for an export: the named ones, or (names None) every single-choice and numeric one."""
    if names is None:
        chosen = [v for v in survey_data.list_variables(study)
                  if v.role not in ("id", "question") and v.kind in ("single", "numeric")]
    else:
        chosen = [survey_data.get_variable(study, name) for name in names]
    out = []
    for v in chosen:
        if v.kind not in ("single", "numeric"):
            raise OpenCodeError(f"{study.path}: variable {v.name!r} is {v.kind}; exports carry single-choice and "
                                "numeric closed-ended variables")
        out.append(export.ClosedVariable(
            name=v.name, values=np.asarray(survey_data.raw_values(study, v.name), dtype=float), label=v.label,
            value_labels=dict(v.value_labels), missing_codes=sorted(v.missing_codes),
            measure="scale" if v.kind == "numeric" or v.role == "weight" else "nominal"))
    return out


def _with_weight(study: Study, names: Sequence[str] | None) -> Sequence[str] | None:
    """The closed variables to carry plus the study's weight (so the file can be weighted like the tables)."""
    if names is None:
        return None
    weights = [v.name for v in survey_data.list_variables(study, role="weight") if v.kind in ("single", "numeric")]
    return list(dict.fromkeys([*names, *weights]))


def export_ids(keys: Sequence[str]) -> list[str] | list[int]:
    """Respondent ids as whole numbers when every id is one written plainly (no leading zero, fits 64 bits),
    so a numeric id stays numeric in the exported file; otherwise as text."""
    plain = all(_PLAIN_INTEGER.fullmatch(k) for k in keys)
    return [int(k) for k in keys] if plain and keys else list(keys)


def coded_questions(study: Study, questions: Sequence[str] | None = None) -> list[str]:
    """The named questions, or every question that has a code frame."""
    if questions:
        return list(dict.fromkeys(questions))
    found = [q.name for q in survey_data.list_questions(study) if fstore.frame_of_question(study, q.id) is not None]
    if not found:
        raise OpenCodeError(f"{study.path}: no question has a code frame yet (import or build one first)")
    return found


def export_question(coding: QuestionCoding, with_text: bool = False) -> export.CodedQuestion:
    """The export library's input: the whole frame (codes and nets) and each respondent's code numbers."""
    numbers = np.array([c.number for c in coding.codes], dtype=np.int64)
    matrix = coding.indicators.tocsr()
    per_row = np.split(numbers[matrix.indices], matrix.indptr[1:-1])
    frame = [export.FrameCode(c.number, c.label, c.net, c.is_net)
             for c in sorted(coding.codes + coding.nets, key=lambda c: c.number)]
    return export.CodedQuestion(
        name=coding.question, label=coding.output_label, frame=frame, codes=[r.tolist() for r in per_row],
        verbatims=coding.verbatim_text if with_text else None, base=coding.answered)


def coded_dataset(study: Study, questions: Sequence[str] | None = None, coder: str = FINAL, *,
                  include_suggestions: bool = False, closed: Sequence[str] | None = (),
                  with_text: bool = False) -> tuple[export.CodedDataset, list[QuestionCoding]]:
    """The study as an export dataset: codes per question (and a `<question>_status` variable), closed variables.

    `closed` names the closed-ended variables to carry (None: all single-choice and numeric ones); the
    study's weight comes along either way. Code columns are missing outside each question's base.
    """
    codings = [load_coding(study, q, coder, include_suggestions=include_suggestions)
               for q in coded_questions(study, questions)]
    carried = closed_variables(study, _with_weight(study, closed))
    status = [export.ClosedVariable(f"{c.question}_status", c.status, f"{c.question}: coding status ({c.coder})",
                                    dict(STATUS_LABELS)) for c in codings]
    id_variable = survey_data.list_variables(study, role="id")
    dataset = export.CodedDataset(
        respondent_ids=export_ids(codings[0].respondent_ids), questions=[export_question(c, with_text) for c in codings],
        closed=carried + status, id_name=id_variable[0].name if id_variable else "respondent_id",
        title=study.path.stem)
    return dataset, codings
