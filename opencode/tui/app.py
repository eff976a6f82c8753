"""The desk application: screens (desk, frame, terms, themes, compare) as Textual modes, the help overlay, the
command palette and our own themes.

Keys on the desk are handled here, in the app's own queue, one after the other in the order they were typed:
Textual would otherwise run a screen's key handler (the code hotkeys) and the app's bindings (arrows, Enter) in
two different queues, so fast typing could apply a hotkey to the next verbatim or an arrow before a code.
"""

from __future__ import annotations

from typing import Callable, Iterable

from textual import events
from textual.app import App, SystemCommand
from textual.binding import Binding
from textual.reactive import reactive
from textual.screen import ModalScreen, Screen

from opencode.errors import OpenCodeError
from opencode.tui.background import IMPORTING
from opencode.tui.screens.desk import DeskScreen
from opencode.tui.screens.modals import HelpModal, LockedModal, PromptModal
from opencode.tui.session import DeskSession, is_locked
from opencode.tui.themes import DEFAULT, THEMES

HOTKEY_NOTE = ("Letters, digits and other printable keys are code hotkeys, set in the frame (F3). A hotkey adds "
               "its code, accepts it when it is a suggestion, or takes it off when you hold it already. "
               "Each press is saved to the study file before the screen changes.")

SCREEN_NAMES = ("desk", "frame", "terms", "themes", "compare")


# The other screens load their modules when first shown, so the desk starts without them.
def _frame_screen() -> Screen:
    with IMPORTING:
        from opencode.tui.screens.frame import FrameScreen
    return FrameScreen(name="frame")


def _terms_screen() -> Screen:
    with IMPORTING:
        from opencode.tui.screens.terms import TermsScreen
    return TermsScreen(name="terms")


def _themes_screen() -> Screen:
    with IMPORTING:
        from opencode.tui.screens.themes import ThemesScreen
    return ThemesScreen(name="themes")


def _compare_screen() -> Screen:
    with IMPORTING:
        from opencode.tui.screens.compare import CompareScreen
    return CompareScreen(name="compare")


def _desk_screen() -> Screen:
    return DeskScreen(name="desk")


class DeskApp(App):
    """The terminal coding desk for one coder on one question."""

    CSS_PATH = "desk.tcss"
    TITLE = "oecode desk"
    MODES = {"desk": _desk_screen, "frame": _frame_screen, "terms": _terms_screen, "themes": _themes_screen,
             "compare": _compare_screen}
    DEFAULT_MODE = "desk"
    BINDINGS = [
        Binding("f1,question_mark", "help", "keys", key_display="F1"),
        Binding("f2", "show('desk')", "desk", show=False),
        Binding("f3", "show('frame')", "frame", key_display="F3"),
        Binding("f4", "show('terms')", "terms", show=False),
        Binding("f5", "show('themes')", "themes", show=False),
        Binding("f6", "show('compare')", "compare", show=False),
        Binding("ctrl+q", "quit", "quit", show=False, priority=True),
    ]

    #: Counts changes made on the other screens (frame edits, bulk codes, decisions); the desk watches it and
    #: reads the study again when it is next shown.
    study_changes: reactive[int] = reactive(0, init=False)

    def __init__(self, session: DeskSession, refresh_seconds: float = 30.0, show_pace: bool = True,
                 first_screen: str = "desk"):
        super().__init__()
        if first_screen not in SCREEN_NAMES:
            raise OpenCodeError(f"no screen named {first_screen!r} (screens: {', '.join(SCREEN_NAMES)})")
        self.session = session
        self.refresh_seconds = refresh_seconds
        self.show_pace = show_pace
        self.first_screen = first_screen
        self.jobs: set = set()  # background jobs to stop on quit (see tui/background.py)
        for theme in THEMES:
            self.register_theme(theme)
        for name in list(self.available_themes):
            if name not in {t.name for t in THEMES}:
                self.unregister_theme(name)
        self.theme = DEFAULT

    def on_mount(self) -> None:
        if self.first_screen != "desk":
            self.switch_mode(self.first_screen)

    # -- keys in order ------------------------------------------------------------------------------------------
    async def on_event(self, event: events.Event) -> None:
        # Only keys reaching the desk while it is the top screen go to `take_key`. A key that opens a dialog
        # runs its action here, on the app's queue: Textual's push_screen then makes the app wait for the
        # dialog to mount before it reads the next event, so keys typed right after, or a bracketed paste
        # (a Paste event, passed on below to the focused input), go to the dialog's input whole and in order
        # (tests/test_desk_paste.py, and tests/test_desk_terminal.py in a real terminal).
        if isinstance(event, events.Key) and not event.is_forwarded and isinstance(self.screen, DeskScreen):
            if await self.screen.take_key(event):
                return
        await super().on_event(event)

    # -- screens ---------------------------------------------------------------------------------------------
    def action_show(self, name: str) -> None:
        """Go to a screen (each keeps its place); Esc or F2 always brings the desk back."""
        if isinstance(self.screen, HelpModal):
            self.pop_screen()
        if isinstance(self.screen, ModalScreen):
            self.notify("close the dialog first (Esc)", severity="warning", markup=False)
            return
        if self.current_mode != name:
            self.switch_mode(name)

    def study_changed(self) -> None:
        """Say that a screen changed the study (the desk re-reads it when shown again)."""
        self.study_changes += 1

    # -- changes that can meet a locked file -----------------------------------------------------------------
    def attempt(self, change: Callable[[], object], done: Callable[[object], None],
                say: Callable[..., None] | None = None) -> None:
        """Run a change (the library commits it); a busy study asks to retry, other problems are shown."""
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
                self.notify(str(error), severity="error", markup=False)
            return
        if self.current_mode != "desk":
            self.study_changed()
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
        for command in super().get_system_commands(screen):
            if command.title != "Theme":  # Textual's switcher: ours below offer only our own themes
                yield command
        for theme, what in (("oecode-dark", "dark, Okabe-Ito colours"), ("oecode-light", "light, Okabe-Ito colours"),
                            ("oecode-no-colour", "no colour (as with NO_COLOR)")):
            yield SystemCommand(f"Theme: {what}", f"Colours of the desk ({theme})",
                                lambda theme=theme: setattr(self, "theme", theme))
        yield SystemCommand("Desk: set the confidence bar", "Suggestions below it are 'unsure' (↑ ↓ jump to them)",
                            self.ask_confidence_bar)
        yield SystemCommand("Desk: mark this verbatim not done", "Clears your done mark on the verbatim shown",
                            self.unmark_done)
        yield SystemCommand("Desk: first uncoded verbatim", "Jump to your first verbatim not coded yet",
                            self.first_uncoded)
        shown = self.session.show_nonanswers
        yield SystemCommand("Desk: hide non-answers" if shown else "Desk: show non-answers",
                            "Non-answers (blank, 'no comment'...) are not served unless you ask; progress counts "
                            "answered verbatims", self.toggle_nonanswers)
        for name, what in (("frame", "edit the code frame"), ("terms", "terms, kwic and drivers"),
                           ("themes", "saved theme runs"), ("compare", "two coders side by side")):
            yield SystemCommand(f"Open the {name} screen", what, lambda name=name: self.action_show(name))

    def _desk(self) -> DeskScreen | None:
        stack = self._screen_stacks.get("desk") or []
        return next((s for s in stack if isinstance(s, DeskScreen)), None)

    def ask_confidence_bar(self) -> None:
        def run(text: str | None) -> None:
            if not text:
                return
            try:
                value = float(text.strip().rstrip("%")) / (100 if text.strip().endswith("%") else 1)
            except ValueError:
                self.notify(f"{text!r} is not a number (e.g. 0.6 or 60%)", severity="error", markup=False)
                return
            if not 0 < value <= 1:
                self.notify("the confidence bar is between 0 and 1 (or 1% and 100%)", severity="error", markup=False)
                return
            self.session.confidence_bar = value
            self.notify(f"unsure suggestions: below {value:.0%}", markup=False)
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

    def toggle_nonanswers(self) -> None:
        desk = self._desk()
        self.session.set_show_nonanswers(not self.session.show_nonanswers)
        if desk is not None:
            desk.redraw()
            desk.say("non-answers are served too" if self.session.show_nonanswers else
                     "non-answers are not served (progress counts answered verbatims)")

    def on_unmount(self) -> None:
        for job in list(self.jobs):
            job.cancel()
        self.session.close()


def _keys(binding: Binding) -> str:
    names = {"question_mark": "?", "slash": "/", "space": "space", "right": "→", "left": "←", "up": "↑",
             "down": "↓", "enter": "enter", "pageup": "PgUp", "pagedown": "PgDn"}
    return " or ".join(names.get(k, k) for k in binding.key.split(","))
