"""The desk: one verbatim at a time, its context, the code frame with hotkeys, suggestions, progress.

Printable keys are code hotkeys (from the frame); everything else sits on keys no hotkey can take:
arrows, Enter, Space, Home/End, PgUp/PgDn, Esc, '/', '?', function keys and Ctrl combinations. The app hands
every key to `take_key` in the order typed (see app.py), so each acts on the verbatim its predecessors left.
"""

from __future__ import annotations

from rich.text import Text
from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.widgets import Footer

from opencode.coding.frames import RESERVED_HOTKEYS
from opencode.tui.background import IMPORTING, ThreadJob
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import AddCodeModal, PromptModal
from opencode.tui.widgets.panes import (CodeInfoPane, ContextPane, Drawn, FrameList, NotePane, Pane, SuggestionPane,
                                        VerbatimView)

SEARCH_HINT = ('words to find · #3 has code 3 · uncoded · blank / answered · support=5 or '
               'age_band="65 or over" (all combined)')


class DeskScreen(StudyScreen):
    """Code verbatims one by one; every change is committed before the screen redraws."""

    BINDINGS = [
        Binding("right", "move(1)", "next", key_display="→"),
        Binding("left", "move(-1)", "back", key_display="←"),
        Binding("enter", "done_next", "done+next", key_display="⏎"),
        Binding("space", "next_uncoded", "skip", key_display="␣"),
        Binding("down", "unsure(True)", "next unsure suggestion", show=False),
        Binding("up", "unsure(False)", "previous unsure suggestion", show=False),
        Binding("home", "first", "first verbatim", show=False),
        Binding("end", "last", "last verbatim", show=False),
        Binding("pagedown", "scroll_frame(1)", "scroll the frame down", show=False),
        Binding("pageup", "scroll_frame(-1)", "scroll the frame up", show=False),
        Binding("ctrl+k", "accept_top", "accept top suggestion", show=False),
        Binding("ctrl+a", "accept_all", "accept all suggestions", show=False),
        Binding("ctrl+x", "reject_top", "reject top suggestion", show=False),
        Binding("ctrl+d", "describe", "describe a code (then its hotkey)", show=False),
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
                yield CodeInfoPane(id="code-info")
                yield NotePane(id="note")
            yield FrameList(id="frame-list")
        yield Drawn(id="status")
        yield Footer(compact=True)

    # -- life cycle ------------------------------------------------------------------------------------------
    def on_mount(self) -> None:
        self.highlighter = None
        self._rules_wanted: tuple[str, ...] | None = None
        self._said_on: int | None = None      # the verbatim the status message is about
        self._stale = False                   # another screen changed the study while the desk was hidden
        self._describing = False              # the next hotkey describes its code instead of toggling it
        self.last_code: int | None = None     # the code last pressed (its notes are shown)
        seconds = getattr(self.app, "refresh_seconds", 0)
        if seconds:
            self.set_interval(seconds, self.periodic_refresh)
        self.watch(self.app, "study_changes", self._study_changed, init=False)
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

    def _study_changed(self, _changes: int) -> None:
        if self.app.current_mode != "desk":
            self._stale = True

    def on_screen_resume(self) -> None:
        if not self.is_mounted:
            return
        if self._stale:
            self._stale = False
            self.session.reload_frame()
            self.session.refresh_counts()
        self.redraw()

    # -- keys, in the order typed ----------------------------------------------------------------------------
    async def take_key(self, event: events.Key) -> bool:
        """Handle one key now (called by the app for every key while the desk is shown); False: not ours."""
        character = event.character
        hotkey = bool(character) and character.isprintable() and character not in RESERVED_HOTKEYS
        if self._describing:
            self._describing = False
            if hotkey:
                self.describe(character)
                return True
        active = self.app.active_bindings.get(event.key)
        if active is not None:
            if active.enabled:
                await self.app.run_action(active.binding.action, active.node)
            return True
        if hotkey:
            self.press_hotkey(character)
            return True
        return False

    def press_hotkey(self, character: str) -> None:
        """A code hotkey: add, accept or remove its code on the verbatim shown."""
        number = self.session.hotkeys().get(character)
        if number is None:
            self.say(f"no code has the key {character!r} (F1 lists the keys; Ctrl+O adds a code)", error=True)
            return
        self.last_code = number

        def report(result) -> str:
            code = self.session.code(number)
            held = result[1]
            return f"{'+' if held else '−'} {number} {code.label if code else ''}"
        self.act(lambda: self.session.toggle_hotkey(character), report)
        self.reveal(number)

    def describe(self, character: str) -> None:
        number = self.session.hotkeys().get(character)
        if number is None:
            self.say(f"no code has the key {character!r}", error=True)
            return
        self.last_code = number
        self.redraw()
        self.reveal(number)

    def reveal(self, number: int) -> None:
        """Scroll the frame panel so a code is in view."""
        pane = self.query_one("#frame-list", FrameList)
        line = pane.line_of(number)
        if line is None:
            return
        height = pane.scrollable_content_region.height
        if line < pane.scroll_y or line >= pane.scroll_y + max(height - 1, 1):
            pane.scroll_to(y=max(line - 1, 0), animate=False)

    # -- drawing ---------------------------------------------------------------------------------------------
    def _spans(self, text: str) -> list[tuple[int, int]]:
        """Rule words to mark; the analyzer loads in a thread so the first screen never waits for it."""
        rules = tuple(sorted(c.rule for c in self.session.codes if c.rule and c.active))
        if rules != self._rules_wanted:
            self._rules_wanted = rules
            ThreadJob(self.app, lambda: _build_highlighter(rules),
                      lambda highlighter: self._highlighter_ready(highlighter, rules)).start()
        return self.highlighter.spans(text) if self.highlighter is not None else []

    def _highlighter_ready(self, highlighter, rules: tuple[str, ...]) -> None:
        if rules == self._rules_wanted and self.is_attached:
            self.highlighter = highlighter
            self.redraw()

    def redraw(self) -> None:
        """Draw everything from the study (a handful of indexed reads)."""
        s = self.session
        shown = s.shown()
        card = shown.card
        if shown.card is None or card.id != self._said_on:
            self.say("", anchor=False)
        total = s.total
        share = f"{s.counts.coded / total:.0%}" if total else "-"
        top = Text()
        top.append(f" {s.question.name}", style="bold")
        if s.question.label and s.question.label != s.question.name:
            top.append(f" {s.question.label}")
        top.append(f"  ·  {s.coder}  ·  {s.counts.coded:,}/{total:,} coded ({share})")
        if s.show_nonanswers:
            top.append("  ·  non-answers served", style="italic")
        pace = s.pace() if getattr(self.app, "show_pace", True) else None
        if pace is not None:
            top.append(f"  ·  {pace:,.0f}/h this session")
        self.query_one("#topbar", Drawn).draw(top, same_size=True)
        head = Text()
        if card is not None:
            head.append(f"respondent {card.respondent}", style="bold")
            where = f"{s.position + 1:,} of {s.view.size:,}"
            head.append(f"  ·  {where}" + (f" found ({s.search})" if s.search else ""))
            if shown.done:
                head.append("  ·  done ✓", style="bold")
            if card.nonanswer:
                head.append("  ·  non-answer", style="italic")
            if shown.blind:
                head.append("  ·  blind sample", style="italic")
        self.query_one("#card-head", Drawn).draw(head, same_size=True)
        spans = self._spans(card.text) if card is not None else []
        if self.query_one("#verbatim", VerbatimView).show(card, spans):
            self.query_one("#verbatim-pane", Pane).scroll_home(animate=False)
        self.query_one("#context", ContextPane).show(s.context())
        codes = {c.number: c for c in s.codes}
        self.query_one("#suggestions", SuggestionPane).show(shown.suggestions, codes)
        about, why = self.last_code, "last pressed"
        if about is None and shown.suggestions:
            about, why = shown.suggestions[0].number, "top suggestion"
        self.query_one("#code-info", CodeInfoPane).show(codes.get(about) if about is not None else None, why)
        self.query_one("#note", NotePane).show(shown.note, shown.others, codes)
        hand = {n for n, a in shown.held.items() if a.source == "hand"}
        self.query_one("#frame-list", FrameList).show(s.codes, s.counts.codes, s.counts.nets, hand,
                                                      {x.number for x in shown.suggestions})

    def say(self, message: str, error: bool = False, anchor: bool = True) -> None:
        """One line under the desk about the verbatim shown; it goes when the desk moves to another."""
        if anchor:
            self._said_on = self.session.current_id
        status = self.query_one("#status", Drawn)
        status.set_class(error, "error")
        status.draw(Text(message))

    # -- doing -----------------------------------------------------------------------------------------------
    def act(self, change, report=None) -> None:
        """Run a change through the library (it commits), then redraw; a busy study offers a retry."""
        def done(result) -> None:
            self.redraw()
            if report is not None:
                message = report(result)
                if message:
                    self.say(message)
        self.app.attempt(change, done, self.say)

    def action_move(self, step: int) -> None:
        self.session.move(step)
        self.redraw()

    def action_first(self) -> None:
        self.session.go_first()
        self.redraw()

    def action_last(self) -> None:
        self.session.go_last()
        self.redraw()

    def action_scroll_frame(self, pages: int) -> None:
        pane = self.query_one("#frame-list", FrameList)
        pane.scroll_to(y=pane.scroll_y + pages * max(pane.scrollable_content_region.height - 1, 1), animate=False)

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

    def _code_words(self, number: int) -> str:
        code = self.session.code(number)
        return f"{number} {code.label}" if code is not None else str(number)

    def action_accept_top(self) -> None:
        def report(number):
            if number is None:
                return "no suggestion here"
            self.last_code = number
            return f"accepted {self._code_words(number)} as your code"
        self.act(self.session.accept_top, report)

    def action_accept_all(self) -> None:
        self.act(self.session.accept_all,
                 lambda ns: f"accepted {', '.join(self._code_words(n) for n in ns)} as your codes" if ns else
                 "no suggestion here")

    def action_reject_top(self) -> None:
        self.act(self.session.reject_top, lambda n: "no suggestion here" if n is None else
                 f"rejected the suggestion {self._code_words(n)} (Ctrl+Z brings it back)")

    def action_describe(self) -> None:
        self._describing = True
        self.say("press a code's hotkey to read its description and notes (nothing is coded)")

    def action_undo(self) -> None:
        self.act(self.session.undo, lambda u: "nothing to undo" if u is None else f"undone: {u.describe()}")

    def action_redo(self) -> None:
        self.act(self.session.redo, lambda u: "nothing to redo" if u is None else f"redone: {u.describe()}")

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
            if not key or not key.strip():
                return

            def go():
                before = self.session.show_nonanswers
                found = self.session.go_to_respondent(key)
                return found, self.session.show_nonanswers and not before

            def report(result) -> str | None:
                found, opened = result
                if not found:
                    return f"respondent {key.strip()!r} gave no answer to this question"
                return "a non-answer: non-answers are served now (Ctrl+P hides them)" if opened else None
            self.act(go, report)
        self.app.push_screen(PromptModal("Go to respondent id", placeholder="e.g. WR04180"), run)

    def action_note(self) -> None:
        def run(text: str | None) -> None:
            if text is not None:
                self.act(lambda: self.session.set_note(text), lambda _: "note saved" if text.strip() else "note cleared")
        self.app.push_screen(PromptModal("Note on this verbatim (empty clears it)", value=self.session.note() or "",
                                         append=True), run)

    def action_add_code(self) -> None:
        used = set(self.session.hotkeys()) | {c.hotkey for c in self.session.codes if c.hotkey}
        free = "".join(ch for ch in "abcdefghijklmnopqrstuvwxyz0123456789" if ch not in used)
        nets = [(c.number, c.label) for c in self.session.codes if c.is_net and c.active]

        def run(form: dict | None) -> None:
            if form:
                def added(code) -> str:
                    self.last_code = code.number
                    return (f"added {code.number} {code.label}" + (f" (key {code.hotkey})" if code.hotkey else "")
                            + " and gave it to this verbatim")
                self.act(lambda: self.session.add_code(form["label"], form["hotkey"], form["net"]), added)
        self.app.push_screen(AddCodeModal(free, nets), run)


def _build_highlighter(rules: tuple[str, ...]):
    """The rule-word highlighter (imports the text analyzer, so it is built in a background thread)."""
    with IMPORTING:
        from opencode.tui.highlight import RuleHighlighter
        return RuleHighlighter(rules)
