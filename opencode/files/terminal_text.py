"""Text for a terminal: no escape sequences or other control characters from user data ever reach it.

A code label, a variable label or a verbatim can hold ESC sequences (set the window title, clear the screen,
move the cursor), bidi overrides that reorder what is shown, or a lone CR that overwrites a line. The command
layer passes everything it prints through `terminal_text` (via `TerminalStream` on stdout and stderr), and
the aligned tables of files/textout.py clean each cell.
"""

from __future__ import annotations

import re
from typing import TextIO

#: C0 controls except tab and line feed, DEL, C1 controls (0x9b is a one-byte CSI), bidi overrides and
#: isolates, lone surrogates.
_UNSAFE = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\ud800-\udfff]")
#: The same, but a carriage return is allowed (our own progress bars redraw their line with it).
_UNSAFE_KEEP_CR = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\ud800-\udfff]")


def terminal_text(text: str, *, keep_cr: bool = False) -> str:
    """`text` with every control character (except tab and line feed) and bidi override removed."""
    return (_UNSAFE_KEEP_CR if keep_cr else _UNSAFE).sub("", text)


def one_line(text: str) -> str:
    """User text for one cell of a terminal table: cleaned, with line breaks and tabs as spaces."""
    return terminal_text(str(text)).replace("\t", " ").replace("\n", " ")


class TerminalStream:
    """A text stream that cleans everything written through it before it reaches the real stream."""

    def __init__(self, stream: TextIO, keep_cr: bool = False):
        self._stream = stream
        self._keep_cr = keep_cr

    def write(self, text: str) -> int:
        self._stream.write(terminal_text(text, keep_cr=self._keep_cr))
        return len(text)

    def writelines(self, lines) -> None:
        for line in lines:
            self.write(line)

    def __getattr__(self, name: str):
        return getattr(self._stream, name)
