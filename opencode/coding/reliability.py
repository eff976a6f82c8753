"""Reliability in the study: draw and assign blind double-coding samples, track them, gather coders' codes.

Library calls for the CLI (`oecode sample`, `oecode agree`) and the desk:

- `draw_sample(study, question, name, n=.. | percent=.., strata=VAR, random_state=S)` stores a named sample;
- `assign_sample(study, question, name, coders)` gives it to two or more coders, who then code it blind;
- `sample_status(study, question, name)` says who has finished what ("finished" is the coding library's
  "coded": a hand code or a done mark);
- `is_blind(study, question, coder, verbatim_id)` tells the desk to hide other coders' codes;
- `coder_sets(study, question, coders, sample=None)` gives each coder's codes, which agreement measures.

Coders compared are named people (their hand codes; suggestions they hold are not their decisions) or
MACHINE ("machine"): the machine coder's suggestions (source=machine, whichever coder holds them), which
count as one more coder on every verbatim holding at least one of them.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from opencode.coding import assignments as coding
from opencode.coding.assignments import FINAL
from opencode.coding.frames import load_frame
from opencode.coding.reliability_sample import MISSING_STRATUM, draw_reliability_sample
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import desk_queries as dq
from opencode.study import samples_store as sstore
from opencode.study import survey_data
from opencode.study.store import Study, now
from opencode.files.textout import format_table
from opencode.coding.choices import MACHINE  # noqa: F401  (re-exported)

MAX_STRATA = 50  # a stratifying variable with more values than this is almost surely not closed-ended


@dataclass(frozen=True)
class ReliabilitySample:
    """A stored reliability sample: its verbatims, how it was drawn and who codes it."""

    name: str
    question: str
    verbatim_ids: tuple[int, ...]
    coders: tuple[str, ...]
    created_at: str
    params: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class CoderProgress:
    """How far one assigned coder is with a sample."""

    coder: str
    finished: int
    remaining: int


@dataclass(frozen=True)
class SampleStatus:
    """Progress on a sample: per coder, and how many verbatims every assigned coder has finished."""

    sample: ReliabilitySample
    progress: tuple[CoderProgress, ...]
    finished_by_all: int


# -- samples ------------------------------------------------------------------------------------------------------
def _check_name(name: str) -> str:
    if not name or not str(name).strip():
        raise OpenCodeError("reliability sample: give the sample a name (e.g. --name rel1)")
    return str(name).strip()


def _stratum_labels(study: Study, variable_name: str, respondent_ids: np.ndarray) -> list[str | None]:
    """Each verbatim's value label on a closed-ended variable (None where missing)."""
    variable = survey_data.get_variable(study, variable_name)
    if variable.role in ("id", "question") or variable.kind not in ("single", "numeric"):
        raise OpenCodeError(f"{study.path}: cannot stratify by {variable_name!r}: it is a {variable.kind} "
                            f"{variable.role} variable, not a closed-ended single-choice one")
    values = survey_data.analysis_values(study, variable_name)
    rows = np.searchsorted(dq.respondent_row_ids(study), respondent_ids)
    picked = values[rows]
    distinct = np.unique(picked[~np.isnan(picked)])
    if distinct.size > MAX_STRATA:
        raise OpenCodeError(f"{study.path}: cannot stratify by {variable_name!r}: it has {distinct.size} distinct "
                            f"values (at most {MAX_STRATA}); choose a closed-ended variable with few categories")
    return [None if np.isnan(v) else variable.display(float(v)) for v in picked]


def _allocation(labels: list[str | None], chosen: np.ndarray) -> list[list[Any]]:
    """[[stratum, verbatims, drawn], ...] in order of first appearance."""
    import pandas as pd  # imported here so the desk starts without pandas
    series = pd.Series([MISSING_STRATUM if x is None else x for x in labels], dtype=object)
    population = series.value_counts(sort=False)
    drawn = series[chosen].value_counts(sort=False).reindex(population.index, fill_value=0)
    return [[str(k), int(population[k]), int(drawn[k])] for k in population.index]


def draw_sample(study: Study, question: str, name: str, *, n: int | None = None, percent: float | None = None,
                strata: str | None = None, random_state: int | None = 0, include_nonanswers: bool = False,
                actor: str = "oecode") -> ReliabilitySample:
    """Draw n (or percent %) of a question's verbatims, simple random or stratified by a closed-ended variable,
    and store it under `name` (audited). Non-answers are left out unless `include_nonanswers`."""
    name = _check_name(name)
    variable = survey_data.get_question(study, question)
    if sstore.sample_by_name(study, variable.id, name) is not None:
        raise OpenCodeError(f"question {question!r} already has a reliability sample named {name!r}; "
                            "choose another name")
    pool = survey_data.verbatims(study, question, include_nonanswers=include_nonanswers)
    if pool.empty:
        raise OpenCodeError(f"question {question!r} has no verbatims to sample"
                            + ("" if include_nonanswers else " (non-answers left out)"))
    ids = pool["verbatim_id"].to_numpy()
    labels = _stratum_labels(study, strata, pool["respondent_id"].to_numpy()) if strata else None
    drawn = draw_reliability_sample(ids.tolist(), n=n, percent=percent, strata=labels, random_state=random_state)
    chosen = np.flatnonzero(np.isin(ids, drawn))
    params = {"n": n, "percent": percent, "strata": strata, "seed": random_state,
              "include_nonanswers": include_nonanswers, "population": int(ids.size), "drawn": len(drawn),
              "allocation": _allocation(labels, chosen) if labels is not None else []}
    stamp = now()
    with study.transaction():
        sample_id = sstore.insert_sample(study, variable.id, name, stamp, params, drawn)
        study.audit(actor, "draw-sample", "sample", sample_id, {"question": question, "name": name, **params})
    return ReliabilitySample(name, question, tuple(int(v) for v in drawn), (), stamp, params)


def _stored(study: Study, question: str, name: str) -> tuple[sstore.SampleRow, survey_data.Variable]:
    variable = survey_data.get_question(study, question)
    row = sstore.sample_by_name(study, variable.id, str(name).strip())
    if row is None:
        names = ", ".join(s.name for s in sstore.samples_of_question(study, variable.id)) or "none yet"
        raise OpenCodeError(f"question {question!r} has no reliability sample named {name!r} (samples: {names})")
    return row, variable


def _as_sample(study: Study, question: str, row: sstore.SampleRow) -> ReliabilitySample:
    ids = tuple(int(v) for v in sstore.sample_item_ids(study, row.id))
    return ReliabilitySample(row.name, question, ids, tuple(sstore.sample_coders(study, row.id)), row.created_at,
                             row.params)


def get_sample(study: Study, question: str, name: str) -> ReliabilitySample:
    """A stored sample by name; the error lists the question's samples."""
    row, _ = _stored(study, question, name)
    return _as_sample(study, question, row)


def list_samples(study: Study, question: str) -> list[ReliabilitySample]:
    """Every reliability sample of a question, oldest first."""
    variable = survey_data.get_question(study, question)
    return [_as_sample(study, question, row) for row in sstore.samples_of_question(study, variable.id)]


def parse_coders(coders: str | Sequence[str], least: int = 2) -> list[str]:
    """Coder names from a list or "a,b,c": distinct, non-empty, at least `least` of them."""
    names = [c.strip() for c in (coders.split(",") if isinstance(coders, str) else coders)]
    names = [c for c in names if c]
    repeated = sorted({c for c in names if names.count(c) > 1})
    if repeated:
        raise OpenCodeError(f"coder {repeated[0]!r} is named twice; name each coder once")
    if len(names) < least:
        raise OpenCodeError(f"name at least {least} coders (got {len(names)}: {', '.join(names) or 'none'}), "
                            "e.g. --coders ash,bryn")
    return names


def assign_sample(study: Study, question: str, name: str, coders: str | Sequence[str],
                  actor: str = "oecode") -> ReliabilitySample:
    """Give a sample to coders, who then code its verbatims blind; it must end up with two or more coders."""
    row, _ = _stored(study, question, name)
    wanted = parse_coders(coders, least=1)
    for reserved, meaning in ((FINAL, "the adjudicated codes"), (MACHINE, "the machine coder")):
        if reserved in wanted:
            raise OpenCodeError(f"coder name {reserved!r} is reserved ({meaning}); a reliability sample goes to people")
    with study.transaction():
        added = sstore.add_sample_coders(study, row.id, wanted)
        held = sstore.sample_coders(study, row.id)
        if len(held) < 2:
            raise OpenCodeError(f"reliability sample {row.name!r}: blind double coding needs two or more coders; "
                                f"it would have only {', '.join(held)}")
        if added:
            study.audit(actor, "assign-sample", "sample", row.id, {"question": question, "name": row.name,
                                                                    "coders": added})
    return _as_sample(study, question, row)


def sample_status(study: Study, question: str, name: str) -> SampleStatus:
    """How many of the sample's verbatims each assigned coder has finished (hand code or done mark)."""
    row, variable = _stored(study, question, name)
    sample = _as_sample(study, question, row)
    items = np.asarray(sample.verbatim_ids, dtype=np.int64)
    done_by_all = np.ones(items.size, dtype=bool)
    progress = []
    for coder in sample.coders:
        done = np.isin(items, astore.coded_verbatim_ids(study, variable.id, coder))
        done_by_all &= done
        progress.append(CoderProgress(coder, int(done.sum()), int(items.size - done.sum())))
    return SampleStatus(sample, tuple(progress), int(done_by_all.sum()) if sample.coders else 0)


def format_sample(sample: ReliabilitySample) -> str:
    """What a sample is, as text: size, how drawn, coders, and the strata allocation."""
    p = sample.params
    size = f"{p.get('percent')}%" if p.get("percent") is not None else f"n = {p.get('n')}"
    how = f"stratified by {p['strata']}" if p.get("strata") else "simple random"
    lines = [f"sample {sample.name} of question {sample.question}: {len(sample.verbatim_ids):,} of "
             f"{p.get('population', 0):,} verbatims ({size}, {how}, seed {p.get('seed')}; non-answers "
             f"{'included' if p.get('include_nonanswers') else 'left out'})",
             f"coders: {', '.join(sample.coders) or 'none assigned yet'}"]
    if p.get("allocation"):
        lines.append(format_table(["stratum", "verbatims", "drawn"], p["allocation"]))
    return "\n".join(lines)


def format_sample_status(status: SampleStatus) -> str:
    """Per-coder progress on a sample as a text table."""
    n = len(status.sample.verbatim_ids)
    head = f"sample {status.sample.name} of question {status.sample.question}: {n:,} verbatims"
    if not status.progress:
        return head + "\nno coders assigned yet (oecode sample assign STUDY --name NAME --coders A,B)"
    rows = [[p.coder, f"{p.finished:,}", f"{p.remaining:,}", f"{100 * p.finished / n:.0f}%" if n else "-"]
            for p in status.progress]
    return "\n".join([head, format_table(["coder", "finished", "to do", "done"], rows,
                                                   note="coders in the order assigned"),
                      f"finished by every assigned coder: {status.finished_by_all:,} of {n:,}"])


def is_blind(study: Study, question: str, coder: str, verbatim_id: int) -> bool:
    """Whether the desk must hide other coders' codes from `coder` on this verbatim (it sits in a reliability
    sample of the question assigned to them). Stays true after they finish, so their codes stay independent."""
    return sstore.is_blind_item(study, survey_data.get_question(study, question).id, coder, verbatim_id)


def blind_verbatim_ids(study: Study, question: str, coder: str) -> np.ndarray:
    """Every verbatim id of the question `coder` codes blind, ascending (for the desk's paging)."""
    return sstore.blind_item_ids(study, survey_data.get_question(study, question).id, coder)


# -- agreement from the study ---------------------------------------------------------------------------------------
def code_labels(study: Study, question: str) -> dict[int, str]:
    """Code number -> label for the codes (not nets) of the question's frame."""
    return {c.number: c.label for c in load_frame(study, question).codes if not c.is_net}


def codes_by_verbatim(study: Study, question: str, coder: str, within: np.ndarray | None = None
                      ) -> dict[int, frozenset[int]]:
    """{verbatim id: code numbers} over the verbatims `coder` coded (optionally only ids in `within`); an empty
    set means coded with no code. A person's hand codes and done marks, or MACHINE's suggestions."""
    if coder == MACHINE:
        table = coding.assignments(study, question, None, ("machine",))
        ids = np.unique(table["verbatim_id"].to_numpy())
    else:
        table = coding.assignments(study, question, [coder], ("hand",))
        ids = astore.coded_verbatim_ids(study, survey_data.get_question(study, question).id, coder)
    if within is not None:
        ids = ids[np.isin(ids, within)]
        table = table[table["verbatim_id"].isin(within)]
    grouped = table.groupby("verbatim_id")["number"].agg(lambda s: frozenset(int(x) for x in s)).to_dict()
    return {int(v): grouped.get(int(v), frozenset()) for v in ids}


def sample_ids(study: Study, question: str, sample: str | None) -> np.ndarray | None:
    """A sample's verbatim ids (None for no sample: the whole question)."""
    return None if sample is None else np.asarray(get_sample(study, question, sample).verbatim_ids, dtype=np.int64)


def coder_sets(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None
               ) -> dict[str, dict[int, frozenset[int]]]:
    """coder -> `codes_by_verbatim` for each coder named (within `sample`); a coder who coded nothing there is an
    error naming them."""
    names = parse_coders(coders)
    variable = survey_data.get_question(study, question)
    within = sample_ids(study, question, sample)
    sets: dict[str, dict[int, frozenset[int]]] = {}
    for coder in names:
        sets[coder] = codes_by_verbatim(study, question, coder, within)
        if not sets[coder]:
            raise OpenCodeError(_nothing_coded(study, question, variable.id, coder, sample))
    return sets


def _nothing_coded(study: Study, question: str, question_id: int, coder: str, sample: str | None) -> str:
    where = f"question {question!r}" + (f" in reliability sample {sample!r}" if sample else "")
    if coder == MACHINE:
        return f"the machine coder (source=machine suggestions) has coded no verbatims of {where}; " \
               "train and apply it first (oecode model train, then oecode model apply)"
    present = ", ".join(c for c, _ in astore.coders_of_question(study, question_id)) or "none yet"
    return f"coder {coder!r} has coded no verbatims of {where} (coders with hand codes here: {present})"
