"""The frame screen: edit the question's code frame (labels, descriptions, hotkeys, nets, merge, retire) with counts.

Letters are free here (no hotkeys are live), so edits sit on plain letters; every edit is one undoable change
filed under the coder's name. Labels wrap in their column (rows grow), so the table fits 80 columns; kind,
net, description, include and exclude notes and the rule of the code under the cursor show below it.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual import events
from textual.widgets import DataTable, Footer, Static

from opencode.coding import frames
from opencode.coding.frames import Code
from opencode.errors import OpenCodeError
from opencode.study import assignments_store as astore
from opencode.tui.screens.base import StudyScreen
from opencode.tui.screens.modals import AddCodeModal, ConfirmModal, PromptModal

#: (title, width) of the columns beside the label, which takes the rest of the width.
COLUMNS = (("key", 3), ("no.", 4), ("label", 0), ("mine", 6), ("uses", 6), ("state", 7))


class FrameScreen(StudyScreen):
    """The code frame as a table; edits go through opencode.coding.frames."""

    BINDINGS = [
        Binding("enter,e", "edit('label')", "label", key_display="e"),
        Binding("d", "edit('description')", "description"),
        Binding("i", "edit('include')", "include note", show=False),
        Binding("x", "edit('exclude')", "exclude note", show=False),
        Binding("k", "edit('hotkey')", "hotkey"),
        Binding("n", "net", "net", show=False),
        Binding("m", "merge", "merge", show=False),
        Binding("r", "retire", "retire/restore", show=False),
        Binding("a", "add", "add"),
        Binding("ctrl+z", "undo", "undo", show=False),
        Binding("ctrl+y", "redo", "redo", show=False),
        Binding("escape,f2", "app.show('desk')", "desk", key_display="esc"),
    ]

    def compose(self) -> ComposeResult:
        yield Static(id="frame-title", classes="screen-title", markup=False)
        yield DataTable(id="frame-table", cursor_type="row", zebra_stripes=True)
        yield Static(id="frame-detail", classes="detail", markup=False)
        yield Static(id="status", markup=False)
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self._label_width = 0
        self._shown = False
        self.query_one(DataTable).focus()

    def on_screen_resume(self) -> None:
        if not self._shown:  # read the frame once per visit (Textual can resume a new screen twice)
            self._shown = True
            self.reload()

    def on_screen_suspend(self) -> None:
        self._shown = False

    def on_resize(self, event: events.Resize) -> None:
        if self._shown and self._wanted_label_width() != self._label_width:
            self.reload(keep=self.current().number if self.current() else None)

    def _wanted_label_width(self) -> int:
        others = sum(width + 2 for _, width in COLUMNS if width)
        return max(self.size.width - others - 3, 12)

    def reload(self, keep: int | None = None) -> None:
        """Read the frame and counts again and redraw the table, staying on code `keep` if given."""
        s = self.session
        s.reload_frame()
        s.refresh_counts()
        table = self.query_one(DataTable)
        row = table.cursor_row
        width = self._wanted_label_width()
        if width != self._label_width:
            self._label_width = width
            table.clear(columns=True)
            for title, column_width in COLUMNS:
                table.add_column(title, width=column_width or width)
        table.clear()
        for code in s.codes:
            uses = astore.count_of_code(s.study, code.id)
            mine = s.counts.nets.get(code.number, 0) if code.is_net else s.counts.codes.get(code.number, 0)
            label = Text(code.label + (" (net)" if code.is_net else ""), style="bold" if code.is_net else "")
            table.add_row(Text(code.hotkey or ""), code.number, label, mine, uses,
                          "in use" if code.active else "retired", key=str(code.number), height=None)
        numbers = [c.number for c in s.codes]
        if keep in numbers:
            row = numbers.index(keep)
        if numbers:
            table.move_cursor(row=min(max(row, 0), len(numbers) - 1))
        title = Text(f" code frame of {s.question.name}", style="bold")
        title.append(f"  ·  {len([c for c in s.codes if not c.is_net])} codes, "
                     f"{len([c for c in s.codes if c.is_net])} nets  ·  'mine' = your hand codes, 'uses' = everyone")
        self.query_one("#frame-title", Static).update(title)
        self.show_detail()

    def current(self) -> Code | None:
        """The code under the cursor."""
        table = self.query_one(DataTable)
        if not self.session.codes or table.row_count == 0:
            return None
        return self.session.codes[min(table.cursor_row, len(self.session.codes) - 1)]

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self.show_detail()

    def show_detail(self) -> None:
        code = self.current()
        text = Text()
        if code is not None:
            text.append(f"{code.number} {code.label}", style="bold")
            net = self.session.code(code.net) if code.net is not None else None
            text.append(f"  ·  {code.kind}" + (f" in net {net.number} {net.label}" if net else ""), style="dim")
            for name, value in (("description", code.description), ("include", code.include),
                                ("exclude", code.exclude), ("rule", code.rule)):
                if value:
                    text.append(f"\n{name}: ", style="dim")
                    text.append(value)
        else:
            text.append("No codes yet: press a to add one.")
        self.query_one("#frame-detail", Static).update(text)

    def change(self, fn, message: str, keep: int | None = None) -> None:
        def done(result) -> None:
            self.reload(keep=result.number if isinstance(result, Code) else keep)
            self.say(message)
        self.app.attempt(fn, done, self.say)

    # -- edits -----------------------------------------------------------------------------------------------
    def action_edit(self, field: str) -> None:
        code = self.current()
        if code is None:
            return
        s = self.session

        def run(value: str | None) -> None:
            if value is None:
                return
            self.change(lambda: frames.edit_code(s.study, s.question.name, code.number, actor=s.coder,
                                                 **{field: value.strip()}),
                        f"code {code.number}: {field} saved", code.number)
        hint = "one character; empty removes it" if field == "hotkey" else ""
        self.app.push_screen(PromptModal(f"{field.capitalize()} of {code.number} {code.label}", hint,
                                         value=getattr(code, field) or ""), run)

    def action_net(self) -> None:
        code = self.current()
        if code is None:
            return
        s = self.session
        nets = ", ".join(f"{c.number} {c.label}" for c in s.codes if c.is_net and c.number != code.number)

        def run(value: str | None) -> None:
            if value is None:
                return
            text = value.strip()
            if text and not text.isdigit():
                self.say(f"net {text!r}: give the net's number", error=True)
                return
            self.change(lambda: frames.set_net(s.study, s.question.name, code.number, int(text) if text else None,
                                               actor=s.coder), f"code {code.number}: net saved", code.number)
        self.app.push_screen(PromptModal(f"Net of {code.number} {code.label}", f"a net number, empty for none; nets: "
                                         f"{nets or 'none yet (a adds one: kind net)'}",
                                         value=str(code.net or "")), run)

    def action_merge(self) -> None:
        code = self.current()
        if code is None:
            return
        s = self.session

        def confirmed(target: int, ok: bool | None) -> None:
            if ok:
                self.change(lambda: frames.merge_codes(s.study, s.question.name, code.number, target, actor=s.coder),
                            f"merged {code.number} into {target}", target)

        def run(value: str | None) -> None:
            if value is None or not value.strip():
                return
            if not value.strip().isdigit():
                self.say(f"merge: {value.strip()!r} is not a code number", error=True)
                return
            target = int(value)
            other = s.code(target)
            if other is None:
                self.say(f"merge: the frame has no code {target}", error=True)
                return
            uses = astore.count_of_code(s.study, code.id)
            self.app.push_screen(ConfirmModal(
                "Merge codes", f"{code.number} {code.label} ({uses} assignments, every coder) goes into "
                f"{target} {other.label}, and {code.number} leaves the frame. Ctrl+Z undoes it."),
                lambda ok: confirmed(target, ok))
        self.app.push_screen(PromptModal(f"Merge {code.number} {code.label} into code number"), run)

    def action_retire(self) -> None:
        code = self.current()
        if code is None:
            return
        s = self.session
        self.change(lambda: frames.retire_code(s.study, s.question.name, code.number, actor=s.coder,
                                               active=not code.active),
                    f"code {code.number} {'restored' if not code.active else 'retired (kept with its codes)'}",
                    code.number)

    def action_add(self) -> None:
        s = self.session
        used = {c.hotkey for c in s.codes if c.hotkey}
        free = "".join(ch for ch in "abcdefghijklmnopqrstuvwxyz0123456789" if ch not in used)

        def run(form: dict | None) -> None:
            if form:
                self.change(lambda: s.add_code(form["label"], form["hotkey"], form["net"], assign_here=False,
                                               kind=form["kind"]), f"added {form['label']}")
        self.app.push_screen(AddCodeModal(free, [(c.number, c.label) for c in s.codes if c.is_net],
                                          title="New code or net", offer_net=True), run)

    def action_undo(self) -> None:
        self.change(self._undo, "undone")

    def action_redo(self) -> None:
        self.change(self._redo, "redone")

    def _undo(self):
        if self.session.undo() is None:
            raise OpenCodeError("nothing to undo")

    def _redo(self):
        if self.session.redo() is None:
            raise OpenCodeError("nothing to redo")
