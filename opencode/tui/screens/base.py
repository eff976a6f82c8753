"""What the desk's screens share: the session they read and the status line they report on."""

from __future__ import annotations

from rich.text import Text
from textual.screen import Screen
from textual.widgets import Static


class StudyScreen(Screen):
    """A screen of the coding desk app: reads the app's session and reports on its `#status` line.

    A message belongs to the item it was about: screens call `clear_status()` when they move on, so a message
    never sits under the next verbatim as if it were about that one.
    """

    @property
    def session(self):
        return self.app.session

    def say(self, message: str, error: bool = False) -> None:
        """One status line: what just happened, or what went wrong (plain text, never markup)."""
        status = self.query_one("#status", Static)
        status.set_class(error, "error")
        status.update(Text(message))

    def clear_status(self) -> None:
        """Forget the last message (the screen moved on)."""
        self.say("")
