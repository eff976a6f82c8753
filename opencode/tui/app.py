"""The desk application: screens (desk, frame, terms, themes, compare), the help overlay and the command palette."""

from __future__ import annotations

import importlib
from typing import Callable, Iterable

from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.screen import Screen
from textual.theme import Theme

from opencode.errors import OpenCodeError
from opencode.files.palette import OKABE_ITO
from opencode.tui.highlight import IMPORTING
from opencode.tui.screens.modals import HelpModal, LockedModal, PromptModal
from opencode.tui.session import DeskSession, is_locked

#: Our own calm theme from the Okabe-Ito colours (Textual drops colour by itself when NO_COLOR is set).
CALM = Theme(
    name="oecode-calm", dark=True,
    primary=OKABE_ITO["sky_blue"], secondary=OKABE_ITO["blue"], accent=OKABE_ITO["orange"],
    success=OKABE_ITO["bluish_green"], warning=OKABE_ITO["yellow"], error=OKABE_ITO["vermillion"],
    foreground="#E8E6E1", background="#1B1D1F", surface="#232628", panel="#2C3033",
)

HOTKEY_NOTE = ("Letters, digits and other printable keys are code hotkeys, set in the frame (F3). A hotkey adds "
               "its code, accepts it when it is a suggestion, or takes it off when you hold it already. "
               "Each press is saved to the study file before the screen changes.")


class DeskApp(App):
    """The terminal coding desk for one coder on one question."""

    CSS_PATH = "desk.tcss"
    TITLE = "oecode desk"
    BINDINGS = [
        Binding("f1,question_mark", "help", "keys", key_display="F1"),
        Binding("f2", "show('desk')", "desk", show=False),
        Binding("f3", "show('frame')", "frame", key_display="F3"),
        Binding("f4", "show('terms')", "terms", show=False),
        Binding("f5", "show('themes')", "themes", show=False),
        Binding("f6", "show('compare')", "compare", show=False),
        Binding("ctrl+q", "quit", "quit", show=False),
    ]

    def __init__(self, session: DeskSession, refresh_seconds: float = 30.0, show_pace: bool = True,
                 first_screen: str = "desk"):
        super().__init__()
        self.session = session
        self.refresh_seconds = refresh_seconds
        self.show_pace = show_pace
        self.first_screen = first_screen

    def on_mount(self) -> None:
        self.register_theme(CALM)
        self.theme = "oecode-calm"
        self.push_screen(self.make_screen("desk"))
        if self.first_screen != "desk":
            self.action_show(self.first_screen)

    # -- screens ---------------------------------------------------------------------------------------------
    def make_screen(self, name: str) -> Screen:
        """A fresh screen by name (screens read the study when shown, so they never go stale)."""
        with IMPORTING:
            module = importlib.import_module(f"opencode.tui.screens.{name}")
        return getattr(module, f"{name.capitalize()}Screen")(name=name)

    def action_show(self, name: str) -> None:
        """Go to a screen; the desk stays underneath, so Esc or F2 always brings it back."""
        if self.screen.name == name:
            return
        while len(self.screen_stack) > 2:
            self.pop_screen()
        if name == "desk":
            if self.screen.name != "desk":
                self.pop_screen()
            return
        if self.screen.name != "desk":
            self.switch_screen(self.make_screen(name))
        else:
            self.screen.stale = True
            self.push_screen(self.make_screen(name))

    # -- changes that can meet a locked file -----------------------------------------------------------------
    def attempt(self, change: Callable[[], object], done: Callable[[object], None],
                say: Callable[..., None] | None = None) -> None:
        """Run a change (the library commits it); a locked study asks to retry, other problems are shown."""
        try:
            result = change()
        except OpenCodeError as error:
            if is_locked(error):
                def answer(retry: bool | None) -> None:
                    if retry:
                        self.attempt(change, done, say)
                    elif say is not None:
                        say("not saved: the study was busy", error=True)
                self.push_screen(LockedModal(str(error)), answer)
                return
            if say is not None:
                say(str(error), error=True)
            else:
                self.notify(str(error), severity="error")
            return
        done(result)

    # -- help and the command palette ------------------------------------------------------------------------
    def key_rows(self) -> list[tuple[str, str]]:
        """(keys, what they do) for the current screen and the whole app."""
        rows: list[tuple[str, str]] = [(f"{self.screen.name or 'this'} screen", "")]
        rows += [(_keys(b), b.description) for b in getattr(self.screen, "BINDINGS", []) if isinstance(b, Binding)]
        rows += [("everywhere", "")]
        rows += [(_keys(b), b.description) for b in self.BINDINGS]
        rows += [("ctrl+p", "command palette: rarely used actions")]
        if self.screen.name == "desk":
            keys = sorted(self.session.hotkeys().items(), key=lambda kv: kv[1])
            rows += [("code hotkeys", "")]
            rows += [(key, f"{number} {self.session.code(number).label}") for key, number in keys]
        return rows

    def action_help(self) -> None:
        if isinstance(self.screen, HelpModal):
            return
        self.push_screen(HelpModal("Keys", self.key_rows(), HOTKEY_NOTE if self.screen.name == "desk" else ""))

    def get_system_commands(self, screen: Screen) -> Iterable[SystemCommand]:
        yield from super().get_system_commands(screen)
        yield SystemCommand("Desk: set the confidence bar", "Suggestions below it are 'unsure' (↑ ↓ jump to them)",
                            self.ask_confidence_bar)
        yield SystemCommand("Desk: mark this verbatim not done", "Clears your done mark on the verbatim shown",
                            self.unmark_done)
        yield SystemCommand("Desk: first uncoded verbatim", "Jump to your first verbatim not coded yet",
                            self.first_uncoded)
        for name, what in (("frame", "edit the code frame"), ("terms", "terms, kwic and drivers"),
                           ("themes", "saved theme runs"), ("compare", "two coders side by side")):
            yield SystemCommand(f"Open the {name} screen", what, lambda name=name: self.action_show(name))

    def _desk(self):
        return next((s for s in self.screen_stack if s.name == "desk"), None)

    def ask_confidence_bar(self) -> None:
        def run(text: str | None) -> None:
            if not text:
                return
            try:
                value = float(text.strip().rstrip("%")) / (100 if text.strip().endswith("%") else 1)
            except ValueError:
                self.notify(f"{text!r} is not a number (e.g. 0.6 or 60%)", severity="error")
                return
            if not 0 < value <= 1:
                self.notify("the confidence bar is between 0 and 1 (or 1% and 100%)", severity="error")
                return
            self.session.confidence_bar = value
            self.notify(f"unsure suggestions: below {value:.0%}")
        self.push_screen(PromptModal("Confidence bar", "0.6 or 60%", value=f"{self.session.confidence_bar:g}"), run)

    def unmark_done(self) -> None:
        desk = self._desk()
        if desk is not None:
            desk.act(lambda: self.session.mark_done(False), lambda changed: "done mark cleared" if changed else
                     "this verbatim was not marked done")

    def first_uncoded(self) -> None:
        desk = self._desk()
        if desk is not None:
            first = self.session.first_uncoded()
            desk.redraw()
            if not first:
                desk.say("no uncoded verbatim left")

    def on_unmount(self) -> None:
        self.session.close()


def _keys(binding: Binding) -> str:
    names = {"question_mark": "?", "slash": "/", "space": "space", "right": "→", "left": "←", "up": "↑",
             "down": "↓", "enter": "enter"}
    return " or ".join(names.get(k, k) for k in binding.key.split(","))
