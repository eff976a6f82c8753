"""Make every written cell plain, inert text: the one cleaning-and-guard step of every writer.

Order matters: characters are cleaned FIRST (control characters other than tab, line feed and carriage
return, bidi overrides, lone surrogates removed), then the text is cut to the format's limit, and only then
guarded, so a label such as "\\x01=HYPERLINK(...)" cannot turn into a live formula once its control
character is gone.

Guard (OWASP "CSV Injection"): text starting with = + - @ (or their full-width forms), a tab or a carriage
return gets a leading single quote, so a spreadsheet shows it as text. One exception: a cell that is
exactly "-" (the mark tables use for "no base") is left alone; a lone dash is neither a formula nor a
number in any spreadsheet (common practice). Numbers stay numbers: int and float values pass through
unchanged (NaN and infinities become empty cells).
"""

from __future__ import annotations

import math
import re
from typing import Any, Iterable

FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r", "\uff1d", "\uff0b", "\uff0d", "\uff20")
#: Control characters except tab, line feed and carriage return; DEL, C1 controls, bidi overrides and
#: isolates, BOMs, non-characters, lone surrogates: none is meant in a cell, several break XML or terminals.
CONTROL_CHARACTERS = re.compile(
    "[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069\ufeff\ufffe\uffff\ud800-\udfff]")


def clean_text(text: str) -> str:
    """No control characters (tab, LF and CR kept), no bidi overrides, BOMs or lone surrogates."""
    return CONTROL_CHARACTERS.sub("", text)


def needs_guard(text: str) -> bool:
    """True when a spreadsheet could read this text as a formula."""
    return text != "-" and text.startswith(FORMULA_TRIGGERS)


def guard_cell(value: Any, max_chars: int | None = None) -> Any:
    """One cell made safe to write: text cleaned, cut to `max_chars` (guard included), then guarded;
    numbers unchanged (NaN / infinity -> None); other values unchanged."""
    if isinstance(value, str):
        text = clean_text(value)
        guarded = needs_guard(text)
        if max_chars is not None and len(text) + guarded > max_chars:
            text = text[: max_chars - guarded]
            guarded = needs_guard(text)
        return "'" + text if guarded else text
    if isinstance(value, bool) or value is None:
        return value
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if hasattr(value, "item") and not isinstance(value, (int, float)):  # numpy scalars
        return guard_cell(value.item(), max_chars)
    return value


def guard_row(values: Iterable[Any], max_chars: int | None = None) -> list[Any]:
    """Clean and guard every cell of one row."""
    return [guard_cell(value, max_chars) for value in values]
