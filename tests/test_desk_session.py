"""The library calls behind the desk, without the screen: suggestions for the question, rejecting them for
everyone, what an undo is about to change, and non-answers held back from the served verbatims."""

from __future__ import annotations

import pytest

from opencode.coding import assignments as coding
from opencode.coding import history
from opencode.errors import OpenCodeError
from opencode.study.store import Study
from opencode.tui.session import DeskSession

from helpers import make_desk_study, on_disk


@pytest.fixture
def path(tmp_path):
    return make_desk_study(tmp_path)


def test_question_suggestions_merge_owners_and_leave_out_hand_codes(path):
    with Study.open(path) as study:
        coding.assign(study, 1, 3, "final", source="machine", confidence=0.4)
        coding.assign(study, 1, 3, "ml2", source="machine", confidence=0.7)  # the same code, more confident
        coding.assign(study, 1, 1, "final", source="rule")
        coding.assign(study, 1, 2, "ash", source="machine", confidence=0.2)
        coding.assign(study, 1, 2, "bryn")  # a hand code of someone else is no suggestion
        found = coding.question_suggestions(study, 1, "ash")
        assert [(s.number, s.source, s.confidence, s.owner) for s in found] == [  # rules carry no confidence: last
            (3, "machine", 0.7, "ml2"), (2, "machine", 0.2, "ash"), (1, "rule", None, "final")]
        assert [s.number for s in coding.question_suggestions(study, 1, "ash", own_only=True)] == [2]
        coding.assign(study, 1, 3, "ash")  # ash takes code 3 by hand: no longer suggested to ash
        assert [s.number for s in coding.question_suggestions(study, 1, "ash")] == [2, 1]
        assert [s.number for s in coding.question_suggestions(study, 1, "cai")] == [3, 2, 1]


def test_reject_suggestion_removes_it_for_everyone_and_undo_brings_it_back(path):
    with Study.open(path) as study:
        coding.assign(study, 2, 3, "final", source="machine", confidence=0.4)
        coding.assign(study, 2, 3, "ash", source="rule")
        coding.assign(study, 2, 3, "bryn")
        before = on_disk(path, "SELECT verbatim_id, code_id, coder, source, confidence FROM assignments ORDER BY coder")
        assert coding.reject_suggestion(study, 2, 3, "ash") == 2
        left = on_disk(path, "SELECT coder, source FROM assignments WHERE verbatim_id = 2")
        assert left == [("bryn", "hand")]  # hand codes are never touched
        summary = history.next_undo(study, "ash")
        assert (summary.action, summary.verbatim_ids, summary.numbers) == ("reject", (2,), (3,))
        assert history.undo(study, "ash") == "reject"
        assert on_disk(path, "SELECT verbatim_id, code_id, coder, source, confidence FROM assignments "
                             "ORDER BY coder") == before
        assert coding.reject_suggestion(study, 2, 1, "ash") == 0  # nothing to reject: nothing filed
        with pytest.raises(OpenCodeError, match="no code 77"):
            coding.reject_suggestion(study, 2, 77, "ash")


def test_session_serves_answered_verbatims_and_counts_progress_over_them(path):
    session = DeskSession(path, "why", "ash")
    try:
        assert session.view.tolist() == [1, 2, 4, 5] and session.total == 4
        session.toggle(1)
        assert session.counts.coded == 1
        assert session.go_to_respondent("A3")  # a non-answer: shown on request, and said so
        assert session.show_nonanswers and session.card().respondent == "A3"
        session.toggle(3)  # coding a non-answer does not count in progress
        assert session.counts.coded == 1
        session.set_show_nonanswers(False)
        assert session.view.tolist() == [1, 2, 4, 5]
        undone = session.undo()
        assert undone.describe() == "assign of 3 Convenient hours on respondent A3"
        redone = session.redo()
        assert redone.describe() == "assign of 3 Convenient hours on respondent A3"
        assert session.undo() is not None and session.undo() is not None and session.undo() is None
    finally:
        session.close()
