"""Panels that draw one piece of the desk from plain data (no study access: screens pass what to show).

Every piece of user text (verbatims, labels, coder names, notes, messages) is drawn as plain text, never
parsed as Textual or Rich markup: `[b]`, `x[/]` or `[/]evil` show exactly as typed and cannot break a screen.
"""

from __future__ import annotations

from typing import Sequence

from rich.console import Console, ConsoleOptions, RenderResult
from rich.text import Text
from textual.containers import VerticalScroll
from textual.widgets import Static

from opencode.coding.assignments import Suggestion
from opencode.coding.frames import Code
from opencode.files.palette import OKABE_ITO
from opencode.study.desk_queries import VerbatimCard

#: Words a code rule uses: underlined and bold, so they stand out with or without colour (NO_COLOR).
RULE_WORD_STYLE = f"bold underline {OKABE_ITO['orange']}"
#: How much of a label "others" and short mentions keep.
SHORT_LABEL = 16


def plain(value: object, style: str = "") -> Text:
    """User text as a Text that is never read as markup."""
    return Text(str(value), style=style)


def short(label: str, limit: int = SHORT_LABEL) -> str:
    """A label cut to `limit` characters with an ellipsis (only where the full label is shown elsewhere)."""
    return label if len(label) <= limit else label[: limit - 1] + "…"


class Pane(VerticalScroll, can_focus=False):
    """A scrolling area that never takes the keyboard (keys stay with the desk)."""


class Drawn(Static):
    """A Static for plain text that redraws only when its content changed."""

    _last: Text | None = None

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("markup", False)
        super().__init__(*args, **kwargs)

    def draw(self, content: Text, same_size: bool = False) -> bool:
        """Show `content`; False when it was already shown. same_size: the caller knows the size is unchanged."""
        if self._last is not None and content == self._last:
            return False
        resize = not same_size and (self._last is None or content.plain != self._last.plain)
        self._last = content
        self.update(content, layout=resize)
        return True


class VerbatimView(Drawn):
    """The verbatim, wrapped, with rule words marked."""

    def show(self, card: VerbatimCard | None, spans: Sequence[tuple[int, int]] = ()) -> bool:
        """Draw a verbatim (or a note that the view is empty); True when the text changed."""
        if card is None:
            return self.draw(Text("No verbatim here. Esc clears the search; the palette (Ctrl+P) can show "
                                  "non-answers.", style="italic"))
        text = Text(card.text or "(empty)")
        for start, end in spans:
            text.stylize(RULE_WORD_STYLE, start, end)
        self.set_class(card.nonanswer, "nonanswer")
        return self.draw(text)


class ContextPane(Drawn):
    """The respondent's closed-ended answers as labels."""

    def show(self, answers: Sequence[tuple[str, str]]) -> None:
        """Draw 'variable: answer' pairs."""
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

    def show(self, suggestions: Sequence[Suggestion], codes: dict[int, Code]) -> None:
        """Draw suggestions with their confidence (rules carry none)."""
        self.display = bool(suggestions)
        text = Text()
        for i, s in enumerate(suggestions):
            code = codes.get(s.number)
            if i:
                text.append("\n")
            text.append("→ " if i == 0 else "  ", style="bold")
            if code is not None and code.hotkey:
                text.append(code.hotkey, style="bold underline")
                text.append(" ")
            text.append(f"{s.number} ")
            text.append(code.label if code else f"code {s.number}")
            confidence = "" if s.confidence is None else f" {s.confidence:.0%}"
            text.append(f"  {s.source}{confidence}", style="dim")
        self.draw(text)


class CodeInfoPane(Drawn):
    """The description, include and exclude notes of the code last pressed (or the top suggestion)."""

    def show(self, code: Code | None, why: str = "") -> None:
        """Draw what the frame says about one code."""
        self.display = code is not None
        if code is None:
            self.draw(Text())
            return
        text = Text()
        if code.hotkey:
            text.append(code.hotkey, style="bold underline")
            text.append(" ")
        text.append(f"{code.number} ", style="bold")
        text.append(code.label, style="bold")
        if why:
            text.append(f"  ({why})", style="dim")
        said = False
        for name, value in (("", code.description), ("include: ", code.include), ("exclude: ", code.exclude)):
            if value:
                text.append("\n")
                if name:
                    text.append(name, style="dim")
                text.append(value)
                said = True
        if not said:
            text.append("\nno description or notes yet (F3, then d)", style="dim italic")
        self.draw(text)


class NotePane(Drawn):
    """This coder's note on the verbatim, and other coders' hand codes (hotkey, number, short label)."""

    def show(self, note: str | None, others: Sequence[tuple[str, int, str]], codes: dict[int, Code]) -> None:
        """Draw the note and one line per other coder."""
        text = Text()
        if note:
            text.append("note: ", style="bold")
            text.append(note)
        by_coder: dict[str, list[int]] = {}
        for coder, number, source in others:
            if source == "hand":
                by_coder.setdefault(coder, []).append(number)
        for coder, numbers in by_coder.items():
            if text:
                text.append("\n")
            text.append("others: " if coder == next(iter(by_coder)) else "        ", style="dim")
            text.append(coder, style="bold")
            for i, number in enumerate(numbers):
                code = codes.get(number)
                text.append(" · " if i else " ")
                if code is not None and code.hotkey:
                    text.append(code.hotkey, style="bold underline")
                    text.append(" ")
                text.append(f"{number} ")
                text.append(short(code.label) if code else "?", style="dim")
        self.display = bool(text)
        self.draw(text)


class FrameRows:
    """The code frame as rows with a hanging indent: a fixed prefix (mark, hotkey, number), then the label
    wrapped to the panel's width, so every label shows in full however narrow the panel."""

    #: Below this panel width the coder's counts are left out, so labels keep the room (the frame screen has them).
    COUNTS_FROM = 34

    def __init__(self, rows: list[tuple[Text, Text, int, int]]):
        self.rows = rows
        self._laid: tuple[int, list[Text], dict[int, int]] | None = None

    def layout(self, console: Console, width: int) -> tuple[list[Text], dict[int, int]]:
        """The lines at `width` and the first line of each code number (cached per width)."""
        if self._laid is not None and self._laid[0] == width:
            return self._laid[1], self._laid[2]
        lines: list[Text] = []
        starts: dict[int, int] = {}
        for prefix, label, number, count in self.rows:
            starts[number] = len(lines)
            room = max(width - len(prefix), 8)
            if count and width >= self.COUNTS_FROM:
                label = label.copy()
                label.append(f" ·{count:,}", style="dim")
            for i, part in enumerate(label.wrap(console, room, overflow="fold")):
                line = prefix.copy() if i == 0 else Text(" " * len(prefix))
                line.append_text(part)
                lines.append(line)
        self._laid = (width, lines, starts)
        return lines, starts

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        lines, _ = self.layout(console, options.max_width)
        yield Text("\n").join(lines) if lines else Text()


class FrameList(Static):
    """The code frame: mark, hotkey, number and the full label (wrapped), then the coder's count; codes held
    marked ● and suggestions ◌, nets in bold with the verbatims under them."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("markup", False)
        super().__init__(*args, **kwargs)
        self._key: tuple | None = None
        self.rows: FrameRows | None = None

    def show(self, codes: Sequence[Code], counts: dict[int, int], net_counts: dict[int, int],
             held: set[int], suggested: set[int]) -> None:
        """Draw the frame (retired codes left out)."""
        key = (tuple((c.number, c.label, c.hotkey, c.net, c.kind, c.active) for c in codes),
               tuple(sorted(counts.items())), tuple(sorted(net_counts.items())), tuple(sorted(held)),
               tuple(sorted(suggested)))
        if key == self._key:
            return
        self._key = key
        if not codes:
            self.rows = None
            self.update(Text("No codes yet.\nCtrl+O adds one.", style="italic"))
            return
        by_number = {c.number: c for c in codes}
        width = max(len(str(c.number)) for c in codes)
        rows: list[tuple[Code, int]] = []  # (code, depth under nets)
        for code in _frame_order(codes):
            if not code.active:
                continue
            depth, parent = 0, code.net
            while parent is not None and parent in by_number and depth < 3:
                depth, parent = depth + 1, by_number[parent].net
            rows.append((code, depth))
        built = []
        for code, depth in rows:
            prefix = Text()
            if code.is_net:
                prefix.append(f"   {code.number:>{width}} ", style="bold")
                label = Text(code.label, style="bold")
                count = net_counts.get(code.number, 0)
            else:
                symbol, style = " ", ""
                if code.number in held:
                    symbol, style = "●", "bold reverse"
                elif code.number in suggested:
                    symbol, style = "◌", "italic underline"
                prefix.append(symbol, style="bold")
                prefix.append(code.hotkey or " ", style="bold underline" if code.hotkey else "")
                prefix.append(f" {code.number:>{width}} ")
                label = Text(code.label, style=style)
                count = counts.get(code.number, 0)
            prefix.append("  " * depth)
            built.append((prefix, label, code.number, count))
        self.rows = FrameRows(built)
        self.update(self.rows)

    def line_of(self, number: int) -> int | None:
        """The first line of a code at the current width (for scrolling it into view)."""
        if self.rows is None or self.size.width <= 0:
            return None
        return self.rows.layout(self.app.console, self.size.width)[1].get(number)


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
