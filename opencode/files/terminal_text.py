"""Text for a terminal: no escape sequences or other control characters from user data ever reach it.

A code label, a variable label or a verbatim can hold ESC sequences (set the window title, clear the screen,
move the cursor), bidi overrides that reorder what is shown, or a lone CR that overwrites a line. The command
layer passes everything it prints through `terminal_text` (via `TerminalStream` on stdout and stderr), and
the aligned tables of files/textout.py clean each cell.
"""

from __future__ import annotations

import contextlib
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
    """A text stream that cleans everything written through it before it reaches the real stream.

    With a `width`, a complete line longer than the width (prose: a note, a warning, a list of ids) is wrapped
    on spaces (files/textout.wrap_line); tables arrive already fitted by files/textout.format_table. Lines
    wrapped this way are kept in `wrapped` so that tests can tell that no table needed it. A line holding a
    carriage return (a progress bar redrawing itself) passes as it is.
    """

    def __init__(self, stream: TextIO, keep_cr: bool = False, width: int | None = None):
        self._stream = stream
        self._keep_cr = keep_cr
        self._width = width
        self._pending = ""
        self.wrapped: list[str] = []

    def write(self, text: str) -> int:
        clean = terminal_text(text, keep_cr=self._keep_cr)
        if not self._width:
            self._stream.write(clean)
            return len(text)
        *lines, rest = (self._pending + clean).split("\n")
        if lines:
            self._stream.write("\n".join(self._fit(line) for line in lines) + "\n")
        if "\r" in rest:
            self._stream.write(rest)
            rest = ""
        self._pending = rest
        return len(text)

    def _fit(self, line: str) -> str:
        if len(line) <= self._width or "\r" in line:
            return line
        from opencode.files.textout import wrap_line

        self.wrapped.append(line)
        return "\n".join(wrap_line(line, self._width))

    def writelines(self, lines) -> None:
        for line in lines:
            self.write(line)

    def flush(self) -> None:
        if self._pending:
            self._stream.write(self._pending)
            self._pending = ""
        self._stream.flush()

    @contextlib.contextmanager
    def unwrapped(self):
        """Write as given (no wrapping) inside the block: CSV and JSON for scripts."""
        self.flush()
        width, self._width = self._width, None
        try:
            yield self
        finally:
            self._width = width

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


@contextlib.contextmanager
def unwrapped(stream):
    """`stream` with prose wrapping off inside the block (any stream; only a TerminalStream wraps)."""
    if isinstance(stream, TerminalStream):
        with stream.unwrapped():
            yield stream
    else:
        yield stream
