"""The desk's state and actions without any widget: which verbatim, which filter, counts, and the library calls.

Screens call these methods and redraw from the result; every method that changes codes goes through
opencode.coding (one committed transaction each) before it returns, so a killed terminal loses nothing.
Tests and the kill test drive a DeskSession directly, exactly as the screens do.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from opencode.coding import assignments as coding
from opencode.coding import frames, history, reliability
from opencode.coding.frames import Code, Frame
from opencode.errors import OpenCodeError, StudyBusy, WriteFailed
from opencode.study import assignments_store as astore
from opencode.study import desk_queries as dq
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.tui.search_spec import parse_search

#: Closed-ended variables shown beside a verbatim (at most this many, in file order).
MAX_CONTEXT = 8
#: The default "low confidence" bar for jumping between suggestions worth a second look.
DEFAULT_CONFIDENCE_BAR = 0.6


@dataclass
class Counts:
    """The coder's counts: hand codes per code number, verbatims per net, verbatims coded."""

    codes: dict[int, int] = field(default_factory=dict)
    nets: dict[int, int] = field(default_factory=dict)
    coded: int = 0


def is_locked(error: Exception) -> bool:
    """Whether a change failed for a reason worth a retry: the study is busy, or the write could not complete."""
    return isinstance(error, (StudyBusy, WriteFailed))


class DeskSession:
    """One coder at one question of one study: navigation, filters and coding actions."""

    def __init__(self, study_path: str | Path, question: str, coder: str, clock=time.monotonic):
        if not coder or not coder.strip():
            raise OpenCodeError("a coder name is needed (--coder, e.g. your initials)")
        self.study = Study.open(study_path)
        try:
            self.question = survey_data.get_question(self.study, question)
        except BaseException:
            self.study.close()
            raise
        self.coder = coder.strip()
        self.clock = clock
        self.started = clock()
        self.session_coded: set[int] = set()
        self.confidence_bar = DEFAULT_CONFIDENCE_BAR
        self.all_ids = dq.question_verbatim_ids(self.study, self.question.id)
        self.view = self.all_ids
        self.search: str | None = None  # what the view is limited to, in words (None: every verbatim)
        self.position = 0
        self._respondents = dq.respondent_row_ids(self.study)
        self._context = self._load_context()
        self.frame: Frame | None = None
        self.counts = Counts()
        self.reload_frame()
        self.refresh_counts()
        self.first_uncoded()

    def close(self) -> None:
        """Close the study file (everything was committed already)."""
        self.study.close()

    # -- the frame and counts --------------------------------------------------------------------------------
    def reload_frame(self) -> None:
        """Read the question's frame again (after an edit here or by someone else)."""
        try:
            self.frame = frames.load_frame(self.study, self.question.name)
        except OpenCodeError:
            self.frame = None  # no frame yet: the first added code creates it

    @property
    def codes(self) -> list[Code]:
        """The frame's codes and nets by number (retired ones included)."""
        return [] if self.frame is None else self.frame.codes

    def hotkeys(self) -> dict[str, int]:
        """Hotkey -> code number for the active codes (nets are not assigned by hand)."""
        return {c.hotkey: c.number for c in self.codes if c.hotkey and c.active and not c.is_net}

    def code(self, number: int) -> Code | None:
        """A code of the frame by number, or None."""
        return next((c for c in self.codes if c.number == number), None)

    def _nets_of(self, numbers: set[int]) -> set[int]:
        """The nets (one or two levels up) containing any of these code numbers."""
        by_number = {c.number: c for c in self.codes}
        found = set()
        for number in numbers:
            parent = by_number.get(number).net if number in by_number else None
            while parent is not None and parent not in found:
                found.add(parent)
                parent = by_number[parent].net if parent in by_number else None
        return found

    def refresh_counts(self) -> None:
        """Recount this coder's hand codes, net totals and coded verbatims from the study."""
        codes = coding.code_counts(self.study, self.question.name, self.coder)
        nets = {}
        if self.frame is not None:
            for net in (c for c in self.codes if c.is_net):
                leaves = [c.number for c in self.frame.leaves_under(net.number)]
                nets[net.number] = self._verbatims_holding(leaves)
        self.counts = Counts(codes, nets, int(astore.coded_verbatim_ids(self.study, self.question.id, self.coder).size))

    def _verbatims_holding(self, numbers: list[int]) -> int:
        ids = [c.id for c in self.codes if c.number in numbers]
        return dq.verbatims_holding(self.study, self.question.id, self.coder, ids) if ids else 0

    # -- where we are ----------------------------------------------------------------------------------------
    @property
    def total(self) -> int:
        """Verbatims of the question."""
        return int(self.all_ids.size)

    @property
    def current_id(self) -> int | None:
        """The verbatim on the desk, or None when the view is empty."""
        if self.view.size == 0:
            return None
        self.position = min(max(self.position, 0), self.view.size - 1)
        return int(self.view[self.position])

    def card(self) -> dq.VerbatimCard | None:
        """The verbatim on the desk."""
        vid = self.current_id
        return None if vid is None else dq.verbatim_card(self.study, vid)

    def held(self) -> list[coding.AssignedCode]:
        """Codes this coder holds on the current verbatim (hand codes and suggestions)."""
        vid = self.current_id
        return [] if vid is None else coding.codes_of(self.study, vid, self.coder)

    def suggestions(self) -> list[coding.AssignedCode]:
        """Rule and machine suggestions on the current verbatim, most confident first."""
        found = [a for a in self.held() if a.source != "hand"]
        return sorted(found, key=lambda a: (-(a.confidence if a.confidence is not None else 0.0), a.number))

    def is_done(self) -> bool:
        """Whether this coder marked the current verbatim done."""
        vid = self.current_id
        return vid is not None and coding.is_done(self.study, vid, self.coder)

    def note(self) -> str | None:
        """This coder's note on the current verbatim."""
        vid = self.current_id
        return None if vid is None else coding.note_of(self.study, vid, self.coder)

    def others(self) -> list[tuple[str, int, str]]:
        """Other coders' codes on the current verbatim (seen after a refresh); hidden while it is in one of
        this coder's reliability samples, so double coding stays blind."""
        vid = self.current_id
        if vid is None or reliability.is_blind(self.study, self.question.name, self.coder, vid):
            return []
        return dq.other_coders_codes(self.study, vid, self.coder)

    def context(self) -> list[tuple[str, str]]:
        """(variable name, answer label) of the respondent's closed-ended answers."""
        card = self.card()
        if card is None:
            return []
        row = int(np.searchsorted(self._respondents, card.respondent_id))
        if row >= self._respondents.size or self._respondents[row] != card.respondent_id:
            return []
        return [(variable.name, _answer(variable, values[row])) for variable, values in self._context]

    def _load_context(self) -> list[tuple[survey_data.Variable, object]]:
        shown = [v for v in survey_data.list_variables(self.study)
                 if v.role in ("outcome", "banner", "other") and v.kind in ("single", "multiple", "numeric")
                 and v.origin == "import"][:MAX_CONTEXT]
        return [(v, survey_data.raw_values(self.study, v.name)) for v in shown]

    def pace(self) -> float | None:
        """Verbatims coded in this session per hour (None in the first minute, when it means little)."""
        seconds = self.clock() - self.started
        if seconds < 60:
            return None
        return len(self.session_coded) / (seconds / 3600.0)

    # -- moving ----------------------------------------------------------------------------------------------
    def move(self, step: int) -> None:
        """Go forward or back in the current view."""
        if self.view.size:
            self.position = min(max(self.position + step, 0), self.view.size - 1)

    def go_first(self) -> None:
        """The first verbatim of the view."""
        self.position = 0

    def go_last(self) -> None:
        """The last verbatim of the view."""
        self.position = max(self.view.size - 1, 0)

    def go_to_id(self, verbatim_id: int) -> None:
        """Show a verbatim; leaves a filter that does not hold it."""
        if not _holds(self.view, verbatim_id):
            self.clear_search()
        self.position = int(np.searchsorted(self.view, verbatim_id))

    def first_uncoded(self) -> bool:
        """Go to this coder's first uncoded verbatim (leaving any search); False if every one is coded."""
        first = coding.uncoded_ids(self.study, self.question.name, self.coder, limit=1)
        if first:
            self.go_to_id(first[0])
        return bool(first)

    def next_uncoded(self) -> bool:
        """Go to the next verbatim this coder has not coded (wrapping to the start); False if none is left."""
        current = self.current_id
        if self.search is not None:
            uncoded = np.array(coding.uncoded_ids(self.study, self.question.name, self.coder), dtype=np.int64)
            left = self.view[np.isin(self.view, uncoded)]
            if left.size == 0:
                return False
            later = left[left > (current if current is not None else -1)]
            self.go_to_id(int(later[0] if later.size else left[0]))
            return True
        after = coding.uncoded_ids(self.study, self.question.name, self.coder, after=current, limit=1)
        if not after:
            after = coding.uncoded_ids(self.study, self.question.name, self.coder, limit=1)
        if not after:
            return False
        self.go_to_id(after[0])
        return True

    def next_low_confidence(self, forward: bool = True) -> bool:
        """Go to the next verbatim with a suggestion below the confidence bar; False if there is none."""
        current = self.current_id if self.current_id is not None else (-1 if forward else 2**62)
        found = dq.suggestion_below(self.study, self.question.id, self.coder, self.confidence_bar, current, forward)
        if found is None:
            return False
        self.go_to_id(found)
        return True

    def go_to_respondent(self, key: str) -> bool:
        """Show a respondent's verbatim by the survey's respondent id; False if they gave none."""
        found = dq.verbatim_of_respondent(self.study, self.question.id, key)
        if found is None:
            return False
        self.go_to_id(found)
        return True

    # -- search ----------------------------------------------------------------------------------------------
    def apply_search(self, text: str) -> int:
        """Limit the view to verbatims matching a search (see search_spec); returns how many match."""
        spec = parse_search(text)
        code_id = None
        if spec.code is not None:
            code = self.code(spec.code)
            if code is None:
                raise OpenCodeError(f"search: the frame has no code {spec.code}")
            code_id = code.id
        respondents = None
        for name, value in spec.values:
            name = _question_variable(self.study, self.question.name, name)
            chosen = _respondents_with(self.study, self._respondents, name, value)
            respondents = chosen if respondents is None else np.intersect1d(respondents, chosen)
        found = dq.search_ids(self.study, self.question.id, text=spec.text or None, code_id=code_id,
                              coder=self.coder, uncoded=spec.uncoded, respondent_ids=respondents,
                              nonanswer=spec.nonanswer)
        if found.size == 0:
            return 0
        self.show_ids(found, spec.describe())
        return int(found.size)

    def show_ids(self, ids: np.ndarray, label: str) -> None:
        """Limit the view to these verbatim ids (ascending), described by `label`; stays near the current one."""
        current = self.current_id
        self.search, self.view = label, np.asarray(ids, dtype=np.int64)
        self.position = int(np.searchsorted(self.view, current)) if current is not None else 0

    def clear_search(self) -> None:
        """Back to every verbatim, staying on the one shown."""
        current = self.current_id
        self.search, self.view = None, self.all_ids
        if current is not None:
            self.position = int(np.searchsorted(self.view, current))

    # -- coding (each call is one committed transaction) -----------------------------------------------------
    def _coded_now(self, vid: int) -> bool:
        return coding.is_done(self.study, vid, self.coder) or any(
            a.source == "hand" for a in coding.codes_of(self.study, vid, self.coder))

    def _track(self, vid: int, before_numbers: set[int], was_coded: bool) -> None:
        """Update counts for one verbatim after a change (no full recount on every key)."""
        after = {a.number for a in coding.codes_of(self.study, vid, self.coder, sources=("hand",))}
        for number in before_numbers - after:
            self.counts.codes[number] = self.counts.codes.get(number, 0) - 1
        for number in after - before_numbers:
            self.counts.codes[number] = self.counts.codes.get(number, 0) + 1
        nets_before, nets_after = self._nets_of(before_numbers), self._nets_of(after)
        for net in nets_before - nets_after:
            self.counts.nets[net] = self.counts.nets.get(net, 0) - 1
        for net in nets_after - nets_before:
            self.counts.nets[net] = self.counts.nets.get(net, 0) + 1
        coded = self._coded_now(vid)
        if coded != was_coded:
            self.counts.coded += 1 if coded else -1
        if coded and not was_coded:
            self.session_coded.add(vid)

    def _change(self, action) -> object:
        vid = self.current_id
        if vid is None:
            raise OpenCodeError("there is no verbatim to code here")
        before = {a.number for a in coding.codes_of(self.study, vid, self.coder, sources=("hand",))}
        was_coded = self._coded_now(vid)
        result = action(vid)
        self._track(vid, before, was_coded)
        return result

    def toggle_hotkey(self, key: str) -> tuple[int, bool] | None:
        """Toggle the code behind a hotkey: (code number, now held), or None if no code has that key."""
        number = self.hotkeys().get(key)
        if number is None:
            return None
        return number, self.toggle(number)

    def toggle(self, number: int) -> bool:
        """Add, accept or remove one code on the current verbatim; True if it is now held."""
        return bool(self._change(lambda vid: coding.toggle(self.study, vid, number, self.coder)))

    def mark_done(self, done: bool = True) -> bool:
        """Mark the current verbatim done (also with no code: reviewed); True if that changed anything."""
        return bool(self._change(lambda vid: coding.mark_done(self.study, vid, self.coder, done)))

    def accept_top(self) -> int | None:
        """Accept the most confident suggestion here; its code number, or None when there is none."""
        found = self.suggestions()
        if not found:
            return None
        self._change(lambda vid: coding.accept(self.study, vid, found[0].number, self.coder))
        return found[0].number

    def accept_all(self) -> list[int]:
        """Accept every suggestion on the current verbatim in one undoable step; the code numbers."""
        found = self.suggestions()
        if not found:
            return []
        numbers = [a.number for a in self.held() if a.source == "hand"] + [a.number for a in found]
        self._change(lambda vid: coding.set_codes(self.study, vid, numbers, self.coder))
        return [a.number for a in found]

    def reject_top(self) -> int | None:
        """Reject the most confident suggestion here; its code number, or None when there is none."""
        found = self.suggestions()
        if not found:
            return None
        self._change(lambda vid: coding.reject(self.study, vid, found[0].number, self.coder))
        return found[0].number

    def set_note(self, text: str) -> bool:
        """Set (or with empty text clear) this coder's note on the current verbatim."""
        vid = self.current_id
        if vid is None:
            raise OpenCodeError("there is no verbatim to write a note on")
        return coding.set_note(self.study, vid, self.coder, text.strip() or None)

    def add_code(self, label: str, hotkey: str | None = None, net: int | None = None,
                 assign_here: bool = True, kind: str = "code") -> Code:
        """Add a code to the frame without leaving the desk (and give it to the current verbatim)."""
        code = frames.add_code(self.study, self.question.name, label, hotkey=hotkey or None, net=net,
                               kind=kind, actor=self.coder)
        self.reload_frame()
        if assign_here and kind == "code" and self.current_id is not None:
            self.toggle(code.number)
        return code

    def bulk_assign(self, verbatim_ids: list[int], number: int) -> int:
        """Give one code as this coder's hand code to many verbatims as one undoable step; how many got it."""
        given = coding.assign_many(self.study, verbatim_ids, number, self.coder)
        self.refresh_counts()
        return given

    def undo(self) -> str | None:
        """Undo this coder's newest change; the action undone, or None."""
        return self._history(history.undo)

    def redo(self) -> str | None:
        """Redo the change this coder undid last; the action redone, or None."""
        return self._history(history.redo)

    def _history(self, step) -> str | None:
        action = step(self.study, self.coder)
        if action is not None:
            self.reload_frame()
            self.refresh_counts()
        return action

    def refresh(self) -> None:
        """See everyone's latest changes: the frame, counts and the verbatim list."""
        self.reload_frame()
        self.refresh_counts()
        current = self.current_id
        self.all_ids = dq.question_verbatim_ids(self.study, self.question.id)
        if self.search is None:
            self.view = self.all_ids
            if current is not None:
                self.position = int(np.searchsorted(self.view, current))


def _holds(sorted_ids: np.ndarray, value: int) -> bool:
    """Whether an ascending id array contains a value."""
    i = int(np.searchsorted(sorted_ids, value))
    return i < sorted_ids.size and int(sorted_ids[i]) == int(value)


def _answer(variable: survey_data.Variable, value) -> str:
    """A closed-ended value as its label ("-" when empty)."""
    if value is None:
        return "-"
    if isinstance(value, (list, tuple)):
        return ", ".join(variable.display(float(v)) for v in value) or "-"
    if isinstance(value, float) and np.isnan(value):
        return "-"
    try:
        return variable.display(float(value))
    except (TypeError, ValueError):
        return str(value)


def _question_variable(study: Study, question: str, name: str) -> str:
    """A search name as a variable: itself, or the question's own variable of that name (e.g. `sentiment`
    for `<question>_sentiment`) when no survey variable is called so."""
    names = {v.name for v in survey_data.list_variables(study)}
    return f"{question}_{name}" if name not in names and f"{question}_{name}" in names else name


def _respondents_with(study: Study, respondent_rows: np.ndarray, name: str, wanted: str) -> np.ndarray:
    """Respondent row ids whose closed-ended answer to `name` is `wanted` (a code or a value label)."""
    variable = survey_data.get_variable(study, name)
    if variable.kind not in ("single", "multiple", "numeric"):
        raise OpenCodeError(f"search: {name!r} is a {variable.kind} variable; search by single, multiple or "
                            "numeric answers")
    code = _code_of(variable, wanted)
    values = survey_data.raw_values(study, name)
    if variable.kind == "multiple":
        mask = np.array([bool(v) and code in {float(c) for c in v} for v in values], dtype=bool)
    else:
        mask = np.asarray(values, dtype=float) == code
    return respondent_rows[mask[:respondent_rows.size]]


def _code_of(variable: survey_data.Variable, wanted: str) -> float:
    """The code a search value names: a number, or a value label (case ignored)."""
    text = wanted.strip()
    for code, label in variable.value_labels.items():
        if label.casefold() == text.casefold():
            return float(code)
    try:
        return float(text)
    except ValueError:
        labels = "; ".join(variable.value_labels.values()) or "(no labels)"
        raise OpenCodeError(f"search: {variable.name} has no answer {wanted!r} (answers: {labels})") from None
