"""User text is shown as typed, never read as Textual or Rich markup: labels, coder names, verbatims, notes,
messages and dialogs holding `x[/]`, `[/]evil` or `[word]` neither crash the desk nor lose their brackets."""

from __future__ import annotations

import asyncio

from opencode.coding import assignments as coding
from opencode.coding import frames
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study
from opencode.tui.app import DeskApp
from opencode.tui.screens.modals import AddCodeModal, ConfirmModal, HelpModal
from opencode.tui.session import DeskSession

from helpers import screen_text, wait_for

CODER = "[/]evil"
OTHER = "[b]bryn"
LABELS = {1: "x[/]", 2: "[/]evil", 3: "[word] stays", 4: "[bold]not bold[/bold]"}
VERBATIM = "[red]not red[/red] and [/] alone"


def make_study(folder):
    folder.mkdir(parents=True)
    csv = folder / "survey.csv"
    csv.write_text(f'rid,why\nM1,"{VERBATIM}"\nM2,[i]staff[/i] at night\nM3,staff cut\n', encoding="utf-8")
    path = folder / "markup.study"
    import_survey(path, csv, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        for number, label in LABELS.items():
            frames.add_code(study, "why", label, number=number, hotkey="abcd"[number - 1],
                            description="[dim]described[/dim]", include="[/]in")
        coding.assign(study, 1, 3, OTHER)
        coding.assign(study, 2, 3, OTHER)
        coding.assign(study, 2, 4, CODER)
        coding.assign(study, 1, 2, "final", source="machine", confidence=0.3)
    return path


def flat(app) -> str:
    return " ".join(screen_text(app).split())


def test_markup_in_user_text_is_shown_as_typed(tmp_path):
    path = make_study(tmp_path / "[b]folder")

    async def scenario():
        app = DeskApp(DeskSession(path, "why", CODER, clock=lambda: 0.0), refresh_seconds=0, show_pace=False)
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.press("a")  # code x[/]
            assert "+ 1 x[/]" in flat(app)
            await pilot.press("ctrl+d", "c")  # read the notes of [word] stays
            await pilot.pause()
            shown = flat(app)
            for text in (VERBATIM, CODER, *LABELS.values(), "3 [word] stays (last pressed)", "[dim]described[/dim]",
                         "[/]in",
                         f"others: {OTHER} c 3 [word] stays"):
                assert text in shown, (text, shown)
            await pilot.press("ctrl+n", *"[/]note", "enter")
            assert "note: [/]note" in flat(app)
            await pilot.press("ctrl+o")
            assert isinstance(app.screen, AddCodeModal)
            await pilot.press(*"y[/]", "tab", "e", "enter")
            await pilot.pause()
            assert "added 5 y[/]" in flat(app)
            await pilot.press("slash", *"[/]x", "enter")
            assert "nothing matches '[/]x'" in flat(app)
            await pilot.press("f1")
            assert isinstance(app.screen, HelpModal) and "y[/]" in flat(app)
            await pilot.press("escape", "f3")
            await pilot.pause()
            assert all(label in flat(app) for label in LABELS.values())
            await pilot.press("e", "ctrl+u", *"[/]renamed", "enter")
            await pilot.pause()
            assert "[/]renamed" in flat(app)
            await pilot.press("f6")
            await pilot.pause()
            assert f"compare {CODER} with {OTHER}" in flat(app) and "[/]renamed" in flat(app)
            await pilot.press("right")
            assert "≠ d 4 [bold]not bold[/bold]" in flat(app) and "[i]staff[/i] at night" in flat(app)
            await pilot.press("f4")
            await wait_for(pilot, lambda: app.screen.rows)
            await pilot.press("c", "3", "enter")
            assert isinstance(app.screen, ConfirmModal) and "[word] stays" in flat(app)
            await pilot.press("escape", "escape")
            app.notify("[/]toast", markup=False)
            await pilot.pause()
            assert app.is_running
    asyncio.run(scenario())
