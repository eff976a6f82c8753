"""The `--help` layout of every oecode command: descriptions and epilogs fit the help's width.

argparse wraps option help to the terminal (COLUMNS, else the terminal's width) but prints a raw description
or epilog as written. This formatter keeps their line breaks and fits each line instead:
- an example command line (`  oecode ...`) too wide is folded between its options into backslash-continued
  lines, so it still copies into a shell and runs as one command;
- a prose line too wide is wrapped, an indented list item (`  --split top2   text`) under its own text.
Light on purpose: `oecode --help` imports it (tests/test_cli_imports.py)."""

from __future__ import annotations

import argparse
import re
import textwrap

#: prose is never wider than this, even on a wide terminal (long lines are hard to read)
PROSE_MAX = 100
#: how far a continued example line is indented past the example's own indent
CONTINUATION_INDENT = "    "

_WORD = re.compile(r"""(?:[^\s'"]+|'[^']*'|"(?:[^"\\]|\\.)*")+""")
_ITEM = re.compile(r"^(\s+\S(?:.*?\S)?\s{2,})(?=\S)")


class HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Descriptions and epilogs keep their line breaks; each line is fitted to the help's width."""

    def _fill_text(self, text: str, width: int, indent: str) -> str:
        return "".join(f"{indent}{line}\n" for line in fit_lines(text, width))


def fit_lines(text: str, width: int) -> list[str]:
    """Each line of `text` fitted to `width` columns: examples folded, prose wrapped, short lines as written."""
    out: list[str] = []
    prose = min(width, PROSE_MAX)
    for line in text.splitlines():
        if line.lstrip().startswith("oecode "):
            out += fold_command(line, width) if len(line) > width else [line]
        elif len(line) > prose:
            out += _wrap_prose(line, prose)
        else:
            out.append(line)
    return out


def _wrap_prose(line: str, width: int) -> list[str]:
    lead = line[:len(line) - len(line.lstrip())]
    item = _ITEM.match(line)
    hang = " " * len(item.group(1)) if item and len(item.group(1)) < width // 2 else lead
    return textwrap.wrap(line.strip(), width=width, initial_indent=lead, subsequent_indent=hang,
                         break_long_words=False, break_on_hyphens=False) or [line]


def shell_words(command: str) -> list[str]:
    """The words of a command line as typed (quotes kept), split on spaces outside quotes."""
    return _WORD.findall(command)


def fold_command(line: str, width: int) -> list[str]:
    """A command line as backslash-continued lines of at most `width` columns (where it can be: one word
    longer than a line stays whole), broken before an option where possible, else between words."""
    lead = line[:len(line) - len(line.lstrip())]
    words = shell_words(line)
    groups: list[list[str]] = [[]]
    for word in words:
        if word.startswith("-") and groups[-1]:
            groups.append([])
        groups[-1].append(word)
    # each piece is a group, or a word of a group that cannot fit a continuation line whole
    room = width - len(lead + CONTINUATION_INDENT) - 2
    pieces = [p for g in groups for p in ([" ".join(g)] if len(" ".join(g)) <= room else g)]
    lines: list[str] = []
    current = lead + pieces[0]
    for index, piece in enumerate(pieces[1:], start=2):
        tail = "" if index == len(pieces) else " \\"
        if len(f"{current} {piece}{tail}") <= width:
            current = f"{current} {piece}"
        else:
            lines.append(current + " \\")
            current = lead + CONTINUATION_INDENT + piece
    lines.append(current)
    return lines


def unfold_command(lines: list[str]) -> str:
    """The one command line that backslash-continued lines make (as a shell reads them)."""
    return " ".join(line.strip().removesuffix("\\").strip() for line in lines)
