"""The coding desk driven through Textual's test pilot; every check reads the study file through a second connection.

Async scenarios run inside plain test functions with asyncio.run (no async pytest plugin needed).
"""

from __future__ import annotations

import asyncio
import sqlite3
from pathlib import Path

import pytest

from opencode.coding import assignments as coding
from opencode.coding import frames
from opencode.errors import OpenCodeError
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study import theme_runs_store
from opencode.study.store import Study
from opencode.study.survey_data import get_question
from opencode.tui.screens.modals import AddCodeModal, HelpModal, LockedModal, PromptModal
from opencode.tui.search_spec import parse_search
from opencode.tui.session import DeskSession

from helpers import make_app, make_desk_study, on_disk


@pytest.fixture
def study_path(tmp_path: Path) -> Path:
    return make_desk_study(tmp_path)


def hand_codes(path: Path, respondent: str, coder: str = "ash") -> list[int]:
    return [r[0] for r in on_disk(
        path, "SELECT c.number FROM assignments a JOIN codes c ON c.id = a.code_id JOIN verbatims v "
        "ON v.id = a.verbatim_id JOIN respondents r ON r.id = v.respondent_id "
        "WHERE r.key = ? AND a.coder = ? AND a.source = 'hand' ORDER BY c.number", (respondent, coder))]


def run(scenario) -> None:
    asyncio.run(scenario())


async def type_text(pilot, text: str) -> None:
    await pilot.press(*["space" if ch == " " else ch for ch in text])


def status(app) -> str:
    return str(app.screen.query_one("#status").render())


# -- coding keys -------------------------------------------------------------------------------------------------
def test_hotkey_assigns_and_removes_committed(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            assert app.session.card().respondent == "A1"
            await pilot.press("s")
            assert hand_codes(study_path, "A1") == [1]
            await pilot.press("h")
            assert hand_codes(study_path, "A1") == [1, 3]
            assert app.session.counts.codes == {1: 1, 3: 1}
            assert app.session.counts.nets == {90: 1}
            await pilot.press("s")
            assert hand_codes(study_path, "A1") == [3]
            assert app.session.counts.nets == {90: 0}
            await pilot.press("x")  # no code has x
            assert "no code has the key 'x'" in status(app)
            assert hand_codes(study_path, "A1") == [3]
    run(scenario)


def test_undo_redo_go_through_the_study(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("s", "j")
            assert hand_codes(study_path, "A1") == [1, 2]
            await pilot.press("ctrl+z")
            assert hand_codes(study_path, "A1") == [1]
            await pilot.press("ctrl+z")
            assert hand_codes(study_path, "A1") == []
            assert app.session.counts.coded == 0
            await pilot.press("ctrl+y")
            assert hand_codes(study_path, "A1") == [1]
            assert app.session.counts.coded == 1
            await pilot.press("ctrl+z", "ctrl+z", "ctrl+z")
            assert "nothing to undo" in status(app)
    run(scenario)


def test_enter_marks_done_and_moves_to_next_uncoded(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("enter")  # A1 reviewed with no code
            assert on_disk(study_path, "SELECT COUNT(*) FROM coded_marks WHERE coder = 'ash'") == [(1,)]
            assert app.session.card().respondent == "A2"
            await pilot.press("right", "h")  # code A3 by hand: it is coded now
            await pilot.press("left")
            assert app.session.card().respondent == "A2"
            await pilot.press("enter")
            assert app.session.card().respondent == "A4"  # A3 is coded, so it is skipped
            await pilot.press("space")
            assert app.session.card().respondent == "A5"
            await pilot.press("home")
            assert app.session.card().respondent == "A1"
            await pilot.press("end")
            assert app.session.card().respondent == "A5"
            assert app.session.counts.coded == 3
    run(scenario)


def test_search_text_code_and_closed_ended_value(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("slash")
            assert isinstance(app.screen, PromptModal)
            await type_text(pilot, "staff")
            await pilot.press("enter")
            assert app.session.view.size == 2
            assert "2 found" in status(app)
            await pilot.press("right")
            assert app.session.card().respondent == "A4"
            await pilot.press("right")  # stays inside the results
            assert app.session.card().respondent == "A4"
            await pilot.press("escape")
            assert app.session.view.size == 5 and app.session.card().respondent == "A4"

            await pilot.press("ctrl+f")
            await type_text(pilot, "support=5")
            await pilot.press("enter")
            assert [app.session.card().respondent] == ["A2"] and app.session.view.size == 1
            await pilot.press("escape", "home", "s")
            await pilot.press("slash")
            await type_text(pilot, "#1")
            await pilot.press("enter")
            assert app.session.view.tolist() == [1]
            await pilot.press("escape", "slash")
            await type_text(pilot, "uncoded answered")
            await pilot.press("enter")
            assert app.session.view.size == 3  # A2, A4, A5: A1 coded, A3 a non-answer
            await pilot.press("escape", "slash")
            await type_text(pilot, 'support="strongly')  # an unclosed quote is explained, not a crash
            await pilot.press("enter")
            assert "close the quote" in status(app)
            await pilot.press("slash")
            await type_text(pilot, "zebra")
            await pilot.press("enter")
            assert "nothing matches" in status(app) and app.session.view.size == 5
    run(scenario)


def test_add_code_without_leaving_the_desk(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("right", "ctrl+o")
            assert isinstance(app.screen, AddCodeModal)
            await type_text(pilot, "Helps students")
            await pilot.press("tab", "t", "tab")
            await pilot.press("enter")
            assert not isinstance(app.screen, AddCodeModal)
            with Study.open(study_path) as study:
                code = frames.get_code(study, "why", 91)
                assert (code.label, code.hotkey) == ("Helps students", "t")
            assert hand_codes(study_path, "A2") == [91]
            await pilot.press("t")
            assert hand_codes(study_path, "A2") == []
            await pilot.press("ctrl+o")
            await type_text(pilot, "Duplicate key")
            await pilot.press("tab", "s", "enter")  # s is taken: a clear message, nothing written
            assert "already used by code 1" in status(app)
            assert on_disk(study_path, "SELECT COUNT(*) FROM codes WHERE label = 'Duplicate key'") == [(0,)]
    run(scenario)


def test_suggestions_accept_reject_and_unsure_jump(study_path):
    with Study.open(study_path) as study:
        coding.assign(study, 2, 3, "ash", source="machine", confidence=0.9)
        coding.assign(study, 2, 1, "ash", source="machine", confidence=0.3)
        coding.assign(study, 4, 2, "ash", source="machine", confidence=0.4)
        coding.assign(study, 5, 3, "ash", source="machine", confidence=0.95)

    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("down")  # next suggestion below 60%
            assert app.session.card().respondent == "A2"
            assert [s.number for s in app.session.suggestions()] == [3, 1]
            await pilot.press("ctrl+k")  # accept the most confident
            assert hand_codes(study_path, "A2") == [3]
            await pilot.press("ctrl+x")  # reject the next
            assert on_disk(study_path, "SELECT COUNT(*) FROM assignments WHERE verbatim_id = 2 AND coder = 'ash'") \
                == [(1,)]
            await pilot.press("down")
            assert app.session.card().respondent == "A4"
            await pilot.press("j")  # the hotkey of a suggested code accepts it
            assert hand_codes(study_path, "A4") == [2]
            await pilot.press("down")
            assert "no suggestion below 60%" in status(app)
            await pilot.press("end", "ctrl+a")
            assert hand_codes(study_path, "A5") == [3]
            await pilot.press("ctrl+z")  # accept-all is one step
            assert hand_codes(study_path, "A5") == []
            assert on_disk(study_path, "SELECT source FROM assignments WHERE verbatim_id = 5") == [("machine",)]
    run(scenario)


def test_note_and_go_to_respondent(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("ctrl+g")
            await type_text(pilot, "A4")
            await pilot.press("enter")
            assert app.session.card().respondent == "A4"
            await pilot.press("ctrl+n")
            await type_text(pilot, "two reasons")
            await pilot.press("enter")
            assert on_disk(study_path, "SELECT text FROM notes WHERE coder = 'ash' AND verbatim_id = 4") == \
                [("two reasons",)]
            await pilot.press("ctrl+g")
            await type_text(pilot, "ZZ9")
            await pilot.press("enter")
            assert "'ZZ9' gave no answer" in status(app)
            assert app.session.card().respondent == "A4"
    run(scenario)


def test_two_coders_on_one_file_see_each_other(study_path):
    async def scenario():
        ash, bryn = make_app(study_path, "ash"), make_app(study_path, "bryn")
        async with ash.run_test(size=(100, 30)) as pa, bryn.run_test(size=(100, 30)) as pb:
            await pa.press("s")
            await pb.press("h")
            assert hand_codes(study_path, "A1", "ash") == [1]
            assert hand_codes(study_path, "A1", "bryn") == [3]
            await pb.press("ctrl+r")
            assert bryn.session.others() == [("ash", 1, "hand")]
            assert "ash 1" in str(bryn.screen.query_one("#note").render())
            await pa.press("ctrl+z")  # undo is per coder: bryn's code stays
            assert hand_codes(study_path, "A1", "bryn") == [3]
            assert hand_codes(study_path, "A1", "ash") == []
    run(scenario)


def test_locked_study_offers_retry_and_loses_nothing(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            app.session.study._db.execute("PRAGMA busy_timeout = 50")
            blocker = sqlite3.connect(study_path, isolation_level=None)
            blocker.execute("BEGIN IMMEDIATE")
            await pilot.press("s")
            await pilot.pause()
            assert isinstance(app.screen, LockedModal)
            assert hand_codes(study_path, "A1") == []
            await pilot.press("enter")  # still locked: asked again
            await pilot.pause()
            assert isinstance(app.screen, LockedModal)
            blocker.execute("ROLLBACK")
            blocker.close()
            await pilot.press("r")
            await pilot.pause()
            assert not isinstance(app.screen, LockedModal)
            assert hand_codes(study_path, "A1") == [1]
    run(scenario)


def test_highlight_marks_rule_words(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await app.workers.wait_for_complete()
            await pilot.pause()
            desk = app.screen
            text = app.session.card().text
            spans = desk._spans(text)
            assert [text[a:b] for a, b in spans] == ["safe", "night"]
            shown = desk.query_one("#verbatim").render()
            marked = [shown.plain[span.start:span.end] for span in shown.spans if "underline" in str(span.style)]
            assert marked == ["safe", "night"]
    run(scenario)


def test_help_lists_every_key_and_hotkey(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            desk_bindings = [b.description for b in app.screen.BINDINGS]
            await pilot.press("f1")
            assert isinstance(app.screen, HelpModal)
            described = [what for _, what in app.screen.rows]
            for description in desk_bindings + ["1 Not safe without staff", "2 Staff jobs", "3 Convenient hours"]:
                assert description in described
            await pilot.press("escape", "question_mark")
            assert isinstance(app.screen, HelpModal)
            await pilot.press("escape")
            titles = [c.title for c in app.get_system_commands(app.screen)]
            assert "Desk: set the confidence bar" in titles and "Open the frame screen" in titles
    run(scenario)


def test_frame_screen_edits_label_hotkey_retire_and_merge(study_path):
    with Study.open(study_path) as study:
        coding.assign(study, 1, 2, "bryn")

    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("f3")
            assert app.screen.name == "frame"
            await pilot.press("down")  # rows go by number: 1, 2, 3, 90
            code = app.screen.current()
            assert code.number == 2
            await pilot.press("e", "ctrl+u")
            await type_text(pilot, "Jobs cut")
            await pilot.press("enter")
            with Study.open(study_path) as study:
                assert frames.get_code(study, "why", 2).label == "Jobs cut"
            await pilot.press("k", "backspace", "b", "enter")
            with Study.open(study_path) as study:
                assert frames.get_code(study, "why", 2).hotkey == "b"
            await pilot.press("r")
            with Study.open(study_path) as study:
                assert frames.get_code(study, "why", 2).active is False
            await pilot.press("r", "m", "1", "enter", "enter")  # restore, then merge 2 into 1 after review
            with Study.open(study_path) as study:
                assert [c.number for c in frames.load_frame(study, "why").codes] == [1, 3, 90]
            assert hand_codes(study_path, "A1", "bryn") == [1]
            await pilot.press("ctrl+z")  # the merge is undone under ash's name
            with Study.open(study_path) as study:
                assert [c.number for c in frames.load_frame(study, "why").codes] == [1, 2, 3, 90]
            await pilot.press("escape")
            assert app.screen.name == "desk"
            await pilot.press("b")  # the new hotkey works on the desk at once
            assert hand_codes(study_path, "A1") == [2]
    run(scenario)


def test_compare_takes_left_right_and_union_into_final(study_path):
    with Study.open(study_path) as study:
        coding.set_codes(study, 1, [1], "ash")
        coding.set_codes(study, 1, [1, 2], "bryn")
        coding.set_codes(study, 2, [3], "ash")
        coding.set_codes(study, 2, [3], "bryn")
        coding.set_codes(study, 4, [2], "ash")
        coding.set_codes(study, 4, [1], "bryn")

    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("f6")
            assert app.screen.name == "compare"
            assert app.screen.ids == [1, 4]  # they agree on A2
            await pilot.press("l")
            assert hand_codes(study_path, "A1", "final") == [1]
            await pilot.press("r")
            assert hand_codes(study_path, "A1", "final") == [1, 2]
            await pilot.press("right", "u")
            assert hand_codes(study_path, "A4", "final") == [1, 2]
            await pilot.press("ctrl+z")
            assert hand_codes(study_path, "A4", "final") == []
    run(scenario)


# -- the session and the search line without the screen -----------------------------------------------------------
def test_search_spec_parses_filters_and_rejects_bad_lines():
    spec = parse_search('late night #4 uncoded age_band="65 or over" blank')
    assert spec.text == "late night" and spec.code == 4 and spec.uncoded and spec.nonanswer is True
    assert spec.values == (("age_band", "65 or over"),)
    for bad, message in (("", "type words"), ("#x", "not a code number"), ("support=", "needs a value"),
                         ('"open', "close the quote")):
        with pytest.raises(OpenCodeError, match=message):
            parse_search(bad)


def test_session_bad_inputs_name_the_problem(study_path, tmp_path):
    with pytest.raises(OpenCodeError, match="no open question named 'nope'"):
        DeskSession(study_path, "nope", "ash")
    with pytest.raises(OpenCodeError, match="coder name"):
        DeskSession(study_path, "why", "  ")
    with pytest.raises(OpenCodeError, match="no such study file"):
        DeskSession(tmp_path / "missing.study", "why", "ash")
    session = DeskSession(study_path, "why", "ash")
    try:
        with pytest.raises(OpenCodeError, match="no answer 'maybe'"):
            session.apply_search("support=maybe")
        with pytest.raises(OpenCodeError, match="no variable named 'colour'"):
            session.apply_search("colour=3")
        with pytest.raises(OpenCodeError, match="no code 7"):
            session.apply_search("#7")
        assert session.toggle_hotkey("q") is None
    finally:
        session.close()


def test_context_shows_value_labels(tmp_path):
    csv = tmp_path / "s.csv"
    csv.write_text("rid,why,support\nB1,fine,1\nB2,bad,2\n", encoding="utf-8")
    labels = tmp_path / "labels.csv"
    labels.write_text("variable,label,code,value_label,missing\nsupport,Support,1,oppose,\nsupport,Support,2,support,\n",
                      encoding="utf-8")
    import_survey(tmp_path / "l.study", csv, ImportOptions("rid", ["why"], labels_file=str(labels)))
    session = DeskSession(tmp_path / "l.study", "why", "ash")
    try:
        assert session.context() == [("support", "oppose")]
        session.move(1)
        assert session.context() == [("support", "support")]
        assert session.apply_search("support=Support") == 1
    finally:
        session.close()


def test_terms_screen_codes_a_term_in_bulk_after_review(study_path):
    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("f4")
            await app.workers.wait_for_complete()
            await pilot.pause()
            screen = app.screen
            assert screen.selected().term == "staff"  # in two verbatims, the most of any term
            assert "Staff jobs" in str(screen.query_one("#kwic").render())
            await pilot.press("c", "2", "enter")
            assert "Review" in str(app.screen.query_one(".dialog-title").render())
            assert hand_codes(study_path, "A1") == []  # nothing before the review is confirmed
            await pilot.press("enter")
            assert hand_codes(study_path, "A1") == [2] and hand_codes(study_path, "A4") == [2]
            await pilot.press("f")  # show the term's verbatims on the desk
            assert app.screen.name == "desk" and app.session.view.size == 2
    run(scenario)


def test_themes_screen_promotes_a_theme_to_a_draft_code(study_path):
    summary = {"themes": [{"label": "", "top_terms": ["staff", "night", "safe", "help", "cut"], "n_dominant": 2}]}
    with Study.open(study_path) as study:
        theme_runs_store.save_run(study, get_question(study, "why").id, "nmf", 1, {}, summary, {})

    async def scenario():
        app = make_app(study_path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("f5", "tab", "p")
            assert isinstance(app.screen, PromptModal)
            await pilot.press("enter")
            with Study.open(study_path) as study:
                code = frames.get_code(study, "why", 91)  # one past the highest number
                assert code.label == "staff / night / safe"  # the top terms as they are
                assert code.rule == "staff OR night OR safe OR help"
                assert "theme run" in code.description
    run(scenario)


def test_no_color_terminal_still_codes(study_path, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")

    async def scenario():
        app = make_app(study_path)
        assert app.no_color  # Textual drops colour itself; rule words stay bold and underlined
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.press("s", "enter")
            assert hand_codes(study_path, "A1") == [1]
            assert app.session.card().respondent == "A2"
    run(scenario)
