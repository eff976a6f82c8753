"""The terms screen shows the drivers ranking when the study has an outcome, computed off the UI thread."""

from __future__ import annotations

import asyncio

from opencode.ingest.importer import ImportOptions, import_survey
from opencode.tui.app import DeskApp
from opencode.tui.session import DeskSession

from helpers import wait_for

OPPOSE = ["Not safe without staff at night", "Staff cut and nobody to help", "Unsafe at night without staff"]
SUPPORT = ["Great for study after work", "Evening study after my work shift", "Work late so evening study helps"]


def make_study(folder):
    """Small invented fixture: 60 respondents, support 1 (oppose) or 2 (support), role outcome."""
    rows = [f"R{i},{(OPPOSE if i % 2 else SUPPORT)[i % 3]},{1 if i % 2 else 2}" for i in range(60)]
    csv = folder / "survey.csv"
    csv.write_text("rid,why,support\n" + "\n".join(rows) + "\n", encoding="utf-8")
    path = folder / "drivers.study"
    import_survey(path, csv, ImportOptions("rid", ["why"], roles={"support": "outcome"}))
    return path


def test_terms_screen_shows_drivers_for_the_outcome(tmp_path):
    path = make_study(tmp_path)

    async def scenario():
        app = DeskApp(DeskSession(path, "why", "ash", clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.press("f4")
            await wait_for(pilot, lambda: app.screen.drivers_done)
            shown = str(app.screen.query_one("#drivers").render())
            assert "cross-validated AUC" in shown, shown
            assert "small groups" not in shown
            assert "staff" in shown and "study" in shown
            assert "- OR" in shown and "+ OR" in shown
    asyncio.run(scenario())
