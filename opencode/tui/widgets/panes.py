"""Panels that draw one piece of the desk from plain data (no study access: screens pass what to show)."""

from __future__ import annotations

from typing import Sequence

from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

from opencode.coding.assignments import AssignedCode
from opencode.coding.frames import Code
from opencode.files.palette import OKABE_ITO
from opencode.study.desk_queries import VerbatimCard

#: Words a code rule uses: underlined and bold, so they stand out with or without colour (NO_COLOR).
RULE_WORD_STYLE = f"bold underline {OKABE_ITO['orange']}"


class Pane(VerticalScroll, can_focus=False):
    """A scrolling area that never takes the keyboard (keys stay with the desk)."""


class Drawn(Static):
    """A Static that redraws only when its content changed, and re-lays out only when its size may have."""

    _last: Text | None = None

    def draw(self, content: Text, same_size: bool = False) -> bool:
        """Show `content`; False when it was already shown. same_size: the caller knows the size is unchanged."""
        if self._last is not None and content == self._last:
            return False
        resize = not same_size and (self._last is None or content.plain != self._last.plain)
        self._last = content
        self.update(content, layout=resize)
        return True


class VerbatimView(Drawn):
    """The verbatim, large and wrapped, with rule words marked."""

    def show(self, card: VerbatimCard | None, spans: Sequence[tuple[int, int]] = ()) -> bool:
        """Draw a verbatim (or a note that the view is empty); True when the text changed."""
        if card is None:
            return self.draw(Text("No verbatim here. Esc clears the search.", style="italic"))
        text = Text(card.text or "(empty)")
        for start, end in spans:
            text.stylize(RULE_WORD_STYLE, start, end)
        self.set_class(card.nonanswer, "nonanswer")
        return self.draw(text)


class ContextPane(Drawn):
    """The respondent's closed-ended answers as labels."""

    def show(self, answers: Sequence[tuple[str, str]]) -> None:
        """Draw 'variable: answer' pairs, two to a line when short."""
        text = Text()
        for i, (name, value) in enumerate(answers):
            if i:
                text.append("   ")
            text.append(f"{name}: ", style="dim")
            text.append(value)
        self.display = bool(answers)
        self.draw(text)


class SuggestionPane(Drawn):
    """Rule and machine suggestions on the verbatim, most confident first."""

    def show(self, suggestions: Sequence[AssignedCode], codes: dict[int, Code]) -> None:
        """Draw suggestions with their confidence (rules carry none)."""
        self.display = bool(suggestions)
        text = Text()
        for i, s in enumerate(suggestions):
            code = codes.get(s.number)
            label = code.label if code else f"code {s.number}"
            key = f"[{code.hotkey}] " if code and code.hotkey else ""
            confidence = "rule" if s.confidence is None else f"{s.confidence:.0%}"
            if i:
                text.append("\n")
            text.append("→ " if i == 0 else "  ", style="bold")
            text.append(f"{key}{s.number} {label}")
            text.append(f"  {s.source} {confidence}", style="dim")
        self.draw(text)


class NotePane(Drawn):
    """This coder's note on the verbatim, and other coders' codes after a refresh."""

    def show(self, note: str | None, others: Sequence[tuple[str, int, str]]) -> None:
        """Draw the note and a one-line summary of the other coders."""
        text = Text()
        if note:
            text.append("note: ", style="bold")
            text.append(note)
        by_coder: dict[str, list[str]] = {}
        for coder, number, source in others:
            by_coder.setdefault(coder, []).append(str(number) if source == "hand" else f"{number}?")
        if by_coder:
            if note:
                text.append("\n")
            text.append("others: ", style="dim")
            text.append("; ".join(f"{c} {' '.join(n)}" for c, n in by_coder.items()), style="dim")
        self.display = bool(note or by_coder)
        self.draw(text)


class FrameList(Drawn):
    """The code frame: hotkey, number, this coder's count and label; held codes marked, nets in bold."""

    def show(self, codes: Sequence[Code], counts: dict[int, int], net_counts: dict[int, int],
             held: dict[int, AssignedCode]) -> None:
        """Draw the frame (retired codes left out)."""
        if not codes:
            self.draw(Text("No codes yet.\nCtrl+O adds one.", style="italic"))
            return
        by_number = {c.number: c for c in codes}
        text = Text(no_wrap=True, overflow="ellipsis")
        for code in _frame_order(codes):
            if not code.active:
                continue
            depth, parent = 0, code.net
            while parent is not None and parent in by_number and depth < 3:
                depth, parent = depth + 1, by_number[parent].net
            if text:
                text.append("\n")
            indent = "  " * depth
            if code.is_net:
                text.append(f"   {code.number:>3} ")
                text.append(f"{net_counts.get(code.number, 0):>5}", style="dim")
                text.append(f" {indent}{code.label}", style="bold")
                continue
            mark = held.get(code.number)
            symbol, style = " ", ""
            if mark is not None and mark.source == "hand":
                symbol, style = "●", "bold reverse"
            elif mark is not None:
                symbol, style = "◌", "italic"
            text.append(f"{symbol}{code.hotkey or ' '}", style="bold")
            text.append(f" {code.number:>3} ")
            text.append(f"{counts.get(code.number, 0):>5}", style="dim")
            text.append(f" {indent}")
            text.append(code.label, style=style)
        last = self._last
        self.draw(text, same_size=last is not None and last.plain.count("\n") == text.plain.count("\n"))


def _frame_order(codes: Sequence[Code]) -> list[Code]:
    """Nets followed by their members (depth first), then codes outside any net, each by number."""
    children: dict[int | None, list[Code]] = {}
    numbers = {c.number for c in codes}
    for code in sorted(codes, key=lambda c: c.number):
        parent = code.net if code.net in numbers else None
        children.setdefault(parent, []).append(code)
    ordered: list[Code] = []

    def walk(parent: int | None) -> None:
        for code in children.get(parent, []):
            ordered.append(code)
            if code.is_net:
                walk(code.number)

    top = children.get(None, [])
    children[None] = [c for c in top if c.is_net] + [c for c in top if not c.is_net]
    walk(None)
    return ordered
