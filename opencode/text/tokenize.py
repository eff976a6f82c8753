"""Split normalised text into raw tokens and classify each distinct token once.

The corpus is processed in chunks: documents are joined with a separator character, normalised
(NFKC, case folding) and tokenized in one pass, so the per-document Python work stays small.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Sequence

import numpy as np

DOC_SEP = "\x01"

# Placeholder terms stand for every URL, e-mail address or number; they are shown as they are named (never as
# one of the values they stand for) and can be typed in a phrase, a rule or kwic.
URL_PLACEHOLDER = "#url"
EMAIL_PLACEHOLDER = "#email"
NUMBER_PLACEHOLDER = "#number"
PLACEHOLDERS = frozenset({URL_PLACEHOLDER, EMAIL_PLACEHOLDER, NUMBER_PLACEHOLDER})

# Kinds of raw token, decided once per distinct token.
SEP, BOUND, DROP, WORD, NUM, EMOJI, PLACEHOLDER = range(7)

_EMOJI_CHARS = "\U0001F000-\U0001FAFF\u2600-\u27BF\u2B00-\u2BFF"
_URL = r"(?:https?://|www\.)[^\s<>\"'\x01]+"
_EMAIL = r"[\w.+\-]+@[\w\-]+(?:\.[\w\-]+)+"
_CORE = (
    r"\x01|#(?:url|email|number)\b|\d+(?:[.,:/]\d+)+|[\w'’\-]+|[.!?;:,]+|[" + _EMOJI_CHARS + r"][" + _EMOJI_CHARS + "\uFE0F\u200D]*"
)
TOKEN_RE = re.compile(_CORE)
TOKEN_WITH_LINKS_RE = re.compile(_URL + "|" + _EMAIL + "|" + _CORE)
URL_RE = re.compile(_URL)
EMAIL_RE = re.compile(_EMAIL)
_NUMBER_RE = re.compile(r"\d+(?:[.,:/]\d+)*(?:st|nd|rd|th|am|pm|s|k)?")
_TRAILING_URL_PUNCT = ".,!?;:)]}"

# Negation words (common practice, no published source; the set follows the negation cues of
# Das & Chen 2001 and Pang, Lee & Vaithyanathan 2002 plus contractions typed without apostrophes).
NEGATIONS = frozenset(
    {"not", "no", "never", "nor", "cannot", "neither", "without", "nothing", "none", "nobody", "nowhere"}
    | {
        w + "nt"
        for w in ("do", "does", "did", "is", "are", "was", "were", "have", "has", "had", "could", "would",
                  "should", "ca", "wo", "must", "need", "might", "ai")
    }
    - {"wont", "cant"}
)


def is_negation(token: str) -> bool:
    """True for a negation cue: a listed word or any contraction ending in n't."""
    return token in NEGATIONS or token.endswith("n't")


def negation_prefix(token: str) -> str:
    """The prefix a joined negation takes: contractions and 'cannot' become 'not', others stay."""
    if token.endswith("n't") or token.endswith("nt") or token == "cannot":
        return "not"
    return token


# An apostrophe typed as another mark between two letters (curly quotes, modifier letter, prime, acute accent,
# backtick), and a run of control characters standing for a character lost in conversion before a final "s"
# (a possessive whose apostrophe did not survive, e.g. "entity\x1a\x1as"): both become "'", so the possessive
# folds into its base word. DOC_SEP (\x01) is not in the control range used here.
_APOSTROPHE_MARKS = "\u2018\u2019\u02bc\u2032\u00b4`"
_LOST_CHARACTERS = "\x02-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f"
_APOSTROPHE_LIKE = re.compile(rf"(?<=\w)(?:[{_APOSTROPHE_MARKS}]|[{_LOST_CHARACTERS}]+(?=s\b))(?=\w)")
_NEEDS_APOSTROPHE_FIX = re.compile(f"[{_APOSTROPHE_MARKS}{_LOST_CHARACTERS}]")


def normalise(text: str) -> str:
    """Unify apostrophes, NFKC-normalise (only when non-ASCII) and case-fold a text."""
    if _NEEDS_APOSTROPHE_FIX.search(text):
        text = _APOSTROPHE_LIKE.sub("'", text)
    if not text.isascii():
        text = unicodedata.normalize("NFKC", text)
    return text.casefold()


def join_chunk(texts: Sequence[str]) -> str:
    """Join documents with the separator, removing any separator characters inside them."""
    joined = DOC_SEP.join(texts)
    if joined.count(DOC_SEP) != max(len(texts) - 1, 0):
        joined = DOC_SEP.join(t.replace(DOC_SEP, " ") for t in texts)
    return joined


def _trim(text: str, start: int, end: int) -> tuple[int, int]:
    """A link span without trailing sentence punctuation."""
    while end > start and text[end - 1] in _TRAILING_URL_PUNCT:
        end -= 1
    return start, end


def url_spans(text: str) -> list[tuple[int, int]]:
    """Start/end of every URL (the regex runs only when a URL marker is present)."""
    if "://" not in text and "www." not in text:
        return []
    return [_trim(text, m.start(), m.end()) for m in URL_RE.finditer(text)]


_EMAIL_LEFT = re.compile(r"[\w.+\-]+$")
_EMAIL_RIGHT = re.compile(r"[\w\-]+(?:\.[\w\-]+)+")


def email_spans(text: str) -> list[tuple[int, int]]:
    """Start/end of every email address, found from its '@' (fast: no scan of the whole text)."""
    spans = []
    at = text.find("@")
    while at != -1:
        left = _EMAIL_LEFT.search(text, max(0, at - 64), at)
        right = _EMAIL_RIGHT.match(text, at + 1)
        if left and right:
            spans.append(_trim(text, left.start(), right.end()))
        at = text.find("@", at + 1)
    return spans


def replace_links(text: str, urls: str, emails: str) -> str:
    """Replace URLs / emails by their placeholder token (or a space when dropped)."""
    pieces: list[tuple[int, int, str]] = []
    for option, finder, placeholder in ((urls, url_spans, URL_PLACEHOLDER), (emails, email_spans, EMAIL_PLACEHOLDER)):
        if option == "keep":
            continue
        replacement = f" {placeholder} " if option == "placeholder" else " "
        pieces.extend((s, e, replacement) for s, e in finder(text))
    if not pieces:
        return text
    pieces.sort()
    out, pos = [], 0
    for start, end, replacement in pieces:
        if start < pos:
            continue
        out.append(text[pos:start])
        out.append(replacement)
        pos = end
    out.append(text[pos:])
    return "".join(out)


def tokenize_chunk(texts: Sequence[str], urls: str, emails: str, vocab: dict[str, int]) -> np.ndarray:
    """Raw token ids (into `vocab`, grown in place) for a chunk of documents, separators included."""
    text = replace_links(normalise(join_chunk(texts)), urls, emails)
    pattern = TOKEN_WITH_LINKS_RE if "keep" in (urls, emails) else TOKEN_RE
    tokens = pattern.findall(text)
    for token in set(tokens).difference(vocab):
        vocab[token] = len(vocab)
    return np.fromiter(map(vocab.__getitem__, tokens), dtype=np.int64, count=len(tokens))


def classify(token: str) -> tuple[int, str]:
    """The kind of a raw token and its cleaned form (apostrophes unified, edge punctuation stripped)."""
    if token == DOC_SEP:
        return SEP, token
    first = token[0]
    if first in ".!?;:,":
        return BOUND, token
    if "://" in token or token.startswith("www."):
        return PLACEHOLDER, token
    if "@" in token:
        return PLACEHOLDER, token
    if "\u2600" <= first <= "\u2BFF" or first >= "\U0001F000":
        return EMOJI, _first_emoji(token)
    form = token.replace("’", "'").strip("'-")
    if not form:
        return DROP, form
    if form in PLACEHOLDERS:
        return PLACEHOLDER, form
    if _NUMBER_RE.fullmatch(form):
        return NUM, form
    return WORD, form


_NUMBER_WORD = re.compile(r"(?<![\w#])\d+(?:[.,:/]\d+)*(?:st|nd|rd|th|am|pm|s|k)?(?![\w])")


def term_label(name: str, surface: str) -> str:
    """What a reader sees for a term: its commonest word form, except that a placeholder shows as itself
    (#number, never one of the numbers it stands for) and a phrase or joined negation holding the number
    placeholder shows "#number" where the number was ("unit 579" -> "unit #number")."""
    if name in PLACEHOLDERS:
        return name
    if NUMBER_PLACEHOLDER in name:
        return _NUMBER_WORD.sub(NUMBER_PLACEHOLDER, surface)
    return surface


def _first_emoji(token: str) -> str:
    """A run of emoji reduced to its first pictograph (with its modifiers), so repeats count once."""
    out = [token[0]]
    for ch in token[1:]:
        if ch in "\uFE0F\u200D" or "\U0001F3FB" <= ch <= "\U0001F3FF" or out[-1] == "\u200D":
            out.append(ch)
        else:
            break
    return "".join(out).rstrip("\u200D")
