"""The themes screen: browse the question's saved theme runs and promote a theme to a draft code.

A promoted theme becomes a code with a proposed label, a description naming the run, and a keyword rule
over its top terms (a draft: the rule only suggests, a person confirms at the desk).
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.widgets import DataTable, Footer, Static

from opencode.analysis.themes.study import promote_theme, theme_rule
from opencode.analysis.themes.summary import propose_code_label
from opencode.errors import OpenCodeError
from opencode.study import theme_runs_store
from opencode.text.study_text import analyzer_for
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import PromptModal

RULE_TERMS = 4


def themes_of(summary: dict) -> list[dict]:
    """The themes recorded in a run's summary, each with its number in the run (empty for runs holding none,
    e.g. a search over k)."""
    themes = summary.get("themes", []) if isinstance(summary, dict) else []
    return [{**t, "number": n} for n, t in enumerate(themes, 1) if isinstance(t, dict) and t.get("top_terms")]


class ThemesScreen(StudyScreen):
    """Saved theme runs (newest first) and the themes of the one selected."""

    BINDINGS = [
        Binding("tab", "switch_table", "runs/themes", show=False),
        Binding("p", "promote", "promote to draft code"),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(id="themes-title", classes="screen-title", markup=False)
        with Horizontal(classes="split"):
            yield DataTable(id="runs-table", cursor_type="row")
            yield DataTable(id="themes-table", cursor_type="row", zebra_stripes=True)
        yield Static(id="theme-detail", classes="detail", markup=False)
        yield Static(id="status", markup=False)
        yield Footer(compact=True)

    def on_mount(self) -> None:
        s = self.session
        self.runs = list(reversed(theme_runs_store.run_rows(s.study, s.question.id)))
        self._themes: dict[int, list[dict]] = {}
        runs = self.query_one("#runs-table", DataTable)
        runs.add_columns("run", "method", "k", "saved")
        for run in self.runs:
            runs.add_row(run["id"], Text(str(run["method"])), run["k"], run["created_at"][:16].replace("T", " "))
        self.query_one("#themes-table", DataTable).add_columns("theme", "draft label", "verbatims", "top terms")
        title = Text(f" theme runs of {s.question.name}  ·  {len(self.runs)} saved", style="bold")
        if not self.runs:
            title.append("  ·  none yet: run `oecode themes search` or `oecode themes fit` to find some",
                         style="italic")
        self.query_one("#themes-title", Static).update(title)
        self.show_run()
        runs.focus()

    def current_run(self):
        runs = self.query_one("#runs-table", DataTable)
        return self.runs[runs.cursor_row] if self.runs and runs.row_count else None

    def current_themes(self) -> list[dict]:
        run = self.current_run()
        if run is None:
            return []
        if run["id"] not in self._themes:
            self._themes[run["id"]] = themes_of(theme_runs_store.load_run(self.session.study, run["id"]).summary)
        return self._themes[run["id"]]

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.data_table.id == "runs-table":
            self.show_run()
        else:
            self.show_theme()

    def show_run(self) -> None:
        table = self.query_one("#themes-table", DataTable)
        table.clear()
        for theme in self.current_themes():
            terms = [str(t) for t in theme["top_terms"]]
            table.add_row(theme["number"], Text(str(theme.get("label") or propose_code_label(terms))),
                          theme.get("n_dominant", ""), Text(", ".join(terms[:6])))
        self.show_theme()

    def selected_theme(self) -> dict | None:
        themes = self.current_themes()
        table = self.query_one("#themes-table", DataTable)
        return themes[min(table.cursor_row, len(themes) - 1)] if themes and table.row_count else None

    def show_theme(self) -> None:
        theme = self.selected_theme()
        text = Text()
        if theme is not None:
            text.append(", ".join(str(t) for t in theme["top_terms"][:12]), style="bold")
            for rep in theme.get("representatives", [])[:3]:
                if isinstance(rep, dict) and rep.get("text"):
                    text.append(f"\n· {str(rep['text'])[:160]}")
        self.query_one("#theme-detail", Static).update(text)

    def action_switch_table(self) -> None:
        runs, themes = self.query_one("#runs-table", DataTable), self.query_one("#themes-table", DataTable)
        (themes if runs.has_focus else runs).focus()

    def action_promote(self) -> None:
        theme, run = self.selected_theme(), self.current_run()
        if theme is None:
            self.say("choose a theme first (Tab moves to the themes)", error=True)
            return
        s = self.session
        terms = [str(t) for t in theme["top_terms"]]
        try:
            rule = theme_rule(terms, analyzer_for(s.study, s.question.name), RULE_TERMS)
        except OpenCodeError as error:
            self.say(str(error), error=True)
            return

        def run_promote(label: str | None) -> None:
            if not label or not label.strip():
                return

            def promote():
                return promote_theme(s.study, run["id"], theme["number"], question=s.question.name, label=label,
                                     n_rule_terms=RULE_TERMS, actor=s.coder)

            def done(code) -> None:
                s.reload_frame()
                self.say(f"draft code {code.number} {code.label} added with the rule {code.rule}")
            self.app.attempt(promote, done, self.say)
        self.app.push_screen(PromptModal("Promote theme to a draft code", f"rule suggested: {rule}",
                                         value=theme.get("label") or propose_code_label(terms)), run_promote)
