"""Bulk coding from the terms screen is one undoable step: one Ctrl+Z on the desk takes all of it back.

Driven through Textual's test pilot; every check reads the study file through a second connection.
"""

from __future__ import annotations

import asyncio
from pathlib import Path

from helpers import on_disk

from opencode.coding import assignments as coding
from opencode.coding import frames
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study
from opencode.tui.app import DeskApp
from opencode.tui.session import DeskSession

SURVEY = (
    "rid,why\n"
    "B1,Not safe without staff at night\n"
    "B2,Staff jobs will be cut\n"
    "B3,Evening hours suit shift workers\n"
    "B4,More staff on the desk please\n"
    "B5,Friendly staff and quiet rooms\n"
    "B6,Great for students after work\n"
)
STAFF = ["B1", "B2", "B4", "B5"]  # the verbatims holding the term "staff", the most used term


def make_study(folder: Path) -> Path:
    """Six invented answers; ash already holds code 2 on B1 by hand and a rule suggestion of it on B2,
    bryn holds code 2 on B4 and a machine suggestion of it on B5."""
    csv = folder / "survey.csv"
    csv.write_text(SURVEY, encoding="utf-8")
    path = folder / "bulk.study"
    import_survey(path, csv, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        frames.add_code(study, "why", "Safety", number=1, hotkey="s")
        frames.add_code(study, "why", "Staffing", number=2, hotkey="j")
        ids = dict(zip([f"B{i}" for i in range(1, 7)], coding.uncoded_ids(study, "why", "ash")))
        coding.assign(study, ids["B1"], 2, "ash")
        coding.assign(study, ids["B2"], 2, "ash", source="rule")
        coding.assign(study, ids["B4"], 2, "bryn")
        coding.assign(study, ids["B5"], 2, "bryn", source="machine", confidence=0.9)
    return path


ALL_ASSIGNMENTS = ("SELECT r.key, c.number, a.coder, a.source, a.confidence, a.created_at FROM assignments a "
                   "JOIN codes c ON c.id = a.code_id JOIN verbatims v ON v.id = a.verbatim_id "
                   "JOIN respondents r ON r.id = v.respondent_id ORDER BY r.key, c.number, a.coder")


def assignments_on_disk(path: Path) -> list[tuple]:
    """Every assignment (respondent, code, coder, source, confidence, time) through a fresh connection."""
    return on_disk(path, ALL_ASSIGNMENTS)


def ash_hand(rows: list[tuple]) -> list[str]:
    return [key for key, number, coder, source, *_ in rows if number == 2 and coder == "ash" and source == "hand"]


def test_bulk_code_from_terms_screen_then_one_undo_restores_the_file(tmp_path):
    path = make_study(tmp_path)
    before = assignments_on_disk(path)

    async def scenario():
        app = DeskApp(DeskSession(path, "why", "ash", clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.press("f4")
            await app.workers.wait_for_complete()
            await pilot.pause()
            assert app.screen.selected().term == "staff"
            await pilot.press("c", "2", "enter", "enter")  # code 2 for every verbatim with "staff", reviewed
            await pilot.pause()
            assert "code 2 given to 3 more verbatims" in str(app.screen.query_one("#status").render())
            bulk = assignments_on_disk(path)
            assert ash_hand(bulk) == STAFF  # B1 kept, B2's suggestion accepted, B4 and B5 new for ash
            assert [r for r in bulk if r[2] == "bryn"] == [r for r in before if r[2] == "bryn"]
            assert app.session.counts.codes[2] == 4

            await pilot.press("escape", "ctrl+z")  # back on the desk: one undo
            await pilot.pause()
            assert assignments_on_disk(path) == before  # every bulk assignment gone, the suggestion back as it was
            assert app.session.counts.codes[2] == 1
            assert "undone: assign" in str(app.screen.query_one("#status").render())

            await pilot.press("ctrl+y")
            await pilot.pause()
            assert assignments_on_disk(path) == bulk
    asyncio.run(scenario())
