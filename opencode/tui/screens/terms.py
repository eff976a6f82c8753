"""The terms screen: the question's terms, kwic lines for the one selected, drivers when an outcome is set,
and bulk coding of the verbatims containing a term after a review step.

The term matrix and the drivers are computed in threads (the screen stays responsive, drivers show their
progress). Drivers come from `drivers_source`, a pluggable function: it returns rows to show and a line about
them (model quality), or no rows and a sentence saying why there are none.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.widgets import DataTable, Footer, Static
from textual.worker import get_current_worker

from opencode.analysis.drivers import study as study_drivers
from opencode.errors import OpenCodeError
from opencode.study.store import Study
from opencode.text.kwic import kwic
from opencode.text.matrix import TermMatrix
from opencode.text.study_text import term_matrix
from opencode.text.words import top_terms
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import ConfirmModal, PromptModal
from opencode.tui.widgets.panes import Pane

MAX_TERMS = 300
KWIC_LINES = 40
#: Driver terms shown per side on the terms screen.
DRIVERS_PER_SIDE = 8
NO_OUTCOME = "drivers: set a closed-ended outcome first (oecode drivers / a variable with role outcome)"

Progress = Callable[[int, int], None]
DriverRows = tuple[list[tuple[str, str]], str]


def ranked_drivers(study: Study, question: str, progress: Progress | None = None) -> DriverRows:
    """Drivers for the question's outcome (the choice `oecode drivers` stored, else the role-outcome variable).

    Rows are (term, figure) for the top terms of each side; the note is the model's quality line, or why
    there is no ranking (no outcome, the text barely predicts it, or a problem with the data).
    """
    choice = study_drivers.drivers_choice(study, question)
    if choice is None:
        return [], NO_OUTCOME
    try:
        result = study_drivers.question_drivers(study, question, choice["outcome"], split=choice.get("split"),
                                                one_vs_rest=bool(choice.get("one_vs_rest")), progress=progress)
    except OpenCodeError as error:
        return [], f"drivers against {choice['outcome']}: {error}"
    comparison = result.first
    note = "  ".join(study_drivers.quality_lines(comparison))
    if comparison.ranker.quality_note_:
        return [], f"{note}\n{comparison.ranker.quality_note_}"
    rows = []
    labels = dict(zip(comparison.table["term"], comparison.table["label"]))
    for side in (1, 0):
        arrow = "+" if side == 1 else "-"
        for _, row in comparison.ranker.top_terms(side, DRIVERS_PER_SIDE).iterrows():
            rows.append((labels[row["term"]], f"{arrow} OR {row['odds_ratio']:.2f}"))
    return rows, note


#: (study, question, progress) -> ([(term, figure text)], note). Replace to show another drivers ranking.
drivers_source: Callable[..., DriverRows] = ranked_drivers


class TermsScreen(StudyScreen):
    """Terms by how many verbatims use them; kwic and bulk coding for the selected term."""

    BINDINGS = [
        Binding("c", "code_all", "code all with term"),
        Binding("f", "find_on_desk", "show on desk"),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(" terms: reading the verbatims…", id="terms-title", classes="screen-title")
        with Horizontal(classes="split"):
            yield DataTable(id="terms-table", cursor_type="row", zebra_stripes=True)
            with Pane(classes="side"):
                yield Static(id="kwic")
        yield Static(id="drivers", classes="detail")
        yield Static(id="status")
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        table.add_columns("term", "verbatims", "%", "words")
        table.focus()
        self.tm: TermMatrix | None = None
        self.rows = []
        self.run_worker(self._build, thread=True, group="terms", exclusive=True)
        self.query_one("#drivers", Static).update(Text("drivers: reading the outcome…", style="italic"))
        self._drivers()

    @work(thread=True, group="drivers", exclusive=True)
    def _drivers(self) -> None:
        """Fit the drivers off the UI thread on a connection of its own, showing the steps as they finish."""
        s = self.session

        worker = get_current_worker()

        def show(found: list[tuple[str, str]], note: str) -> None:
            if not worker.is_cancelled:
                self.app.call_from_thread(self._show_drivers, found, note)

        try:
            with Study.open(s.study.path) as study:
                found, note = drivers_source(study, s.question.name,
                                             lambda done, total: show([], f"drivers: fitting… step {done} of {total}"))
        except OpenCodeError as error:
            found, note = [], f"drivers: {error}"
        show(found, note)

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

    def _build(self) -> None:
        s = self.session
        try:  # the study's cached matrix, read on this worker's own connection
            with Study.open(s.study.path) as own:
                tm, frame = term_matrix(own, s.question.name)
            rows = top_terms(tm, n=MAX_TERMS)
        except OpenCodeError as error:
            self.app.call_from_thread(self.say, str(error), True)
            return
        self.app.call_from_thread(self._ready, tm, frame, rows)

    def _ready(self, tm: TermMatrix, frame, rows) -> None:
        self.tm, self.texts, self.rows = tm, frame["text"].tolist(), rows
        self.row_verbatim_ids = frame["verbatim_id"].to_numpy()[tm.rows_source]
        table = self.query_one(DataTable)
        for row in rows:
            table.add_row(row.label, row.verbatims, f"{row.percent:.1f}",
                          ", ".join(form for form, _ in row.surfaces[:3]))
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
        text = Text()
        for line in kwic(self.tm, self.texts, row.term, width=30, limit=KWIC_LINES):
            if text:
                text.append("\n")
            text.append(line.left.rjust(30), style="dim")
            text.append(f" {line.match} ", style="bold underline")
            text.append(line.right, style="dim")
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
