"""Adjudication: where coders differ, side by side, and settling each verbatim's codes as the `final` coder.

For the compare screen and `oecode agree --adjudicate` (question = the open question's name):

- `differences(study, question, coders, sample=None, limit=None) -> list[Difference]`: verbatims coded by
  two or more of `coders` whose code sets are not all the same, ascending by verbatim id;
- `take(study, question, verbatim_id, coder) -> tuple[int, ...]`: final gets that coder's codes;
- `take_union(study, question, verbatim_id, coders) -> tuple[int, ...]`: final gets every code any of them gave;
- `set_final(study, question, verbatim_id, numbers) -> tuple[int, ...]`: final gets exactly `numbers`;
- `verbatim_of_respondent(study, question, respondent) -> int`: the verbatim a respondent (by the survey's
  respondent id, as every list shows it and the desk's go-to takes it) gave to the question, for the three above;
- `accept_agreed(study, question, coders, sample=None) -> int`: every verbatim all `coders` coded alike and
  final has not settled yet goes to final in one step; returns how many;
- `undo_last(study) -> str | None`: reverse final's newest change (the coding library's undo for `final`).

Each decision is one transaction written through the coding library (`set_codes` for `final`), audited
with actor `final`, so `undo_last` reverses it. A decision of "no code" also marks the verbatim done for
final (that is how "settled with no code" is recorded), which is a second undo step.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from opencode.coding import assignments as coding
from opencode.coding import history
from opencode.coding.assignments import FINAL
from opencode.coding.frames import load_frame
from opencode.coding.history import Change
from opencode.coding.reliability import MACHINE, codes_by_verbatim, coder_sets, parse_coders
from opencode.errors import BadInput, OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import desk_queries as dq
from opencode.study import survey_data
from opencode.study.store import Study, now


@dataclass(frozen=True)
class Difference:
    """One verbatim where coders differ: each coder's codes (None = not coded) and final's (None = unsettled)."""

    verbatim_id: int
    respondent: str
    text: str
    codes: dict[str, tuple[int, ...] | None]
    final: tuple[int, ...] | None


def differences(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None,
                limit: int | None = None) -> list[Difference]:
    """Verbatims coded by two or more of the coders whose code sets differ (verbatims one coder coded are not
    differences: there is nothing to compare), with final's current codes."""
    if limit is not None and limit < 0:
        raise OpenCodeError(f"the number of differences to list must be 0 or more, got {limit}")
    sets = coder_sets(study, question, coders, sample)
    ids = sorted(set().union(*sets.values()))
    found = []
    for v in ids:
        held = [s[v] for s in sets.values() if v in s]
        if len(held) >= 2 and len(set(held)) > 1:
            found.append(v)
    found = found[:limit] if limit is not None else found
    if not found:
        return []
    final = codes_by_verbatim(study, question, FINAL, np.asarray(found, dtype=np.int64))
    table = survey_data.verbatims(study, question).set_index("verbatim_id")
    return [Difference(v, str(table.at[v, "respondent"]), str(table.at[v, "text"]),
                       {c: (tuple(sorted(s[v])) if v in s else None) for c, s in sets.items()},
                       tuple(sorted(final[v])) if v in final else None) for v in found]


def _codes_text(numbers: tuple[int, ...] | None, labels: dict[int, str], missing: str) -> str:
    if numbers is None:
        return missing
    return "; ".join(f"{n} {labels.get(n, '?')}" for n in numbers) or "no code"


def format_differences(found: Sequence[Difference], labels: dict[int, str], width: int = 100) -> str:
    """Each differing verbatim as a short block: its text, then every coder's codes with labels, then final."""
    blocks = []
    for d in found:
        text = d.text if len(d.text) <= width else d.text[: width - 3] + "..."
        names = [*d.codes, FINAL]
        pad = max(map(len, names))
        lines = [f"respondent {d.respondent}: {text}"]
        lines += [f"  {c.ljust(pad)}  {_codes_text(n, labels, 'not coded')}" for c, n in d.codes.items()]
        lines.append(f"  {FINAL.ljust(pad)}  {_codes_text(d.final, labels, 'not settled yet')}")
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks) if blocks else "no differences: the coders agree on every verbatim they both coded"


def verbatim_of_respondent(study: Study, question: str, respondent: str) -> int:
    """The verbatim id of a respondent's answer to a question, by the survey's respondent id; a respondent
    who gave the question no verbatim (or is not in the survey) is refused naming both."""
    question_id = survey_data.get_question(study, question).id
    found = dq.verbatim_of_respondent(study, question_id, respondent)
    if found is None:
        raise BadInput(f"respondent {str(respondent).strip()!r} has no verbatim in question {question!r}")
    return found


def respondent_of(study: Study, verbatim_id: int) -> str:
    """How messages name a verbatim: by its respondent's survey id."""
    card = dq.verbatim_card(study, int(verbatim_id))
    return f"respondent {card.respondent}" if card else f"verbatim {verbatim_id}"


def _check_verbatim(study: Study, question: str, verbatim_id: int) -> None:
    question_id = survey_data.get_question(study, question).id
    if astore.verbatim_question(study, int(verbatim_id)) != question_id:
        raise OpenCodeError(f"verbatim id {verbatim_id} is not an answer to question {question!r}")


def _side(study: Study, question: str, verbatim_id: int, coder: str) -> tuple[int, ...]:
    """The codes a coder gave a verbatim; an error naming the coder when they have not coded it."""
    held = codes_by_verbatim(study, question, coder, np.asarray([verbatim_id], dtype=np.int64))
    if verbatim_id not in held:
        who = "the machine coder" if coder == MACHINE else f"coder {coder!r}"
        raise OpenCodeError(f"{who} has not coded {respondent_of(study, verbatim_id)} on question {question!r}")
    return tuple(sorted(held[verbatim_id]))


def set_final(study: Study, question: str, verbatim_id: int, numbers: Sequence[int]) -> tuple[int, ...]:
    """Make final's codes on a verbatim exactly `numbers` (one transaction; "no code" also marks it done)."""
    wanted = tuple(sorted({int(n) for n in numbers}))
    with study.transaction():
        _check_verbatim(study, question, verbatim_id)
        coding.set_codes(study, int(verbatim_id), list(wanted), FINAL)
        if not wanted:
            coding.mark_done(study, int(verbatim_id), FINAL)
    return wanted


def take(study: Study, question: str, verbatim_id: int, coder: str) -> tuple[int, ...]:
    """Final takes one coder's codes on a verbatim."""
    _check_verbatim(study, question, verbatim_id)
    return set_final(study, question, verbatim_id, _side(study, question, int(verbatim_id), coder.strip()))


def take_union(study: Study, question: str, verbatim_id: int, coders: str | Sequence[str]) -> tuple[int, ...]:
    """Final takes every code any of the coders gave the verbatim (each must have coded it)."""
    _check_verbatim(study, question, verbatim_id)
    union = set()
    for coder in parse_coders(coders, least=1):
        union.update(_side(study, question, int(verbatim_id), coder))
    return set_final(study, question, verbatim_id, sorted(union))


def accept_agreed(study: Study, question: str, coders: str | Sequence[str], sample: str | None = None,
                  actor: str = "oecode") -> int:
    """Write to final every verbatim that all the coders coded with the same codes, unless final has settled it
    already (or it holds a retired code); one transaction and one undo step for final. Returns the count."""
    sets = coder_sets(study, question, coders, sample)
    variable = survey_data.get_question(study, question)
    settled = set(astore.coded_verbatim_ids(study, variable.id, FINAL).tolist())
    codes = {c.number: c for c in load_frame(study, question).codes}
    first, *rest = sets.values()
    agreed = {v: numbers for v, numbers in first.items()
              if v not in settled and all(other.get(v) == numbers for other in rest)
              and all(codes[n].active for n in numbers)}
    if not agreed:
        return 0
    stamp = now()
    with study.transaction():
        change = Change(study)
        for v, numbers in sorted(agreed.items()):
            for n in sorted(numbers):
                change.put_assignment({"verbatim_id": v, "code_id": codes[n].id, "coder": FINAL, "source": "hand",
                                       "confidence": None, "created_at": stamp})
            if not numbers:
                change.set_mark(v, FINAL, stamp)
        change.commit(FINAL, "assign", "question", variable.id, question=question, adjudication="accept-agreed",
                      coders=list(sets), sample=sample, verbatims=len(agreed), by=actor)
    return len(agreed)


def undo_last(study: Study) -> str | None:
    """Reverse final's newest change (a decision or an accept-agreed step); None when there is nothing to undo."""
    return history.undo(study, FINAL)
