"""What the desk's screens share: the session they read and the status line they report on."""

from __future__ import annotations

from textual.screen import Screen
from textual.widgets import Static


class StudyScreen(Screen):
    """A screen of the coding desk app: reads the app's session and reports on its `#status` line."""

    @property
    def session(self):
        return self.app.session

    def say(self, message: str, error: bool = False) -> None:
        """One status line: what just happened, or what went wrong."""
        status = self.query_one("#status", Static)
        status.set_class(error, "error")
        status.update(message)
