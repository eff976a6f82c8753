"""The compare screen: verbatims where two coders differ, side by side, settled one by one into `final`.

A shell for adjudication: the agreement figures live in opencode.analysis; this screen only settles codes.
After `l`, `r`, `u` or a custom set (`p`) it moves on to the next difference not settled yet; `f` keeps only the
differences where one coder gave one code and the other another ("7 versus 9").
"""

from __future__ import annotations

import dataclasses

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
        Binding("left", "move(-1)", "back", key_display="←"),
        Binding("l", "take('left')", "left's"),
        Binding("r", "take('right')", "right's"),
        Binding("u", "take('union')", "both"),
        Binding("p", "pick", "pick"),
        Binding("space", "next_unsettled", "next unsettled", show=False),
        Binding("f", "filter_pair", "only X vs Y", show=False),
        Binding("c", "choose", "choose coders", show=False),
        Binding("ctrl+z", "undo", "undo final", show=False),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(id="compare-title", classes="screen-title", markup=False)
        with Pane(id="compare-verbatim-pane"):
            yield Static(id="compare-verbatim", markup=False)
        with Horizontal(classes="split"):
            with Pane(classes="side"):
                yield Static(id="left-name", classes="side-title", markup=False)
                yield Static(id="left-codes", markup=False)
            with Pane(classes="side"):
                yield Static(id="right-name", classes="side-title", markup=False)
                yield Static(id="right-codes", markup=False)
        yield Static(id="final-codes", markup=False)
        yield Static(id="status", markup=False)
        yield Footer(compact=True)

    def on_mount(self) -> None:
        s = self.session
        others = sorted([c for c, _ in coding_ranked(s) if c != FINAL][:2])
        self.left = others[0] if others else s.coder
        self.right = others[1] if len(others) > 1 else self.left
        self.position = 0
        self.pair: tuple[int, int] | None = None
        self.found: list[adjudication.Difference] = []
        self._shown = False

    def on_screen_resume(self) -> None:
        if not self._shown:  # Textual can resume a new screen twice; read once per visit
            self._shown = True
            self.load()

    def on_screen_suspend(self) -> None:
        self._shown = False

    # -- what is shown ---------------------------------------------------------------------------------------
    def load(self) -> None:
        """Read the differences again (other coders may have coded meanwhile), staying on the verbatim shown."""
        s = self.session
        current = self.current_id()
        self.found = [] if self.left == self.right else adjudication.differences(
            s.study, s.question.name, [self.left, self.right])
        ids = [d.verbatim_id for d in self.shown()]
        self.position = ids.index(current) if current in ids else min(self.position, max(len(ids) - 1, 0))
        self.redraw()

    def shown(self) -> list[adjudication.Difference]:
        """The differences on screen: all of them, or only the chosen code pair."""
        if self.pair is None:
            return self.found
        a, b = self.pair
        kept = []
        for d in self.found:
            left, right = set(d.codes.get(self.left) or ()), set(d.codes.get(self.right) or ())
            only_left, only_right = left - right, right - left
            if (a in only_left and b in only_right) or (b in only_left and a in only_right):
                kept.append(d)
        return kept

    def current(self) -> adjudication.Difference | None:
        shown = self.shown()
        return shown[self.position] if shown and self.position < len(shown) else None

    def current_id(self) -> int | None:
        found = self.current() if hasattr(self, "found") else None
        return None if found is None else found.verbatim_id

    def _codes_text(self, numbers: list[int], against: set[int]) -> Text:
        text = Text()
        for number in numbers:
            code = self.session.code(number)
            if text:
                text.append("\n")
            differs = number not in against
            text.append("≠ " if differs else "  ", style="bold")
            if code is not None and code.hotkey:
                text.append(f"{code.hotkey} ", style="bold underline")
            text.append(f"{number} {code.label if code else '?'}", style="bold" if differs else "")
        return text or Text("(no code)", style="italic")

    def _labels(self, numbers) -> str:
        return ", ".join(f"{n} {self.session.code(n).label if self.session.code(n) else '?'}" for n in numbers) \
            or "no code"

    def redraw(self) -> None:
        shown = self.shown()
        found = self.current()
        settled = sum(d.final is not None for d in shown)
        title = Text(f" compare {self.left} with {self.right}", style="bold")
        if self.pair is not None:
            title.append(f"  ·  only {self.pair[0]} versus {self.pair[1]}")
        title.append(f"  ·  {settled:,} of {len(shown):,} settled")
        if shown:
            title.append(f"  ·  {self.position + 1:,} of {len(shown):,}")
        self.query_one("#compare-title", Static).update(title)
        if found is not None:
            verbatim = Text(f"{found.respondent}: ", style="bold")
            verbatim.append(found.text)
        elif self.found and self.pair is not None:
            verbatim = Text("No difference with this code pair (f, then Enter on an empty line, shows all).",
                            style="italic")
        else:
            verbatim = Text("These two coders agree everywhere they both coded (c chooses other coders).",
                            style="italic")
        self.query_one("#compare-verbatim", Static).update(verbatim)
        left = list(found.codes.get(self.left) or ()) if found else []
        right = list(found.codes.get(self.right) or ()) if found else []
        self.query_one("#left-name", Static).update(Text(f"{self.left} (l)"))
        self.query_one("#right-name", Static).update(Text(f"{self.right} (r)"))
        self.query_one("#left-codes", Static).update(self._codes_text(left, set(right)))
        self.query_one("#right-codes", Static).update(self._codes_text(right, set(left)))
        text = Text(f"{FINAL}: ", style="bold")
        if found is not None and found.final is not None:
            text.append(self._labels(found.final))
            text.append("   ✓ settled", style="bold")
        else:
            text.append("not settled yet", style="italic")
        self.query_one("#final-codes", Static).update(text)

    # -- moving ----------------------------------------------------------------------------------------------
    def action_move(self, step: int) -> None:
        shown = self.shown()
        if shown:
            self.position = min(max(self.position + step, 0), len(shown) - 1)
        self.clear_status()
        self.redraw()

    def next_unsettled(self) -> bool:
        """Go to the next difference final has not settled (wrapping round); False when all are settled."""
        shown = self.shown()
        for step in range(1, len(shown) + 1):
            i = (self.position + step) % len(shown)
            if shown[i].final is None:
                self.position = i
                return True
        return False

    def action_next_unsettled(self) -> None:
        found = self.next_unsettled()
        self.clear_status()
        self.redraw()
        if not found:
            self.say("every difference shown is settled")

    # -- deciding --------------------------------------------------------------------------------------------
    def _decide(self, decide, what: str) -> None:
        found = self.current()
        if found is None:
            return

        def done(numbers) -> None:
            self.found = [dataclasses.replace(d, final=tuple(numbers)) if d.verbatim_id == found.verbatim_id else d
                          for d in self.found]
            more = self.next_unsettled()
            self.redraw()
            after = " · next unsettled shown" if more else " · every difference shown is settled"
            self.say(f"{found.respondent}: {FINAL} now holds {self._labels(numbers)} ({what}){after}")
        self.app.attempt(decide, done, self.say)

    def action_take(self, side: str) -> None:
        found = self.current()
        if found is None:
            return
        s, vid = self.session, found.verbatim_id
        decide = {"left": lambda: adjudication.take(s.study, s.question.name, vid, self.left),
                  "right": lambda: adjudication.take(s.study, s.question.name, vid, self.right),
                  "union": lambda: adjudication.take_union(s.study, s.question.name, vid, [self.left, self.right])}
        what = {"left": f"{self.left}'s", "right": f"{self.right}'s", "union": "both"}[side]
        self._decide(decide[side], what)

    def action_pick(self) -> None:
        found = self.current()
        if found is None:
            return
        s, vid = self.session, found.verbatim_id
        start = found.final if found.final is not None else sorted(
            set(found.codes.get(self.left) or ()) | set(found.codes.get(self.right) or ()))

        def run(line: str | None) -> None:
            if line is None:
                return
            try:
                numbers = [int(part) for part in line.replace(",", " ").split()]
            except ValueError:
                self.say(f"{line.strip()!r}: give code numbers, e.g. 3 7 12", error=True)
                return
            self._decide(lambda: adjudication.set_final(s.study, s.question.name, vid, numbers), "picked")
        self.app.push_screen(PromptModal(f"Codes for {FINAL} on {found.respondent}",
                                         "code numbers, e.g. 3 7 12 (empty: no code)",
                                         value=" ".join(map(str, start))), run)

    def action_filter_pair(self) -> None:
        def run(line: str | None) -> None:
            if line is None:
                return
            parts = line.replace(",", " ").replace("versus", " ").replace("vs", " ").split()
            if not parts:
                self.pair = None
                self.position = 0
                self.clear_status()
                self.redraw()
                self.say("showing every difference")
                return
            if len(parts) != 2 or not all(p.isdigit() for p in parts):
                self.say("give two code numbers, e.g. 7 9", error=True)
                return
            self.pair = (int(parts[0]), int(parts[1]))
            self.position = 0
            self.clear_status()
            self.redraw()
            self.say(f"{len(self.shown()):,} differences where one coder gave {parts[0]} and the other {parts[1]}")
        value = f"{self.pair[0]} {self.pair[1]}" if self.pair else ""
        self.app.push_screen(PromptModal("Only differences where one coder gave X and the other Y",
                                         "two code numbers, e.g. 7 9 (empty shows all)", value=value), run)

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
            self.clear_status()
            self.load()
        self.app.push_screen(PromptModal("Compare which two coders?", f"coders here: {names}",
                                         value=f"{self.left} {self.right}"), run)


def coding_ranked(session) -> list[tuple[str, int]]:
    """Coders of the question with their hand-code counts, most active first (then coders with marks only)."""
    ranked = astore.coders_of_question(session.study, session.question.id)
    seen = {c for c, _ in ranked}
    return ranked + [(c, 0) for c in dq.question_coders(session.study, session.question.id) if c not in seen]
