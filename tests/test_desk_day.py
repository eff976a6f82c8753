"""A coder's day and a lead's adjudication, through Textual's pilot at 80x24: full labels, code notes, non-answers
held back, suggestions for every coder, messages that follow the verbatim, other coders' codes with labels,
compare that settles in order, the terms screen's drivers in a child process, and our own themes only.

Every check of a change reads the study file through a second connection.
"""

from __future__ import annotations

import asyncio

from opencode.coding import assignments as coding
from opencode.coding import frames, reliability
from opencode.study.store import Study
from opencode.tui.app import DeskApp
from opencode.tui.session import DeskSession
from opencode.tui.themes import THEMES

from helpers import make_app, make_desk_study, on_disk, screen_text, wait_for
from test_desk_drivers import make_study as make_drivers_study

SIZE = (80, 24)
LONG = "Good for children and families with young kids who need somewhere warm after school"


def run(scenario) -> None:
    asyncio.run(scenario())


def flat(app) -> str:
    return " ".join(screen_text(app).split())


def hand(path, respondent: str, coder: str = "ash", source: str = "hand") -> list[int]:
    return [r[0] for r in on_disk(
        path, "SELECT c.number FROM assignments a JOIN codes c ON c.id = a.code_id JOIN verbatims v ON v.id = "
        "a.verbatim_id JOIN respondents r ON r.id = v.respondent_id WHERE r.key = ? AND a.coder = ? AND a.source = ? "
        "ORDER BY c.number", (respondent, coder, source))]


def study_with_notes(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        frames.edit_code(study, "why", 1, actor="lead", description="Worried about safety with no staff present",
                         include="fear, unsafe, security guards", exclude="staff losing jobs (code 2)")
        frames.add_code(study, "why", LONG, number=10, hotkey="c", net=90)
    return path


def status(app) -> str:
    return str(app.screen.query_one("#status").render())


# -- 1. labels in full, a verbatim box the size of its text, 80x24 usable ----------------------------------------
def test_every_label_in_full_at_80x24_and_a_box_sized_to_the_text(tmp_path):
    path = study_with_notes(tmp_path)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.pause()
            panel = [w for w in " ".join(line[48:] for line in screen_text(app).splitlines()).split() if w != "│"]
            for label in ("Concerns", "Not safe without staff", "Staff jobs", LONG, "Convenient hours"):
                assert label in " ".join(panel), label  # wrapped over lines, never cut
            assert "…" not in " ".join(panel)
            box = app.screen.query_one("#verbatim-pane")
            assert box.outer_size.height == 3  # one line of text and its border, not half the screen
            await pilot.press("f3")
            await pilot.pause()
            shown = screen_text(app)
            header = shown.splitlines()[1]
            for title in ("key", "no.", "label", "mine", "uses", "state"):
                assert title in header
            table = app.screen.query_one("#frame-table")
            assert table.virtual_size.width <= table.size.width  # no column hidden to the right
            start = header.index("label")
            column = " ".join(line[start:start + 43] for line in shown.splitlines()).split()
            assert LONG in " ".join(column)  # the long label wraps in its row
            assert "esc desk" in shown.splitlines()[-1] and "palette" in shown.splitlines()[-1]
    run(scenario)


# -- 2. a code's description, include and exclude notes ---------------------------------------------------------
def test_the_last_pressed_code_shows_its_notes(tmp_path):
    path = study_with_notes(tmp_path)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("s")
            shown = flat(app)
            for note in ("Worried about safety with no staff present", "include: fear, unsafe, security guards",
                         "exclude: staff losing jobs (code 2)"):
                assert note in shown
            await pilot.press("ctrl+d", "h")  # read code 3's notes without coding it
            assert "3 Convenient hours (last pressed)" in flat(app)
            assert "no description or notes yet" in flat(app)
            assert hand(path, "A1") == [1]
    run(scenario)


# -- 3. non-answers are not served by default ------------------------------------------------------------------
def test_non_answers_wait_until_the_palette_shows_them(tmp_path):
    path = make_desk_study(tmp_path)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            assert [app.session.card().respondent] == ["A1"] and app.session.view.size == 4
            assert "0/4 coded" in flat(app)  # progress over the four answered verbatims
            await pilot.press("end", "enter")
            assert app.session.card().respondent == "A1"  # wraps round, never to the non-answer A3
            await pilot.press("ctrl+p")
            await pilot.press(*"show non-answers")
            await pilot.pause(0.3)
            await pilot.press("enter")
            await pilot.pause()
            assert app.session.show_nonanswers and app.session.view.size == 5
            assert "non-answers served" in flat(app) and "1/4 coded" in flat(app)
            await pilot.press("home", "right", "right")
            assert app.session.card().respondent == "A3" and "non-answer" in flat(app)
    run(scenario)


# -- 4. suggestions belong to the question ---------------------------------------------------------------------
def test_every_coder_sees_the_suggestions_and_accepting_makes_a_hand_code(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.assign(study, 2, 3, "final", source="machine", confidence=0.42)
        coding.assign(study, 4, 2, "final", source="rule")
        coding.assign(study, 5, 1, "final", source="machine", confidence=0.9)
        blind = list(reliability.draw_sample(study, "why", "rel", n=1, random_state=3).verbatim_ids)
        reliability.assign_sample(study, "why", "rel", ["ash", "cai"])

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("down")  # the next suggestion under the confidence bar, though it is final's
            assert app.session.card().respondent == "A2"
            assert "→ h 3 Convenient hours machine 42%" in flat(app)
            await pilot.press("ctrl+k")
            assert hand(path, "A2") == [3] and hand(path, "A2", "final", "machine") == [3]
            assert "accepted 3 Convenient hours as your code" in status(app)
            await pilot.press("right", "ctrl+x")  # A4: reject final's rule suggestion for the question
            assert hand(path, "A4", "final", "rule") == []
            await pilot.press("ctrl+z")
            assert hand(path, "A4", "final", "rule") == [2]
            for verbatim in blind:  # coded blind: only ash's own suggestions show
                app.session.go_to_id(verbatim)
                app.screen.redraw()
                await pilot.pause()
                assert app.session.suggestions() == [] and "blind sample" in flat(app)
    run(scenario)
    with Study.open(path) as study:
        assert [s.number for s in coding.question_suggestions(study, 5, "bryn")] == [1]  # anyone else sees it


# -- 5. messages follow the verbatim; undo names what it changed -------------------------------------------------
def test_messages_go_with_their_verbatim_and_undo_names_code_and_verbatim(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.set_codes(study, 1, [1], "bryn")
        coding.set_codes(study, 1, [1, 2], "cai")
        coding.set_codes(study, 2, [3], "bryn")
        coding.set_codes(study, 2, [1], "cai")

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("h")
            assert "+ 3 Convenient hours" in status(app)
            await pilot.press("right")
            assert status(app).strip() == ""  # the message was about A1
            await pilot.press("ctrl+z")
            assert status(app) == "undone: assign of 3 Convenient hours on respondent A1"
            assert app.session.card().respondent == "A1" and hand(path, "A1") == []
            await pilot.press("ctrl+y")
            assert status(app) == "redone: assign of 3 Convenient hours on respondent A1"
            await pilot.press("f6", "r")
            assert status(app).startswith("A1: final now holds 1 Not safe without staff, 2 Staff jobs (cai's)")
            assert app.screen.current().respondent == "A2"
            await pilot.press("left")
            assert status(app).strip() == ""
    run(scenario)


# -- 6. other coders' codes with hotkey and label -----------------------------------------------------------------
def test_other_coders_codes_show_their_hotkey_and_label(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        coding.set_codes(study, 1, [2, 3], "bryn")

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.pause()
            note = " ".join(str(app.screen.query_one("#note").render()).split())
            assert note == "others: bryn j 2 Staff jobs · h 3 Convenient hours"
    run(scenario)


# -- 7. compare for adjudication --------------------------------------------------------------------------------
def test_compare_moves_to_the_next_unsettled_counts_them_picks_and_filters(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        for verbatim, ash, bryn in ((1, [1], [2]), (2, [3], [1, 3]), (4, [1, 3], [2, 3]), (5, [3], [2])):
            coding.set_codes(study, verbatim, ash, "ash")
            coding.set_codes(study, verbatim, bryn, "bryn")

    async def scenario():
        app = make_app(path, "lead")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("f6")
            await pilot.pause()
            assert "0 of 4 settled" in flat(app)
            await pilot.press("l")
            assert hand(path, "A1", "final") == [1]
            assert app.screen.current().respondent == "A2" and "1 of 4 settled" in flat(app)
            await pilot.press("p", "ctrl+u", *"2 3", "enter")  # a custom set for final
            assert hand(path, "A2", "final") == [2, 3]
            assert app.screen.current().respondent == "A4" and "2 of 4 settled" in flat(app)
            await pilot.press("home")
            await pilot.press("f", *"1 2", "enter")  # only ash's 1 against bryn's 2
            assert [d.respondent for d in app.screen.shown()] == ["A1", "A4"]
            assert "only 1 versus 2" in flat(app) and "1 of 2 settled" in flat(app)
            await pilot.press("space")
            assert app.screen.current().respondent == "A4"
            await pilot.press("u")
            assert hand(path, "A4", "final") == [1, 2, 3]
            assert "every difference shown is settled" in status(app) and "✓ settled" in flat(app)
            await pilot.press("f", "ctrl+u", "enter")
            assert len(app.screen.shown()) == 4 and "3 of 4 settled" in flat(app)
    run(scenario)


# -- 8. the terms screen's drivers: progress, cancelled on leaving and on quit ----------------------------------
def test_drivers_fit_in_a_child_process_that_leaving_or_quitting_kills(tmp_path):
    path = make_drivers_study(tmp_path)

    async def scenario():
        app = DeskApp(DeskSession(path, "why", "ash", clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("f4")
            await pilot.pause()
            job = app.screen.drivers_job
            assert job is not None and job.running
            assert "drivers: fitting on the cached term matrix" in flat(app)
            await pilot.press("escape")  # leaving stops the fit at once
            assert job.process.wait(timeout=10) is not None and app.screen.name == "desk"
            await pilot.press("f4")
            terms = app.screen
            again = terms.drivers_job
            assert again is not job and again.running
            await wait_for(pilot, lambda: terms.drivers_done)
            assert "cross-validated AUC" in flat(app)
            await pilot.press("escape", "f4")
            assert terms.drivers_job is again  # done once, kept
            terms.start_drivers()  # a fit under way when the coder quits
            running = terms.drivers_job
            await pilot.press("ctrl+q")
        assert running.process.wait(timeout=10) is not None and running.cancelled
    run(scenario)


# -- 9. only our own themes --------------------------------------------------------------------------------------
def test_only_our_okabe_ito_themes_and_no_colour_are_offered(tmp_path):
    path = make_desk_study(tmp_path)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=SIZE):
            assert set(app.available_themes) == {t.name for t in THEMES}
            titles = [c.title for c in app.get_system_commands(app.screen)]
            assert "Theme" not in titles
            assert [t for t in titles if t.startswith("Theme:")] == [
                "Theme: dark, Okabe-Ito colours", "Theme: light, Okabe-Ito colours",
                "Theme: no colour (as with NO_COLOR)"]
            okabe_ito = {"#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7"}
            for theme in THEMES[:2]:  # from Okabe & Ito (2002), see CHECKS.md
                assert {theme.primary, theme.secondary, theme.accent, theme.success, theme.error} <= okabe_ito
    run(scenario)
