"""The desk: one verbatim at a time, its context, the code frame with hotkeys, suggestions, progress.

Printable keys are code hotkeys (from the frame); everything else sits on keys no hotkey can take:
arrows, Enter, Space, Home/End, Esc, '/', '?', function keys and Ctrl combinations.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widgets import Footer

from opencode.coding.frames import RESERVED_HOTKEYS
from opencode.tui.highlight import IMPORTING, RuleHighlighter
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import AddCodeModal, PromptModal
from opencode.tui.widgets.panes import ContextPane, Drawn, FrameList, NotePane, Pane, SuggestionPane, VerbatimView

SEARCH_HINT = ('words to find · #3 has code 3 · uncoded · blank / answered · support=5 or '
               'age_band="65 or over" (all combined)')


class DeskScreen(StudyScreen):
    """Code verbatims one by one; every change is committed before the screen redraws."""

    BINDINGS = [
        Binding("right", "move(1)", "next", key_display="→"),
        Binding("left", "move(-1)", "previous", key_display="←"),
        Binding("enter", "done_next", "done+next", key_display="⏎"),
        Binding("space", "next_uncoded", "skip", key_display="␣"),
        Binding("down", "unsure(True)", "next unsure suggestion", show=False),
        Binding("up", "unsure(False)", "previous unsure suggestion", show=False),
        Binding("home", "first", "first verbatim", show=False),
        Binding("end", "last", "last verbatim", show=False),
        Binding("ctrl+k", "accept_top", "accept top suggestion", show=False),
        Binding("ctrl+a", "accept_all", "accept all suggestions", show=False),
        Binding("ctrl+x", "reject_top", "reject top suggestion", show=False),
        Binding("ctrl+z", "undo", "undo", key_display="^z"),
        Binding("ctrl+y", "redo", "redo", show=False),
        Binding("slash,ctrl+f", "search", "search", key_display="/"),
        Binding("escape", "clear_search", "clear search", show=False),
        Binding("ctrl+g", "go_to", "go to respondent", show=False),
        Binding("ctrl+n", "note", "note", show=False),
        Binding("ctrl+o", "add_code", "new code", show=False),
        Binding("ctrl+r", "refresh_study", "refresh", show=False),
    ]

    def compose(self) -> ComposeResult:
        yield Drawn(id="topbar")
        with Horizontal(id="desk-body"):
            with Vertical(id="desk-left"):
                yield Drawn(id="card-head")
                with Pane(id="verbatim-pane"):
                    yield VerbatimView(id="verbatim")
                yield ContextPane(id="context")
                yield SuggestionPane(id="suggestions")
                yield NotePane(id="note")
            with Pane(id="frame-pane"):
                yield FrameList(id="frame-list")
        yield Drawn(id="status")
        yield Footer()

    # -- life cycle ------------------------------------------------------------------------------------------
    def on_mount(self) -> None:
        self.highlighter: RuleHighlighter | None = None
        self._rules_wanted: tuple[str, ...] | None = None
        seconds = getattr(self.app, "refresh_seconds", 0)
        if seconds:
            self.set_interval(seconds, self.periodic_refresh)
        self._changes = None
        if self.session.study.on_server:  # other coders' work and frame edits, as the server announces them
            from opencode.study.changes import subscribe

            self._changes = subscribe(self.session.study.path, self._heard, ignore_coder=self.session.coder,
                                      min_interval=0.5)
        self.redraw()

    def _heard(self, changes) -> None:
        """Called on the change feed's thread: refresh on the app's own thread."""
        try:
            self.app.call_from_thread(self.periodic_refresh)
        except RuntimeError:  # the app is closing
            pass

    def on_unmount(self) -> None:
        if self._changes is not None:
            self._changes.stop()

    stale = False  # set when another screen (not a dialog) was shown over the desk

    def on_screen_resume(self) -> None:
        if self.stale:
            self.stale = False
            self.app.session.reload_frame()
            self.app.session.refresh_counts()
            self.redraw()

    # -- drawing ---------------------------------------------------------------------------------------------
    def _spans(self, text: str) -> list[tuple[int, int]]:
        """Rule words to mark; the analyzer loads in a thread so the first screen never waits for it."""
        rules = tuple(sorted(c.rule for c in self.session.codes if c.rule and c.active))
        if rules != self._rules_wanted:
            self._rules_wanted = rules
            self.run_worker(lambda: self._build_highlighter(rules), thread=True, group="highlight",
                            exclusive=True)
        return self.highlighter.spans(text) if self.highlighter is not None else []

    def _build_highlighter(self, rules: tuple[str, ...]) -> None:
        with IMPORTING:
            highlighter = RuleHighlighter(rules)
        self.app.call_from_thread(self._highlighter_ready, highlighter, rules)

    def _highlighter_ready(self, highlighter: RuleHighlighter, rules: tuple[str, ...]) -> None:
        if rules == self._rules_wanted:
            self.highlighter = highlighter
            self.redraw()

    def redraw(self) -> None:
        """Draw everything from the study (a handful of indexed reads)."""
        s = self.session
        card = s.card()
        held = {a.number: a for a in s.held()}
        total = s.total
        share = f"{s.counts.coded / total:.0%}" if total else "-"
        top = Text()
        top.append(f" {s.question.name}", style="bold")
        if s.question.label and s.question.label != s.question.name:
            top.append(f" {s.question.label}")
        top.append(f"  ·  {s.coder}  ·  {s.counts.coded:,}/{total:,} coded ({share})")
        pace = s.pace() if getattr(self.app, "show_pace", True) else None
        if pace is not None:
            top.append(f"  ·  {pace:,.0f}/h this session")
        self.query_one("#topbar", Drawn).draw(top, same_size=True)
        head = Text()
        if card is not None:
            head.append(f"respondent {card.respondent}", style="bold")
            where = f"{s.position + 1:,} of {s.view.size:,}"
            head.append(f"  ·  {where}" + (f" found ({s.search})" if s.search else ""))
            if s.is_done():
                head.append("  ·  done ✓", style="bold")
            if card.nonanswer:
                head.append("  ·  non-answer", style="italic")
        self.query_one("#card-head", Drawn).draw(head, same_size=True)
        spans = self._spans(card.text) if card is not None else []
        if self.query_one("#verbatim", VerbatimView).show(card, spans):
            self.query_one("#verbatim-pane", Pane).scroll_home(animate=False)
        self.query_one("#context", ContextPane).show(s.context())
        codes = {c.number: c for c in s.codes}
        self.query_one("#suggestions", SuggestionPane).show(s.suggestions(), codes)
        self.query_one("#note", NotePane).show(s.note(), s.others())
        self.query_one("#frame-list", FrameList).show(s.codes, s.counts.codes, s.counts.nets, held)

    def say(self, message: str, error: bool = False) -> None:
        """One line under the desk: what just happened, or what went wrong."""
        status = self.query_one("#status", Drawn)
        status.set_class(error, "error")
        status.draw(Text(message), same_size=True)

    # -- doing -----------------------------------------------------------------------------------------------
    def act(self, change, report=None) -> None:
        """Run a change through the library (it commits), then redraw; a locked study offers a retry."""
        def done(result) -> None:
            self.redraw()
            if report is not None:
                message = report(result)
                if message:
                    self.say(message)
        self.app.attempt(change, done, self.say)

    def on_key(self, event) -> None:
        character = event.character
        if not character or character in RESERVED_HOTKEYS or not character.isprintable():
            return
        number = self.session.hotkeys().get(character)
        event.stop()
        event.prevent_default()
        if number is None:
            self.say(f"no code has the key {character!r} (F1 lists the keys; Ctrl+O adds a code)", error=True)
            return

        def report(result) -> str:
            code = self.session.code(number)
            held = result[1]
            return f"{'+' if held else '−'} {number} {code.label if code else ''}"
        self.act(lambda: self.session.toggle_hotkey(character), report)

    def action_move(self, step: int) -> None:
        self.session.move(step)
        self.redraw()

    def action_first(self) -> None:
        self.session.go_first()
        self.redraw()

    def action_last(self) -> None:
        self.session.go_last()
        self.redraw()

    def action_done_next(self) -> None:
        def change():
            self.session.mark_done()
            return self.session.next_uncoded()
        self.act(change, lambda more: None if more else "every verbatim is coded: well done")

    def action_next_uncoded(self) -> None:
        found = self.session.next_uncoded()
        self.redraw()
        if not found:
            self.say("no uncoded verbatim left here")

    def action_unsure(self, forward: bool) -> None:
        found = self.session.next_low_confidence(forward)
        self.redraw()
        if not found:
            self.say(f"no suggestion below {self.session.confidence_bar:.0%} "
                     f"{'after' if forward else 'before'} this one")

    def action_accept_top(self) -> None:
        self.act(self.session.accept_top, lambda n: "no suggestion here" if n is None else f"accepted {n}")

    def action_accept_all(self) -> None:
        self.act(self.session.accept_all,
                 lambda ns: f"accepted {', '.join(map(str, ns))}" if ns else "no suggestion here")

    def action_reject_top(self) -> None:
        self.act(self.session.reject_top, lambda n: "no suggestion here" if n is None else f"rejected {n}")

    def action_undo(self) -> None:
        self.act(self.session.undo, lambda a: "nothing to undo" if a is None else f"undone: {a}")

    def action_redo(self) -> None:
        self.act(self.session.redo, lambda a: "nothing to redo" if a is None else f"redone: {a}")

    def action_refresh_study(self) -> None:
        self.act(self.session.refresh, lambda _: "refreshed: everyone's latest codes")

    def periodic_refresh(self) -> None:
        if self.app.screen is self:
            self.act(self.session.refresh)

    def action_search(self) -> None:
        def run(line: str | None) -> None:
            if not line or not line.strip():
                return
            self.act(lambda: self.session.apply_search(line),
                     lambda n: f"{n:,} found · → ← move within them · Esc shows all" if n else
                     f"nothing matches {line!r}")
        self.app.push_screen(PromptModal("Search", SEARCH_HINT), run)

    def action_clear_search(self) -> None:
        if self.session.search is not None:
            self.session.clear_search()
            self.redraw()
            self.say("showing every verbatim")

    def action_go_to(self) -> None:
        def run(key: str | None) -> None:
            if key and key.strip():
                self.act(lambda: self.session.go_to_respondent(key),
                         lambda ok: None if ok else f"respondent {key.strip()!r} gave no answer to this question")
        self.app.push_screen(PromptModal("Go to respondent id", placeholder="e.g. WR04180"), run)

    def action_note(self) -> None:
        def run(text: str | None) -> None:
            if text is not None:
                self.act(lambda: self.session.set_note(text), lambda _: "note saved" if text.strip() else "note cleared")
        self.app.push_screen(PromptModal("Note on this verbatim (empty clears it)", value=self.session.note() or ""),
                             run)

    def action_add_code(self) -> None:
        used = set(self.session.hotkeys()) | {c.hotkey for c in self.session.codes if c.hotkey}
        free = "".join(ch for ch in "abcdefghijklmnopqrstuvwxyz0123456789" if ch not in used)
        nets = [(c.number, c.label) for c in self.session.codes if c.is_net and c.active]

        def run(form: dict | None) -> None:
            if form:
                self.act(lambda: self.session.add_code(form["label"], form["hotkey"], form["net"]),
                         lambda code: f"added {code.number} {code.label}" +
                         (f" [{code.hotkey}]" if code.hotkey else "") + " and gave it to this verbatim")
        self.app.push_screen(AddCodeModal(free, nets), run)
