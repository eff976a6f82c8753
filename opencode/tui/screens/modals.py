"""Small dialogs over the desk: one-line prompts, the add-code form, confirmations, the locked-file retry, help.

Titles, hints and bodies often hold user text (labels, coder names, file names): they are drawn as plain text,
never as markup.
"""

from __future__ import annotations

from typing import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Input, Label, Static


class PromptModal(ModalScreen[str | None]):
    """Ask for one line of text; Enter gives it, Esc gives None.

    A short value shown for editing (a number, a label) is selected, so typing replaces it; with `append=True`
    (a note) the cursor waits at its end instead, so typing adds to what is there and nothing is lost by a
    keystroke."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, title: str, hint: str = "", value: str = "", placeholder: str = "", append: bool = False):
        super().__init__()
        self.title_text, self.hint, self.value, self.placeholder = title, hint, value, placeholder
        self.append = append

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Label(self.title_text, classes="dialog-title", markup=False)
            yield Input(value=self.value, placeholder=self.placeholder, id="prompt-input",
                        select_on_focus=not self.append)
            if self.hint:
                yield Static(self.hint, classes="dialog-hint", markup=False)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        self.dismiss(event.value)

    def action_cancel(self) -> None:
        self.dismiss(None)


class AddCodeModal(ModalScreen[dict | None]):
    """The new-code form: label, optional hotkey and net; Enter in any field adds the code."""

    BINDINGS = [Binding("escape", "cancel", "cancel")]

    def __init__(self, free_keys: str, nets: Sequence[tuple[int, str]], label: str = "",
                 title: str = "New code (given to this verbatim too)", offer_net: bool = False):
        super().__init__()
        self.free_keys, self.nets, self.label = free_keys, nets, label
        self.title_text, self.offer_net = title, offer_net

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Label(self.title_text, classes="dialog-title", markup=False)
            yield Input(value=self.label, placeholder="label, e.g. Wants Sunday opening", id="code-label")
            yield Input(placeholder=f"hotkey (one character; free: {self.free_keys[:24]})", id="code-hotkey",
                        max_length=1)
            nets = ", ".join(f"{n} {label}" for n, label in self.nets) or "no nets yet"
            yield Input(placeholder=f"net number (optional; {nets})"[:120], id="code-net")
            if self.offer_net:
                yield Input(placeholder="kind: code (default) or net", id="code-kind")
            yield Static("Tab moves between fields · Enter adds · Esc cancels", classes="dialog-hint", markup=False)

    def on_input_submitted(self, event: Input.Submitted) -> None:
        label = self.query_one("#code-label", Input).value.strip()
        if not label:
            self.query_one("#code-label", Input).focus()
            self.notify("the label is empty", severity="warning", markup=False)
            return
        net_text = self.query_one("#code-net", Input).value.strip()
        if net_text and not net_text.isdigit():
            self.notify(f"net {net_text!r}: give the net's number", severity="warning", markup=False)
            return
        kind = "code"
        if self.offer_net:
            kind = self.query_one("#code-kind", Input).value.strip().lower() or "code"
            if kind not in ("code", "net"):
                self.notify(f"kind {kind!r}: write code or net", severity="warning", markup=False)
                return
        self.dismiss({"label": label, "hotkey": self.query_one("#code-hotkey", Input).value or None,
                      "net": int(net_text) if net_text else None, "kind": kind})

    def action_cancel(self) -> None:
        self.dismiss(None)


class ConfirmModal(ModalScreen[bool]):
    """A review step before a bulk change: Enter (or y) goes ahead, Esc (or n) does nothing."""

    BINDINGS = [Binding("enter,y", "answer(True)", "go ahead"), Binding("escape,n", "answer(False)", "cancel")]

    def __init__(self, title: str, body: str):
        super().__init__()
        self.title_text, self.body = title, body

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog wide"):
            yield Label(self.title_text, classes="dialog-title", markup=False)
            with VerticalScroll(classes="dialog-body"):
                yield Static(self.body, markup=False)
            yield Static("Enter: go ahead · Esc: cancel", classes="dialog-hint", markup=False)

    def action_answer(self, answer: bool) -> None:
        self.dismiss(answer)


class LockedModal(ModalScreen[bool]):
    """The study is locked by another program: nothing was saved yet; retry or give up."""

    BINDINGS = [Binding("enter,r", "answer(True)", "retry"), Binding("escape", "answer(False)", "give up")]

    def __init__(self, message: str):
        super().__init__()
        self.message = message

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog warn"):
            yield Label("The study file is busy", classes="dialog-title")
            yield Static(self.message, markup=False)
            yield Static("This change is not saved yet. Enter or r: try again · Esc: leave it", classes="dialog-hint",
                         markup=False)

    def action_answer(self, answer: bool) -> None:
        self.dismiss(answer)


class HelpModal(ModalScreen[None]):
    """Every key of the current screen and the app, with what it does."""

    BINDINGS = [Binding("escape,f1,question_mark,q", "close", "close")]

    def __init__(self, title: str, rows: Sequence[tuple[str, str]], notes: str = ""):
        super().__init__()
        self.title_text, self.rows, self.notes = title, rows, notes

    def compose(self) -> ComposeResult:
        text = Text()
        width = max((len(k) for k, _ in self.rows), default=4) + 2
        for i, (keys, what) in enumerate(self.rows):
            if i:
                text.append("\n")
            if not what:
                text.append(keys, style="bold underline")
                continue
            text.append(keys.ljust(width), style="bold")
            text.append(what)
        with Vertical(classes="dialog wide help"):
            yield Label(self.title_text, classes="dialog-title", markup=False)
            with VerticalScroll(classes="dialog-body"):
                yield Static(text)
                if self.notes:
                    yield Static(self.notes, classes="dialog-hint", markup=False)
            yield Static("Esc closes", classes="dialog-hint", markup=False)

    def action_close(self) -> None:
        self.dismiss(None)
