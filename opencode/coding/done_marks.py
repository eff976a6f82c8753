"""Mark many verbatims done (or not done) for a coder at once, chosen by a filter.

A done mark says the coder has finished a verbatim, with or without codes; it puts an answered verbatim in
the coder's base (tables, exports). After an import whose blank code cells mean "nothing applies", mark
those verbatims done here; clear marks set by mistake the same way. One undoable change per call.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from opencode.coding.assignments import assignments
from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.study import survey_data
from opencode.study.store import Study, now
from opencode.coding.choices import FILTERS  # noqa: F401  (which verbatims a call acts on; re-exported)


@dataclass
class MarkReport:
    """What a call changed: verbatims the filter chose, and how many of them changed state."""

    question: str
    coder: str
    done: bool
    chosen: int
    changed: int


def choose_verbatims(study: Study, question: str, coder: str, which: str,
                     sources: tuple[str, ...] | None = ("hand",)) -> np.ndarray:
    """Ids of the question's verbatims that the filter `which` picks for `coder` (codes of `sources`)."""
    if which not in FILTERS:
        raise OpenCodeError(f"verbatims to mark: {which!r} is not one of {', '.join(FILTERS)}")
    texts = survey_data.verbatims(study, question)
    ids = texts["verbatim_id"].to_numpy()
    held = np.isin(ids, assignments(study, question, [coder], sources)["verbatim_id"].to_numpy())
    flagged = texts["nonanswer"].to_numpy(dtype=bool)
    picked = {"answered-without-codes": ~held & ~flagged, "without-codes": ~held, "with-codes": held,
              "non-answers": flagged, "all": np.ones(len(ids), dtype=bool)}[which]
    return ids[picked]


def set_done(study: Study, question: str, coder: str, which: str, *, done: bool = True,
             sources: tuple[str, ...] | None = ("hand",)) -> MarkReport:
    """Mark the verbatims `which` picks done (or clear their marks) for `coder`, as one undoable change."""
    if not coder or not str(coder).strip():
        raise OpenCodeError("marking verbatims done needs the coder's name (--coder)")
    coder = str(coder).strip()
    question_id = survey_data.get_question(study, question).id
    with study.transaction():
        chosen = choose_verbatims(study, question, coder, which, sources)
        change = Change(study)
        stamp = now() if done else None
        changed = sum(change.set_mark(verbatim_id, coder, stamp) for verbatim_id in chosen.tolist())
        change.commit(coder, "mark" if done else "unmark", "question", question_id, question=question,
                      which=which, verbatims=changed)
    return MarkReport(question, coder, done, len(chosen), changed)
