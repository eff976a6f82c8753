"""The terms screen: the question's terms, kwic lines for the one selected, drivers when an outcome is set,
and bulk coding of the verbatims containing a term after a review step.

The term matrix comes from the study's cache, read in a background thread. The drivers are fitted in a child
process (opencode.tui.drivers_job) on that cached matrix, with their progress and time shown; the process is
killed when the coder leaves the screen or quits, so Ctrl+Q exits at once and the desk never waits for it.
"""

from __future__ import annotations

import time

import numpy as np
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.timer import Timer
from textual.widgets import DataTable, Footer, Static

from opencode.errors import OpenCodeError
from opencode.study.store import Study
from opencode.text.kwic import kwic
from opencode.text.matrix import TermMatrix
from opencode.text.study_text import term_matrix
from opencode.text.words import top_terms
from opencode.tui.background import ProcessJob, ThreadJob
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import ConfirmModal, PromptModal
from opencode.tui.widgets.panes import Pane

MAX_TERMS = 300
KWIC_LINES = 40


class TermsScreen(StudyScreen):
    """Terms by how many verbatims use them; kwic and bulk coding for the selected term."""

    BINDINGS = [
        Binding("c", "code_all", "code all with term"),
        Binding("f", "find_on_desk", "show on desk"),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(" terms: reading the verbatims…", id="terms-title", classes="screen-title", markup=False)
        with Horizontal(classes="split"):
            yield DataTable(id="terms-table", cursor_type="row", zebra_stripes=True)
            with Pane(classes="side", id="kwic-pane"):
                yield Static(id="kwic", markup=False)
        yield Static(id="drivers", classes="detail", markup=False)
        yield Static(id="status", markup=False)
        yield Footer(compact=True)

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.add_columns("term", "verbatims", "%", "words")
        table.focus()
        self.tm: TermMatrix | None = None
        self.rows = []
        self.drivers_job: ProcessJob | None = None
        self.drivers_done = False
        self._drivers_started = 0.0
        self._drivers_step = ""
        self._ticker: Timer | None = None
        ThreadJob(self.app, self._read_matrix, self._ready, self._failed).start()

    def on_screen_resume(self) -> None:
        if not self.drivers_done and (self.drivers_job is None or not self.drivers_job.running):
            self.start_drivers()

    def on_screen_suspend(self) -> None:
        self.stop_drivers("drivers: stopped when you left the screen; they start again when you come back")

    def on_unmount(self) -> None:
        self.stop_drivers("")

    # -- drivers in a child process --------------------------------------------------------------------------
    def start_drivers(self) -> None:
        s = self.session
        self._drivers_started = time.monotonic()
        self._drivers_step = "starting"
        self.drivers_job = ProcessJob(self.app, "opencode.tui.drivers_job", [str(s.study.path), s.question.name],
                                      self._drivers_line, self._drivers_ended).start()
        if self._ticker is None:
            self._ticker = self.set_interval(1.0, self._show_progress)
        self._show_progress()

    def stop_drivers(self, note: str) -> None:
        if self.drivers_job is not None and self.drivers_job.running:
            self.drivers_job.cancel()
            if note and self.is_attached:
                self.query_one("#drivers", Static).update(Text(note, style="italic"))
        self._stop_ticker()

    def _stop_ticker(self) -> None:
        if self._ticker is not None:
            self._ticker.stop()
            self._ticker = None

    def _show_progress(self) -> None:
        if self.drivers_done or not self.is_attached:
            return
        seconds = time.monotonic() - self._drivers_started
        self.query_one("#drivers", Static).update(Text(
            f"drivers: fitting on the cached term matrix… {self._drivers_step} · {seconds:.0f} s "
            "(leave the screen to stop)", style="italic"))

    def _drivers_line(self, message: dict) -> None:
        if "progress" in message:
            done, total = message["progress"]
            self._drivers_step = f"step {done} of {total} done"
            self._show_progress()
            return
        self.drivers_done = True
        self._stop_ticker()
        if "error" in message:
            self._show_drivers([], f"drivers: {message['error']}")
        else:
            self._show_drivers([tuple(row) for row in message.get("rows", [])], message.get("note", ""))

    def _drivers_ended(self, code: int) -> None:
        if not self.drivers_done:
            self.drivers_done = True
            self._stop_ticker()
            self._show_drivers([], f"drivers: the fit stopped unexpectedly (exit {code})")

    def _show_drivers(self, found: list[tuple[str, str]], note: str) -> None:
        if not self.is_attached:
            return
        text = Text(note, style="italic")
        if found:
            text.append("\n")
            for term, figure in found:
                text.append(f"{term} ", style="bold")
                text.append(f"{figure}   ")
        self.query_one("#drivers", Static).update(text)

    # -- the term matrix in a thread -------------------------------------------------------------------------
    def _read_matrix(self):
        s = self.session
        with Study.open(s.study.path) as own:  # the study's cached matrix, read on this thread's own connection
            tm, frame = term_matrix(own, s.question.name)
        return tm, frame, top_terms(tm, n=MAX_TERMS)

    def _failed(self, error: BaseException) -> None:
        if self.is_attached:
            self.say(str(error) if isinstance(error, OpenCodeError) else f"terms: {error!r}", True)

    def _ready(self, found) -> None:
        if not self.is_attached:
            return
        tm, frame, rows = found
        self.tm, self.texts, self.rows = tm, frame["text"].tolist(), rows
        self.row_verbatim_ids = frame["verbatim_id"].to_numpy()[tm.rows_source]
        table = self.query_one(DataTable)
        for row in rows:
            table.add_row(Text(row.label), row.verbatims, f"{row.percent:.1f}",
                          Text(", ".join(form for form, _ in row.surfaces[:3])))
        self.query_one("#terms-title", Static).update(
            Text(f" terms of {self.session.question.name}  ·  {len(rows)} shown  ·  "
                 f"{tm.counts.shape[0]:,} verbatims with terms", style="bold"))
        self.show_kwic()

    def selected(self):
        table = self.query_one(DataTable)
        if not self.rows or table.row_count == 0:
            return None
        return self.rows[min(table.cursor_row, len(self.rows) - 1)]

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self.show_kwic()

    def show_kwic(self) -> None:
        row = self.selected()
        if row is None or self.tm is None:
            return
        room = self.query_one("#kwic-pane", Pane).scrollable_content_region.width or 60
        side = max((room - len(row.label) - 2) // 2, 8)
        text = Text()
        for line in kwic(self.tm, self.texts, row.term, width=side, limit=KWIC_LINES):
            if text:
                text.append("\n")
            text.append(line.left[-side:].rjust(side), style="dim")
            text.append(f" {line.match} ", style="bold underline")
            text.append(line.right[:side], style="dim")
        self.query_one("#kwic", Static).update(text)

    def term_ids(self, term: str) -> list[int]:
        """Verbatim ids of the rows that contain a term."""
        column = self.tm.counts[:, self.tm.column(term)]
        rows = np.unique(column.nonzero()[0])
        return [int(self.row_verbatim_ids[r]) for r in rows]

    def action_code_all(self) -> None:
        row = self.selected()
        if row is None:
            return
        s = self.session
        ids = self.term_ids(row.term)

        def review(number_text: str | None) -> None:
            if not number_text or not number_text.strip():
                return
            if not number_text.strip().isdigit() or s.code(int(number_text)) is None:
                self.say(f"the frame has no code {number_text.strip()!r}", error=True)
                return
            number = int(number_text)
            code = s.code(number)
            sample = "\n".join(f"· {t[:90]}" for t in (self.texts[self.tm.rows_source[i]] for i in
                                                      np.unique(self.tm.counts[:, self.tm.column(row.term)]
                                                                .nonzero()[0])[:8]))
            body = (f"Give code {number} {code.label} (as your hand code, {s.coder}) to the {len(ids):,} verbatims "
                    f"containing {row.label!r}. Codes you hold already stay. First few:\n{sample}")
            self.app.push_screen(ConfirmModal("Review before coding in bulk", body),
                                 lambda ok: ok and apply(number))

        def apply(number: int) -> None:
            self.app.attempt(lambda: s.bulk_assign(ids, number),
                             lambda n: self.say(f"code {number} given to {n:,} more verbatims; one undo (^z on the "
                                               "desk) takes them all back"), self.say)
        self.app.push_screen(PromptModal(f"Code every verbatim with {row.label!r} ({len(ids):,})",
                                         "the code number to give them"), review)

    def action_find_on_desk(self) -> None:
        row = self.selected()
        if row is None:
            return
        ids = self.term_ids(row.term)
        self.session.show_ids(np.array(ids, dtype=np.int64), f"term {row.label}")
        self.app.action_show("desk")
