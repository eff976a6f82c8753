"""The compare screen: verbatims where two coders differ, side by side; take left, right or both into `final`.

A shell for adjudication: the agreement figures live in opencode.analysis; this screen only settles codes.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widgets import Footer, Static

from opencode.coding import adjudication
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.study import desk_queries as dq
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import PromptModal
from opencode.tui.widgets.panes import Pane


class CompareScreen(StudyScreen):
    """Two coders' hand codes on the verbatims where they differ, and the `final` codes being settled."""

    BINDINGS = [
        Binding("right", "move(1)", "next", key_display="→"),
        Binding("left", "move(-1)", "previous", key_display="←"),
        Binding("l", "take('left')", "take left"),
        Binding("r", "take('right')", "take right"),
        Binding("u", "take('union')", "take both"),
        Binding("c", "choose", "coders"),
        Binding("ctrl+z", "undo", "undo final", show=False),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(id="compare-title", classes="screen-title")
        with Pane(id="compare-verbatim-pane"):
            yield Static(id="compare-verbatim")
        with Horizontal(classes="split"):
            with Vertical(classes="side"):
                yield Static(id="left-name", classes="side-title")
                yield Static(id="left-codes")
            with Vertical(classes="side"):
                yield Static(id="right-name", classes="side-title")
                yield Static(id="right-codes")
        yield Static(id="final-codes", classes="detail")
        yield Static(id="status")
        yield Footer()

    def on_mount(self) -> None:
        s = self.session
        others = sorted([c for c, _ in coding_ranked(s) if c != FINAL][:2])
        self.left = others[0] if others else s.coder
        self.right = others[1] if len(others) > 1 else self.left
        self.position = 0
        self.load()

    def load(self) -> None:
        """Read the differences again (after a decision, final's codes change)."""
        s = self.session
        self.found = [] if self.left == self.right else adjudication.differences(
            s.study, s.question.name, [self.left, self.right])
        self.ids = [d.verbatim_id for d in self.found]
        self.position = min(self.position, max(len(self.ids) - 1, 0))
        self.redraw()

    def current(self) -> adjudication.Difference | None:
        return self.found[self.position] if self.found else None

    def current_id(self) -> int | None:
        return self.ids[self.position] if self.ids else None

    def _codes_text(self, numbers: list[int], against: set[int]) -> Text:
        text = Text()
        for number in numbers:
            code = self.session.code(number)
            if text:
                text.append("\n")
            style = "" if number in against else "bold underline"
            text.append(f"{number} {code.label if code else '?'}", style=style)
        return text or Text("(no code)", style="italic")

    def redraw(self) -> None:
        found = self.current()
        title = Text(f" compare {self.left} with {self.right}", style="bold")
        title.append(f"  ·  {len(self.ids):,} verbatims differ" +
                     (f"  ·  {self.position + 1:,} of {len(self.ids):,}" if self.ids else ""))
        self.query_one("#compare-title", Static).update(title)
        self.query_one("#compare-verbatim", Static).update(
            Text(f"{found.respondent}: {found.text}") if found else
            Text("These two coders agree everywhere they both coded (c chooses other coders).", style="italic"))
        left = list(found.codes.get(self.left) or ()) if found else []
        right = list(found.codes.get(self.right) or ()) if found else []
        self.query_one("#left-name", Static).update(f"{self.left} (l)")
        self.query_one("#right-name", Static).update(f"{self.right} (r)")
        self.query_one("#left-codes", Static).update(self._codes_text(left, set(right)))
        self.query_one("#right-codes", Static).update(self._codes_text(right, set(left)))
        final = list(found.final or ()) if found else []
        text = Text(f"{FINAL}: ", style="bold")
        text.append(", ".join(f"{n} {self.session.code(n).label if self.session.code(n) else '?'}" for n in final)
                    or "not settled yet")
        self.query_one("#final-codes", Static).update(text)

    def action_move(self, step: int) -> None:
        if self.ids:
            self.position = min(max(self.position + step, 0), len(self.ids) - 1)
        self.redraw()

    def action_take(self, side: str) -> None:
        vid = self.current_id()
        if vid is None:
            return
        s = self.session
        decide = {"left": lambda: adjudication.take(s.study, s.question.name, vid, self.left),
                  "right": lambda: adjudication.take(s.study, s.question.name, vid, self.right),
                  "union": lambda: adjudication.take_union(s.study, s.question.name, vid, [self.left, self.right])}

        def done(numbers) -> None:
            self.load()
            self.say(f"{FINAL} now holds {', '.join(map(str, numbers)) or 'no code'}")
        self.app.attempt(decide[side], done, self.say)

    def action_undo(self) -> None:
        def undo():
            if adjudication.undo_last(self.session.study) is None:
                raise OpenCodeError(f"nothing of {FINAL} to undo")
        self.app.attempt(undo, lambda _: (self.load(), self.say(f"undid {FINAL}'s last change")), self.say)

    def action_choose(self) -> None:
        names = ", ".join(c for c, _ in coding_ranked(self.session)) or "none yet"

        def run(line: str | None) -> None:
            if not line:
                return
            parts = line.split()
            if len(parts) != 2:
                self.say("give two coder names, e.g. ash bryn", error=True)
                return
            self.left, self.right = parts
            self.position = 0
            self.load()
        self.app.push_screen(PromptModal("Compare which two coders?", f"coders here: {names}",
                                         value=f"{self.left} {self.right}"), run)


def coding_ranked(session) -> list[tuple[str, int]]:
    """Coders of the question with their hand-code counts, most active first (then coders with marks only)."""
    ranked = astore.coders_of_question(session.study, session.question.id)
    seen = {c for c, _ in ranked}
    return ranked + [(c, 0) for c in dq.question_coders(session.study, session.question.id) if c not in seen]
