"""Panels that draw one piece of the desk from plain data (no study access: screens pass what to show).

Every piece of user text (verbatims, labels, coder names, notes, messages) is drawn as plain text, never
parsed as Textual or Rich markup: `[b]`, `x[/]` or `[/]evil` show exactly as typed and cannot break a screen.
"""

from __future__ import annotations

from functools import lru_cache
from typing import Sequence

from rich.console import Console
from rich.text import Text
from textual.containers import VerticalScroll
from textual.geometry import Size
from textual.scroll_view import ScrollView
from textual.strip import Strip
from textual.widgets import Static

from opencode.coding.assignments import Suggestion
from opencode.coding.frames import Code
from opencode.files.palette import OKABE_ITO
from opencode.study.desk_queries import VerbatimCard

#: Words a code rule uses: underlined and bold, so they stand out with or without colour (NO_COLOR).
RULE_WORD_STYLE = f"bold underline {OKABE_ITO['orange']}"
#: How much of a label "others" and short mentions keep.
SHORT_LABEL = 16
#: Wrapping measures text with a console; any console measures cells the same way.
_CONSOLE = Console(width=200, color_system=None)


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
        """Show `content`; False when it was already shown. same_size: the caller knows the size is unchanged.
        The screen is laid out again only when the text takes another number of lines (or shows or hides)."""
        if self._last is not None and content == self._last:
            return False
        resize = not same_size and (self._last is None or content.plain != self._last.plain)
        if resize and self._last is not None and self.display and bool(content.plain) == bool(self._last.plain):
            width = self.content_region.width
            if width > 0:
                resize = _line_count(content, width) != _line_count(self._last, width)
        self._last = content
        self.update(content, layout=resize)
        return True


def _line_count(text: Text, width: int) -> int:
    return len(text.wrap(_CONSOLE, width)) if text.plain else 0


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


class FrameList(ScrollView, can_focus=False):
    """The code frame: mark, hotkey, number and the full label (wrapped with a hanging indent, never cut), then
    the coder's count when the panel is wide enough; codes held marked ● and suggestions ◌, nets in bold.

    Drawn line by line (Textual's line API): a key press that changes one mark repaints that line only, not the
    whole panel, which keeps a keypress quick on a long frame. It scrolls (PgUp/PgDn on the desk) but never
    takes the keyboard."""

    #: Below this panel width the coder's counts are left out, so labels keep the room (the frame screen has them).
    COUNTS_FROM = 34

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._key: tuple | None = None
        self._rows: list = []  # (prefix pieces, label, label style, number, count)
        self._strips: list[Strip] = []
        self._starts: dict[int, int] = {}
        self._width = 0
        self._base = None

    def show(self, codes: Sequence[Code], counts: dict[int, int], net_counts: dict[int, int],
             held: set[int], suggested: set[int]) -> None:
        """Draw the frame (retired codes left out)."""
        key = (tuple((c.number, c.label, c.hotkey, c.net, c.kind, c.active) for c in codes),
               tuple(sorted(counts.items())), tuple(sorted(net_counts.items())), tuple(sorted(held)),
               tuple(sorted(suggested)))
        if key == self._key:
            return
        self._key = key
        self._rows = _frame_rows(codes, counts, net_counts, held, suggested)
        self._lay_out()

    def _lay_out(self) -> None:
        width = self.scrollable_content_region.width
        if width <= 0:
            return
        strips, starts = _frame_strips(tuple(self._rows), width, self.COUNTS_FROM)
        old, self._strips, self._starts = self._strips, strips, starts
        if len(old) != len(strips) or width != self._width:
            self._width = width
            self.virtual_size = Size(width, len(strips))
            self.refresh()
            return
        for y, (before, after) in enumerate(zip(old, strips)):
            if before is not after:
                self.refresh_line(y)

    def on_resize(self) -> None:
        self._lay_out()

    def notify_style_update(self) -> None:
        super().notify_style_update()
        self._base = None

    def render_line(self, y: int) -> Strip:
        if self._base is None:
            self._base = self.rich_style
        index = y + int(self.scroll_offset.y)
        width = self.scrollable_content_region.width
        if index >= len(self._strips):
            return Strip.blank(width, self._base)
        return self._strips[index].crop_extend(0, width, self._base).apply_style(self._base)

    def line_of(self, number: int) -> int | None:
        """The first line of a code (for scrolling it into view)."""
        return self._starts.get(number)


@lru_cache(maxsize=8192)
def _row_strips(prefix: tuple[tuple[str, str], ...], label: str, style: str, count: str, room: int) -> tuple[Strip, ...]:
    """One code's lines as strips: the prefix pieces, then the label (and count, dim) wrapped to `room` cells
    under a hanging indent. Cached: a key press changes one code's mark, the rest are reused as they are."""
    text = Text()
    text.append(label, style=style)
    if count:
        text.append(count, style="dim")
    head = Text()
    for piece, piece_style in prefix:
        head.append(piece, style=piece_style)
    strips = []
    for i, part in enumerate(text.wrap(_CONSOLE, room, overflow="fold")):
        line = head.copy() if i == 0 else Text(" " * len(head))
        line.append_text(part)
        strips.append(Strip(list(line.render(_CONSOLE)), line.cell_len))
    return tuple(strips)


def _frame_strips(rows, width: int, counts_from: int) -> tuple[list[Strip], dict[int, int]]:
    """The frame's lines at `width` and the first line of each code number."""
    if not rows:
        return [Strip(list(Text(t, style="italic").render(_CONSOLE))) for t in ("No codes yet.", "Ctrl+O adds one.")], {}
    strips: list[Strip] = []
    starts: dict[int, int] = {}
    for prefix, label, style, number, count in rows:
        starts[number] = len(strips)
        room = max(width - sum(len(piece) for piece, _ in prefix), 8)
        shown = f" ·{count:,}" if count and width >= counts_from else ""
        strips.extend(_row_strips(prefix, label, style, shown, room))
    return strips, starts


def _frame_rows(codes: Sequence[Code], counts: dict[int, int], net_counts: dict[int, int], held: set[int],
                suggested: set[int]) -> list[tuple[tuple[tuple[str, str], ...], str, str, int, int]]:
    """(prefix pieces, label, label style, number, count) per active code, nets first with their members."""
    if not codes:
        return []
    by_number = {c.number: c for c in codes}
    width = max(len(str(c.number)) for c in codes)
    built = []
    for code in _frame_order(codes):
        if not code.active:
            continue
        depth, parent = 0, code.net
        while parent is not None and parent in by_number and depth < 3:
            depth, parent = depth + 1, by_number[parent].net
        if code.is_net:
            prefix = ((f"   {code.number:>{width}} ", "bold"),)
            style, count = "bold", net_counts.get(code.number, 0)
        else:
            symbol, style = " ", ""
            if code.number in held:
                symbol, style = "●", "bold reverse"
            elif code.number in suggested:
                symbol, style = "◌", "italic underline"
            prefix = ((symbol, "bold"), (code.hotkey or " ", "bold underline" if code.hotkey else ""),
                      (f" {code.number:>{width}} ", ""))
            count = counts.get(code.number, 0)
        built.append((prefix + (("  " * depth, ""),), code.label, style, code.number, count))
    return built


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
