"""The desk's search line: words to find in the text plus a few filters, all combined (AND).

    staff night          verbatims containing the text "staff night"
    #3                   verbatims holding code 3 (this coder, any source)
    uncoded              verbatims this coder has not coded yet
    blank / answered     only non-answers / only real answers
    support=5            respondents whose closed-ended answer is 5 (a code or a value label;
    age_band="65 or over"   quote a label with spaces)
"""

from __future__ import annotations

import shlex
from dataclasses import dataclass, field

from opencode.errors import OpenCodeError


@dataclass(frozen=True)
class SearchSpec:
    """A parsed search: text (substring, case ignored) and filters."""

    text: str = ""
    code: int | None = None
    uncoded: bool = False
    nonanswer: bool | None = None
    values: tuple[tuple[str, str], ...] = field(default_factory=tuple)

    def describe(self) -> str:
        """The search in words, for the desk's top line."""
        parts = []
        if self.text:
            parts.append(f'"{self.text}"')
        if self.code is not None:
            parts.append(f"code {self.code}")
        if self.uncoded:
            parts.append("uncoded")
        if self.nonanswer is not None:
            parts.append("non-answers" if self.nonanswer else "answers")
        parts += [f"{name}={value}" for name, value in self.values]
        return " and ".join(parts)


def parse_search(line: str) -> SearchSpec:
    """Parse a search line; an empty or malformed one gives a clear OpenCodeError."""
    try:
        words = shlex.split(line)
    except ValueError as error:
        raise OpenCodeError(f"search {line!r}: {error} (close the quote)") from None
    text, code, uncoded, nonanswer, values = [], None, False, None, []
    for word in words:
        lowered = word.lower()
        if word.startswith("#"):
            try:
                code = int(word[1:])
            except ValueError:
                raise OpenCodeError(f"search: {word!r} is not a code number (write #3)") from None
        elif lowered == "uncoded":
            uncoded = True
        elif lowered in ("blank", "answered"):
            nonanswer = lowered == "blank"
        elif "=" in word and not word.startswith("="):
            name, value = word.split("=", 1)
            if not value:
                raise OpenCodeError(f"search: {word!r} needs a value after '='")
            values.append((name, value))
        else:
            text.append(word)
    spec = SearchSpec(" ".join(text), code, uncoded, nonanswer, tuple(values))
    if spec == SearchSpec():
        raise OpenCodeError("search: type words to find, #N for a code, uncoded, blank, answered or name=value")
    return spec
