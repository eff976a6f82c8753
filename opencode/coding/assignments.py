"""Assign codes to verbatims, per coder, one committed transaction per action (a crash loses nothing).

A hand code is never overwritten by a rule or machine suggestion; suggestions become hand codes only when
a person accepts them. Every change is audited with reversible ops, so each coder can undo and redo.
"""

from __future__ import annotations

from dataclasses import dataclass

from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import desk_queries as dq
from opencode.study import frames_store as fstore
from opencode.study import survey_data
from opencode.study.store import Study, now
from opencode.coding.choices import FINAL  # noqa: F401  (re-exported)

SOURCES = ("hand", "rule", "machine")
SUGGESTED = ("rule", "machine")


@dataclass(frozen=True)
class AssignedCode:
    """One code a coder holds on a verbatim."""

    number: int
    source: str
    confidence: float | None


def _check_coder(coder: str) -> str:
    if not coder or not str(coder).strip():
        raise OpenCodeError("a coder name is needed (e.g. your initials)")
    return str(coder).strip()


def _resolve(study: Study, verbatim_id: int, number: int, assignable: bool = True) -> int:
    """The code id behind a code number for a verbatim; a clear error for anything that cannot be assigned."""
    found = fstore.code_for_verbatim(study, verbatim_id, int(number))
    if found is None:
        if astore.verbatim_question(study, verbatim_id) is None:
            raise OpenCodeError(f"verbatim {verbatim_id}: no such verbatim in {study.path.name}")
        raise OpenCodeError(f"verbatim {verbatim_id}: its question has no code frame yet")
    _, code_id, kind, active, label = found
    if code_id is None:
        raise OpenCodeError(f"verbatim {verbatim_id}: the frame has no code {number}")
    if assignable and kind == "net":
        raise OpenCodeError(f"code {number} ({label}) is a net; nets are counted from their codes")
    if assignable and not active:
        raise OpenCodeError(f"code {number} ({label}) is retired; restore it to use it again")
    return int(code_id)


def _check_source(source: str) -> str:
    if source not in SOURCES:
        raise OpenCodeError(f"source {source!r} is not one of {', '.join(SOURCES)}")
    return source


def _give(change: Change, verbatim_id: int, code_number: int, coder: str, source: str,
          confidence: float | None, stamp: str) -> str | None:
    """Stage one code on one verbatim in a change: "assign" (new), "accept" (a suggestion made a hand code),
    or None when the coder holds it already (a hand code is never downgraded to a suggestion)."""
    code_id = _resolve(change.study, verbatim_id, code_number)
    existing = astore.get_assignment(change.study, verbatim_id, code_id, coder)
    if existing is not None and (existing["source"] == "hand" or source != "hand"):
        return None
    change.put_assignment({"verbatim_id": verbatim_id, "code_id": code_id, "coder": coder, "source": source,
                           "confidence": None if source == "hand" else confidence, "created_at": stamp})
    return "assign" if existing is None else "accept"


def assign(study: Study, verbatim_id: int, code_number: int, coder: str, source: str = "hand",
           confidence: float | None = None) -> bool:
    """Give a verbatim a code; True if anything changed. A hand code turns a suggestion into a hand code."""
    coder, source = _check_coder(coder), _check_source(source)
    with study.transaction():
        change = Change(study)
        action = _give(change, verbatim_id, code_number, coder, source, confidence, now())
        if action is None:
            return False
        change.commit(coder, action, "verbatim", verbatim_id, number=int(code_number))
    return True


def assign_many(study: Study, verbatim_ids: list[int], code_number: int, coder: str, source: str = "hand",
                actor: str | None = None) -> int:
    """Give one code to many verbatims as ONE undoable change (one transaction, one audit row); how many changed.

    Verbatims where the coder holds the code as a hand code already are skipped; a rule or machine suggestion
    of the code becomes a hand code; other coders' codes are never touched. Any verbatim that cannot take the
    code (unknown id, no such code, a net, a retired code) stops the whole change with nothing written.
    """
    coder, source = _check_coder(coder), _check_source(source)
    ids = list(dict.fromkeys(int(v) for v in verbatim_ids))
    with study.transaction():
        change = Change(study)
        stamp = now()
        given = sum(_give(change, v, code_number, coder, source, None, stamp) is not None for v in ids)
        change.commit(actor or coder, "assign", "verbatims", None, number=int(code_number), coder=coder,
                      source=source, verbatims=given)
    return given


def unassign(study: Study, verbatim_id: int, code_number: int, coder: str) -> bool:
    """Take a code off a verbatim (any source); True if it was there."""
    coder = _check_coder(coder)
    with study.transaction():
        code_id = _resolve(study, verbatim_id, code_number, assignable=False)
        change = Change(study)
        if not change.remove_assignment(verbatim_id, code_id, coder):
            return False
        change.commit(coder, "unassign", "verbatim", verbatim_id, number=int(code_number))
    return True


def toggle(study: Study, verbatim_id: int, code_number: int, coder: str) -> bool:
    """The desk's key press: add a missing code, accept a suggested one, remove a hand code. True if now held."""
    coder = _check_coder(coder)
    with study.transaction():
        code_id = _resolve(study, verbatim_id, code_number, assignable=False)
        existing = astore.get_assignment(study, verbatim_id, code_id, coder)
        if existing is not None and existing["source"] == "hand":
            unassign(study, verbatim_id, code_number, coder)
            return False
        assign(study, verbatim_id, code_number, coder)
    return True


def accept(study: Study, verbatim_id: int, code_number: int, coder: str) -> bool:
    """Turn a rule or machine suggestion the coder holds into the coder's hand code; False if none was there."""
    coder = _check_coder(coder)
    with study.transaction():
        code_id = _resolve(study, verbatim_id, code_number, assignable=False)
        existing = astore.get_assignment(study, verbatim_id, code_id, coder)
        if existing is None or existing["source"] == "hand":
            return False
        return assign(study, verbatim_id, code_number, coder)


def reject(study: Study, verbatim_id: int, code_number: int, coder: str) -> bool:
    """Remove a rule or machine suggestion (hand codes are removed with unassign); False if none was there."""
    coder = _check_coder(coder)
    with study.transaction():
        code_id = _resolve(study, verbatim_id, code_number, assignable=False)
        existing = astore.get_assignment(study, verbatim_id, code_id, coder)
        if existing is None:
            return False
        if existing["source"] == "hand":
            raise OpenCodeError(f"verbatim {verbatim_id}: code {code_number} is a hand code of {coder}, not a "
                                "suggestion; remove it with unassign")
        change = Change(study)
        change.remove_assignment(verbatim_id, code_id, coder)
        change.commit(coder, "reject", "verbatim", verbatim_id, number=int(code_number))
    return True


@dataclass(frozen=True)
class Suggestion:
    """A rule or machine suggestion of a code on a verbatim, whoever's run put it there (`owner`)."""

    number: int
    source: str
    confidence: float | None
    owner: str


def question_suggestions(study: Study, verbatim_id: int, coder: str, own_only: bool = False) -> list[Suggestion]:
    """The rule and machine suggestions a coder sees on a verbatim, most confident first.

    Suggestions belong to the question: the coder's own and those filed under any other name (the machine
    coder and keyword rules usually write them for `final`) count alike, one per code (the most confident),
    leaving out codes the coder already holds by hand. `own_only` keeps only the coder's own (the desk asks
    for that on verbatims the coder codes blind).
    """
    coder = _check_coder(coder)
    mine = codes_of(study, verbatim_id, coder)
    hand = {a.number for a in mine if a.source == "hand"}
    found: dict[int, Suggestion] = {}

    def offer(number: int, source: str, confidence: float | None, owner: str) -> None:
        if number in hand:
            return
        known = found.get(number)
        if known is None or (confidence or 0.0) > (known.confidence or 0.0):
            found[number] = Suggestion(number, source, confidence, owner)

    for a in mine:
        if a.source != "hand":
            offer(a.number, a.source, a.confidence, coder)
    if not own_only:
        owners = dict.fromkeys(other for other, _, source in dq.other_coders_codes(study, verbatim_id, coder)
                               if source != "hand")
        for owner in owners:
            for a in codes_of(study, verbatim_id, owner):
                if a.source != "hand":
                    offer(a.number, a.source, a.confidence, owner)
    return sorted(found.values(), key=lambda s: (-(s.confidence if s.confidence is not None else 0.0), s.number))


def reject_suggestion(study: Study, verbatim_id: int, code_number: int, coder: str) -> int:
    """Drop every rule or machine suggestion of one code on a verbatim, whoever's name it is filed under, as ONE
    change filed under `coder` (so their undo brings it back); hand codes are never touched. How many went."""
    coder = _check_coder(coder)
    with study.transaction():
        code_id = _resolve(study, verbatim_id, code_number, assignable=False)
        owners = [coder] + list(dict.fromkeys(
            other for other, number, source in dq.other_coders_codes(study, verbatim_id, coder)
            if number == int(code_number) and source != "hand"))
        change = Change(study)
        removed = 0
        for owner in owners:
            existing = astore.get_assignment(study, verbatim_id, code_id, owner)
            if existing is not None and existing["source"] != "hand":
                removed += change.remove_assignment(verbatim_id, code_id, owner)
        if removed:
            change.commit(coder, "reject", "verbatim", verbatim_id, number=int(code_number))
    return removed


def codes_of(study: Study, verbatim_id: int, coder: str, sources: tuple[str, ...] | None = None) -> list[AssignedCode]:
    """The codes a coder holds on one verbatim (optionally only some sources), by number."""
    rows = astore.codes_of_verbatim(study, verbatim_id, coder)
    return [AssignedCode(int(n), s, c) for n, s, c in rows if sources is None or s in sources]


def set_codes(study: Study, verbatim_id: int, numbers: list[int], coder: str) -> bool:
    """Make the coder's hand codes on a verbatim exactly `numbers` in one undoable step; True if changed."""
    coder = _check_coder(coder)
    with study.transaction():
        wanted = {int(n): _resolve(study, verbatim_id, n) for n in numbers}
        held = {a.number: a for a in codes_of(study, verbatim_id, coder)}
        change = Change(study)
        for number, code in held.items():
            if number not in wanted and code.source == "hand":
                change.remove_assignment(verbatim_id, _resolve(study, verbatim_id, number, False), coder)
        for number, code_id in wanted.items():
            if number not in held or held[number].source != "hand":
                change.put_assignment({"verbatim_id": verbatim_id, "code_id": code_id, "coder": coder,
                                       "source": "hand", "confidence": None, "created_at": now()})
        return change.commit(coder, "assign", "verbatim", verbatim_id, numbers=sorted(wanted)) is not None


def mark_done(study: Study, verbatim_id: int, coder: str, done: bool = True) -> bool:
    """Mark a verbatim finished for a coder (even with no code), or clear the mark; True if changed."""
    coder = _check_coder(coder)
    with study.transaction():
        if astore.verbatim_question(study, verbatim_id) is None:
            raise OpenCodeError(f"verbatim {verbatim_id}: no such verbatim in {study.path.name}")
        change = Change(study)
        change.set_mark(verbatim_id, coder, now() if done else None)
        return change.commit(coder, "mark" if done else "unmark", "verbatim", verbatim_id) is not None


def is_done(study: Study, verbatim_id: int, coder: str) -> bool:
    """Whether the coder marked the verbatim done."""
    return astore.get_mark(study, verbatim_id, coder) is not None


def set_note(study: Study, verbatim_id: int, coder: str, text: str | None) -> bool:
    """Set a coder's note on a verbatim (empty or None clears it); True if changed."""
    coder = _check_coder(coder)
    with study.transaction():
        if astore.verbatim_question(study, verbatim_id) is None:
            raise OpenCodeError(f"verbatim {verbatim_id}: no such verbatim in {study.path.name}")
        change = Change(study)
        change.set_note(verbatim_id, coder, text or None, now())
        return change.commit(coder, "note", "verbatim", verbatim_id) is not None


def note_of(study: Study, verbatim_id: int, coder: str) -> str | None:
    """A coder's note on a verbatim, or None."""
    return astore.get_note(study, verbatim_id, coder)


def code_counts(study: Study, question: str, coder: str, sources: tuple[str, ...] = ("hand",)) -> dict[int, int]:
    """Code number -> number of the question's verbatims the coder gave it (hand codes unless told)."""
    return astore.code_counts(study, survey_data.get_question(study, question).id, coder, sources)


def uncoded_ids(study: Study, question: str, coder: str, after: int | None = None, limit: int | None = None,
                include_nonanswers: bool = True) -> list[int]:
    """Ids of verbatims the coder has not coded (no hand code, not marked done), ascending from `after`."""
    question_id = survey_data.get_question(study, question).id
    return astore.uncoded_ids(study, question_id, coder, after, limit, include_nonanswers)


def assignments(study: Study, question: str, coders: list[str] | None = None,
                sources: tuple[str, ...] | None = None):
    """A question's assignments as a DataFrame: verbatim_id, number, coder, source, confidence, created_at."""
    return astore.assignments_table(study, survey_data.get_question(study, question).id, coders, sources)
