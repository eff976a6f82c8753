"""Plain-text tables and prose that fit the terminal: the one table formatter every `format_*` function uses.

Rules every table follows (issue 14): the whole table fits `output_width()` (the terminal's width, COLUMNS when
set, 80 when stdout is not a terminal); label columns wrap within their cell; a number is never split (a
numeric cell keeps its whole width, a label cell is never narrower than the longest number in it); when the
columns cannot fit side by side even with labels wrapped, the table is cut into successive blocks of columns,
each repeating the stub (the leading label columns), rather than squeezing numbers. p and q values print through
`format_p` everywhere.

Rendering uses rich (a Table drawn by a Console with no colours into a string); rich is imported inside the
render function so that importing this module costs nothing at start-up.
"""

from __future__ import annotations

import math
import os
import re
import shutil
import sys
import textwrap
from collections.abc import Sequence
from typing import Any

from opencode.files.terminal_text import one_line

#: Width used when stdout is not a terminal and COLUMNS is not set.
DEFAULT_WIDTH = 80
#: A label column may be squeezed down to this many characters (wrapping on spaces; a longer word is folded).
LABEL_MIN = 16
#: Spaces between two columns.
GAP = 2

#: Stands for a space that must not break while a table is laid out (inside "0.717 [0.596, 0.817]", "se 0.054").
_KEEP = "\ue000"
#: A number with its interval, or a short tag with its number: kept on one line.
_GROUP = re.compile(r"[-+<>]?[0-9][0-9.,]*%?\s\[[-+<>]?[0-9][0-9.,]*%?,\s[-+<>]?[0-9][0-9.,]*%?\]"
                    r"|\b[A-Za-z]{1,3}\s[-+<>]?[0-9][0-9.,]*%?(?![0-9])")
_NUMBER = re.compile(r"[-+<>]?\(?\[?[0-9][0-9,]*(?:\.[0-9]+)?(?:e[-+]?[0-9]+)?%?[\]),;]*", re.I)


def output_width(stream: Any = None) -> int:
    """The width tables and prose are fitted to: COLUMNS when set to a number, the terminal's width when
    `stream` (stdout by default) is a terminal, otherwise 80."""
    value = os.environ.get("COLUMNS", "").strip()
    if value.isdigit() and int(value) > 0:
        return max(int(value), 20)
    stream = sys.stdout if stream is None else stream
    try:
        if stream.isatty():
            return max(shutil.get_terminal_size((DEFAULT_WIDTH, 24)).columns, 20)
    except (AttributeError, ValueError, OSError):
        pass
    return DEFAULT_WIDTH


def prose_width(stream: Any = None) -> int | None:
    """The width prose is wrapped to on `stream`: as output_width when COLUMNS is set or the stream is a
    terminal; None (no wrapping, one line per message for scripts) when it is a pipe or a file."""
    value = os.environ.get("COLUMNS", "").strip()
    try:
        terminal = (sys.stdout if stream is None else stream).isatty()
    except (AttributeError, ValueError, OSError):
        terminal = False
    return output_width(stream) if (value.isdigit() and int(value) > 0) or terminal else None


def format_p(p: Any) -> str:
    """A p or q value the same way in every table: '<0.001' below 0.001, else three decimals; '-' when there
    is no test (None or NaN)."""
    if p is None:
        return "-"
    try:
        value = float(p)
    except (TypeError, ValueError):
        return "-"
    if math.isnan(value):
        return "-"
    return "<0.001" if value < 0.001 else f"{value:.3f}"


def wrap_text(text: str, width: int | None = None) -> str:
    """Prose fitted to `width`: each line longer than the width is wrapped on spaces, its continuation lines
    indented two spaces past the line's own indent. Lines that fit are kept as they are."""
    width = width or output_width()
    out: list[str] = []
    for line in text.split("\n"):
        out.extend(wrap_line(line, width))
    return "\n".join(out)


def wrap_line(line: str, width: int) -> list[str]:
    """One line as the lines that fit `width` (see wrap_text)."""
    if len(line) <= width:
        return [line]
    indent = line[:len(line) - len(line.lstrip(" "))]
    if len(indent) > width // 2:
        indent = ""
    marker = re.match(r"(- |\* |[a-z][a-z -]{0,20}: )", line.lstrip(" "))
    follow = indent + ("  " if marker is None or len(marker.group(1)) > 12 else " " * len(marker.group(1)))
    return textwrap.wrap(line, width=width, initial_indent="", subsequent_indent=follow, break_long_words=False,
                         break_on_hyphens=False, drop_whitespace=True) or [line]


def _cell_text(value: Any) -> str:
    """A cell as text: empty for None, three decimals for a float, str() otherwise; on one line with no
    control characters (a label cannot move the cursor or clear the screen)."""
    if value is None:
        return ""
    if isinstance(value, float):
        return "-" if math.isnan(value) else f"{value:.3f}"
    return one_line(str(value))


def _protect(text: str) -> str:
    """`text` with the spaces inside number groups (see _GROUP) replaced by _KEEP."""
    return _GROUP.sub(lambda m: m.group(0).replace(" ", _KEEP), text)


def _is_number_text(text: str) -> bool:
    return bool(text) and all(_NUMBER.fullmatch(word) or word in ("-", "[", "]")
                              for word in text.replace(_KEEP, " ").split())


def _auto_align(headers: Sequence[str], rows: Sequence[Sequence[Any]]) -> str:
    """'r' for columns holding only numbers (or None), 'l' for the rest; all 'l' when there are no rows."""
    return "".join("r" if rows and all(isinstance(row[i], (int, float)) or row[i] is None for row in rows) else "l"
                   for i in range(len(headers)))


def _longest_word(text: str) -> int:
    return max((len(w) for w in text.split()), default=0)


class _Column:
    """Measures of one column: its widest line, and the narrowest it may become."""

    def __init__(self, header: str, cells: list[str], align: str, may_wrap: bool):
        self.header, self.cells, self.align, self.may_wrap = header, cells, align, may_wrap
        widest_cell = max((len(c) for c in cells), default=0)
        self.widest = max(widest_cell, len(header))
        self.widest_cell = widest_cell
        numbers = max((len(w) for c in cells for w in c.split()
                       if _NUMBER.fullmatch(w) or (_KEEP in w and any(ch.isdigit() for ch in w))), default=0)
        header_floor = min(_longest_word(header), 12)
        if may_wrap:
            self.narrowest = max(numbers, header_floor, min(widest_cell, LABEL_MIN), 1)
        else:
            self.narrowest = max(widest_cell, header_floor, 1)
        self.narrowest = min(self.narrowest, self.widest) if self.widest else 1
        # the last resort when even the narrowest widths do not fit: labels fold down to 6 characters and
        # numeric cells wrap at their spaces (an interval under its estimate); a number is still never split
        words = max((_longest_word(c) for c in cells), default=0)
        self.tightest = min(self.narrowest, max(numbers, header_floor, 6 if may_wrap else words, 1))


def _widths(columns: list[_Column], width: int, tight: bool = False) -> list[int] | None:
    """Column widths summing (with gaps) to at most `width`, wrap columns shrunk widest-first; None if even
    the narrowest widths (the tightest with `tight`) do not fit."""
    gaps = GAP * (len(columns) - 1)
    if tight:
        columns = [_Tight(c) for c in columns]
    if sum(c.narrowest for c in columns) + gaps > width:
        return None
    widths = [c.widest for c in columns]
    excess = sum(widths) + gaps - width
    while excess > 0:
        # shrink the column with the most room left: first headers wider than their cells (a wrapped header costs
        # a line once), then wrap columns down to their narrowest, then anything left
        room = [w - max(c.widest_cell, c.narrowest) for w, c in zip(widths, columns)]
        if max(room) <= 0:
            room = [(w - c.narrowest) if c.may_wrap else 0 for w, c in zip(widths, columns)]
        if max(room) <= 0:
            room = [w - c.narrowest for w, c in zip(widths, columns)]
        i = max(range(len(columns)), key=lambda k: room[k])
        take = min(room[i], excess, max(1, room[i] // 2))
        widths[i] -= take
        excess -= take
    return widths


class _Tight:
    """A column seen with its tightest width as its narrowest."""

    def __init__(self, column: _Column):
        self.widest, self.widest_cell, self.may_wrap = column.widest, column.widest_cell, column.may_wrap
        self.narrowest = column.tightest


def _blocks(columns: list[_Column], stub: int, width: int,
            units: list[tuple[int, list[int]]]) -> list[list[int]]:
    """Column indices of each block: the stub columns, then as many units (columns that stay together, each
    in a group) as fit beside them; a new group starts a new block when it would fit whole there but not here."""
    def fits(block: list[int]) -> bool:
        return _widths([columns[i] for i in block], width) is not None

    group_columns: dict[int, list[int]] = {}
    for group, unit in units:
        group_columns.setdefault(group, []).extend(unit)
    blocks: list[list[int]] = []
    block: list[int] = []
    for k, (group, unit) in enumerate(units):
        if block:
            starts_group = k > 0 and group != units[k - 1][0]
            candidate = block + unit
            whole = list(range(stub)) + group_columns[group]
            if not fits(candidate) or (starts_group and not fits(block + group_columns[group]) and fits(whole)):
                blocks.append(block)
                block = []
        if not block:
            block = list(range(stub))
        block += unit
    if block:
        blocks.append(block)
    return blocks or [list(range(len(columns)))]


def _render(columns: list[_Column], widths: list[int], rows: int) -> list[str]:
    """The table as lines (rich Table with a rule under the header, no colours, no trailing spaces)."""
    from io import StringIO

    from rich import box
    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

    rule = box.Box("    \n    \n -- \n    \n    \n    \n    \n    \n", ascii=True)
    table = Table(box=rule, show_edge=False, pad_edge=False, padding=(0, GAP - 1, 0, 0), expand=False,
                  show_header=True, highlight=False)
    for column, w in zip(columns, widths):
        justify = "right" if column.align == "r" else "left"
        table.add_column(Text(column.header), justify=justify, width=w, min_width=w, max_width=w,
                         overflow="fold", no_wrap=False, header_style="", style="")
    for r in range(rows):
        table.add_row(*(Text(c.cells[r]) for c in columns))
    total = sum(widths) + GAP * (len(widths) - 1) + GAP
    console = Console(width=total + 1, file=StringIO(), color_system=None, force_terminal=False,
                      legacy_windows=False, soft_wrap=False, highlight=False, emoji=False, markup=False)
    with console.capture() as capture:
        console.print(table)
    lines = [line.replace(_KEEP, " ").rstrip() for line in capture.get().split("\n")]
    while lines and not lines[-1]:
        lines.pop()
    # the rule under the header: one dash run per column, GAP spaces apart
    for i, line in enumerate(lines):
        if line and set(line) <= {"-", " "} and "-" in line:
            lines[i] = (" " * GAP).join("-" * w for w in widths)
            break
    return lines


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]], align: str | None = None, *,
                 width: int | None = None, wrap: Sequence[int | str] | None = None, title: str | None = None,
                 note: str | Sequence[str] | None = None, stub: int | None = None,
                 groups: Sequence[tuple[str, Sequence[Sequence[int]]]] | None = None) -> str:
    """A header, a rule, then one line (or a few wrapped lines) per row, fitted to `width`.

    `align` is one letter per column ('l' or 'r'); by default numeric columns are right-aligned, the rest left.
    `wrap` names the columns (index or header) whose text may wrap; by default every left-aligned column whose
    cells are not all numbers. Right-aligned and numeric columns keep every cell whole on one line. `width`
    defaults to `output_width()`. When the columns cannot fit side by side, they are printed in successive
    blocks, each repeating the first `stub` columns (by default the columns up to the first label column).
    `title` goes above the table and `note` (a line or lines, e.g. "sorted by ...") below it, both wrapped.
    `groups` (title, units) gathers the columns after the stub under a title printed above each block that
    holds them (never cut; "continued" when the group was split); a unit (a list of column indices) is never
    split across blocks.
    """
    width = width or output_width()
    headers = [one_line(str(h)) for h in headers]
    align = align or _auto_align(headers, rows)
    texts = [[_protect(_cell_text(c)) for c in row] for row in rows]
    cells = [[row[i] for row in texts] for i in range(len(headers))]
    if wrap is None:
        may_wrap = [a == "l" and not all(_is_number_text(c) or not c for c in cells[i])
                    for i, a in enumerate(align)]
    else:
        named = {w if isinstance(w, int) else headers.index(w) for w in wrap}
        may_wrap = [i in named for i in range(len(headers))]
    columns = [_Column(h, cells[i], align[i], may_wrap[i]) for i, h in enumerate(headers)]
    if stub is None:
        first_label = next((i for i, m in enumerate(may_wrap) if m), 0)
        stub = min(first_label + 1, 2)
    out: list[str] = []
    if title:
        out += [wrap_text(title, width), ""]
    stub = min(stub, len(columns) - 1) if len(columns) > 1 else 0  # at least one column beside the stub
    if groups is None:
        groups = [("", [[i] for i in range(stub, len(columns))])]
    units = [(g, list(unit)) for g, (_, group_units) in enumerate(groups) for unit in group_units]
    widths = _widths(columns, width)
    blocks = [list(range(len(columns)))] if widths is not None else _blocks(columns, stub, width, units)
    shown: set[int] = set()
    for b, block in enumerate(blocks):
        chosen = [columns[i] for i in block]
        block_widths = _widths(chosen, width) or _widths(chosen, width, tight=True) or [c.tightest for c in chosen]
        heads = []
        for g, (group_title, group_units) in enumerate(groups):
            members = {i for unit in group_units for i in unit}
            if group_title and members & set(block):
                heads.append(group_title + (" (continued)" if g in shown else ""))
                shown.add(g)
        out += ([""] if b else []) + [wrap_text(h, width) for h in heads] + _render(chosen, block_widths, len(texts))
    if note:
        notes = [note] if isinstance(note, str) else list(note)
        out += [""] + [wrap_text(n, width) for n in notes]
    return "\n".join(out)
