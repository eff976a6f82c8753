"""Text typed or pasted into a desk dialog the moment it opens arrives whole, in order, and nowhere else.

The desk hands every key to the verbatim shown, in the order typed (test_desk_keys.py); the key that opens a
dialog must not keep that machinery from giving the next keys, or a bracketed paste (one `Paste` event), to the
dialog's input. Here the desk keys, the dialog key and the text go to the app's driver at once, with no pause
(what a fast typist or a terminal's paste produces), for each text dialog of the desk: new code, search, go to
respondent, note. The text holds code hotkeys (s, j, h) and keys the desk binds ('?', '/', space), which must
be typed into the dialog, not act on the verbatim.
"""

from __future__ import annotations

import asyncio

import pytest
from textual import events
from textual.widgets import Input

from opencode.tui.screens.modals import AddCodeModal, PromptModal

from helpers import make_app, make_desk_study, on_disk, wait_for
from test_desk_keys import key_event

TEXT = "Why? 50% / late-night, [Sunday] & café shj"
DIALOGS = {  # dialog key: (dialog class, title it shows)
    "ctrl+o": (AddCodeModal, "New code"),
    "slash": (PromptModal, "Search"),
    "ctrl+g": (PromptModal, "Go to respondent id"),
    "ctrl+n": (PromptModal, "Note on this verbatim"),
}


def send_now(app, items) -> None:
    """Queue keys (names or characters) and Paste events on the driver without waiting between them."""
    for item in items:
        if isinstance(item, events.Event):
            event = item
        elif len(item) == 1:
            event = key_event(item)
        else:
            event = events.Key(item, None)
        event.set_sender(app)
        app._driver.send_message(event)


def focused_value(app) -> str | None:
    return app.focused.value if isinstance(app.focused, Input) else None


def hand(path) -> list[tuple[int, int]]:
    return [tuple(r) for r in on_disk(path, "SELECT a.verbatim_id, c.number FROM assignments a JOIN codes c "
                                            "ON c.id = a.code_id WHERE a.coder = 'ash' AND a.source = 'hand' "
                                            "ORDER BY a.verbatim_id, c.number")]


@pytest.mark.parametrize("pasted", [False, True], ids=["typed", "pasted"])
@pytest.mark.parametrize("opener", list(DIALOGS))
def test_text_right_after_the_dialog_key_arrives_whole(tmp_path, opener, pasted):
    path = make_desk_study(tmp_path)
    dialog, title = DIALOGS[opener]
    text = [events.Paste(TEXT)] if pasted else list(TEXT)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            send_now(app, ["right", "s", opener, *text])
            await wait_for(pilot, lambda: focused_value(app) == TEXT, timeout=20)
            await pilot.pause(0.3)  # nothing more arrives: no key was held back or doubled
            assert isinstance(app.screen, dialog) and app.screen.title_text.startswith(title)
            assert focused_value(app) == TEXT
            shown = app.session.current_id
            # The desk keys before the dialog key acted in order; no key of the text acted on the desk.
            assert hand(path) == [(shown, 1)]
            assert on_disk(path, "SELECT COUNT(*) FROM audit WHERE actor = 'ash'") == [(1,)]
            await pilot.press("enter")
            await pilot.pause()
            assert not isinstance(app.screen, dialog)
            return shown, str(app.screen.query_one("#status").render())

    shown, status = asyncio.run(scenario())
    if opener == "ctrl+o":  # the whole label became the new code, given to the verbatim shown
        assert on_disk(path, "SELECT number FROM codes WHERE label = ?", (TEXT,)) == [(91,)]
        assert hand(path) == [(shown, 1), (shown, 91)]
    elif opener == "ctrl+n":
        assert on_disk(path, "SELECT verbatim_id, text FROM notes WHERE coder = 'ash'") == [(shown, TEXT)]
    elif opener == "slash":  # the search ran on the whole text (the status line quotes it)
        assert f"nothing matches {TEXT!r}" in status
    else:
        assert f"respondent {TEXT!r} gave no answer" in status



def test_typing_in_the_note_dialog_adds_to_the_note_already_there(tmp_path):
    """The note dialog opens with the cursor after the existing note, not with it selected: a coder who types
    (or pastes) adds to the note; a stray key cannot wipe it. Short values elsewhere stay selected for retyping."""
    path = make_desk_study(tmp_path)

    async def scenario():
        app = make_app(path)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            send_now(app, ["ctrl+n", *"first", "enter"])
            await wait_for(pilot, lambda: on_disk(path, "SELECT COUNT(*) FROM notes WHERE coder = 'ash'") == [(1,)])
            shown = app.session.current_id
            send_now(app, ["ctrl+n", *" typed", events.Paste(" + pasted"), "enter"])
            await wait_for(pilot, lambda: on_disk(path, "SELECT text FROM notes WHERE coder = 'ash'")
                           == [("first typed + pasted",)], timeout=20)
            assert on_disk(path, "SELECT verbatim_id FROM notes WHERE coder = 'ash'") == [(shown,)]
            send_now(app, ["ctrl+n"])
            await wait_for(pilot, lambda: isinstance(app.screen, PromptModal))
            assert app.screen.query_one(Input).select_on_focus is False
        bar = PromptModal("Confidence bar", value="0.6")
        assert bar.append is False  # a short value shown for editing is still selected, so typing replaces it

    asyncio.run(scenario())
