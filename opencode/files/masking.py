"""Mask e-mail addresses, phone numbers and web addresses in verbatims before they leave the study.

Verbatims can identify people; exports carry masked text unless the user asks for the raw answers.
"""

from __future__ import annotations

import re

EMAIL_TOKEN = "[email]"
PHONE_TOKEN = "[phone]"
URL_TOKEN = "[url]"

_EMAIL = re.compile(
    r"(?<![\w.+-])[A-Za-z0-9][A-Za-z0-9._%+-]*@[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?"
    r"(?:\.[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?)*\.[A-Za-z]{2,}\b"
)

# Common top-level domains for addresses written without a scheme ("wrenfield-library.org/hours").
_BARE_TLDS = (
    "com|org|net|edu|gov|info|biz|io|co|uk|de|fr|nl|be|es|it|eu|ie|au|nz|ca|us|ch|at|se|no|dk|fi|pl|"
    "pt|jp|cn|in|br|mx|za|ru|app|dev|online|site|shop|blog|me|tv|ly|gl|gd|to"
)
_URL_TAIL = r"(?:[^\s<>\"']*[^\s<>\"'.,;:!?)\]}])?"
_URL = re.compile(
    r"(?:\b(?:https?|ftp)://|\bwww\.)[^\s<>\"']*[^\s<>\"'.,;:!?)\]}]"
    rf"|\b(?:[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?\.)+(?:{_BARE_TLDS})\b(?:/{_URL_TAIL})?",
    re.IGNORECASE,
)

# A run that may be a phone number: optional +, digit groups split by space, dot, dash or brackets.
# The atomic group stops a run from matching only its front part when what follows rules it out.
_PHONE_CANDIDATE = re.compile(
    r"(?<![\w/.,:£$€+(-])(?>(?:\+|\(\+?)?\d+(?:[ ().-]{1,3}\d+)*\)?)(?![\w/:%-]|[.,]\d)"
)
_DATE_LIKE = re.compile(r"^\d{1,4}([-./])\d{1,2}\1\d{1,4}$")
_YEAR = re.compile(r"^(?:1[89]|20)\d\d$")


def _looks_like_phone(candidate: str) -> bool:
    """Decide whether a digit run is a phone number rather than a date, year list, amount or code."""
    digits = sum(ch.isdigit() for ch in candidate)
    if not 7 <= digits <= 15:  # ITU-T E.164: at most 15 digits; shorter local numbers start at 7
        return False
    compact = candidate.strip("()+ ")
    if _DATE_LIKE.match(compact):
        return False
    groups = [g for g in re.split(r"[ ().-]+", compact) if g]
    if len(groups) == 1:
        # A bare digit run: only long ones (or ones with an international prefix) are phone numbers.
        return digits >= 9 or candidate.startswith("+")
    if all(_YEAR.match(g) for g in groups):
        return False
    if sum(len(g) == 1 for g in groups[1:]) > 1 and "(0)" not in candidate:
        return False
    if set(candidate) <= set("0123456789.") and candidate.count(".") == 1:
        return False
    return True


def _mask_phone(match: re.Match) -> str:
    text = match.group(0)
    return PHONE_TOKEN if _looks_like_phone(text) else text


def mask_identifiers(text: str) -> str:
    """Replace e-mail addresses, web addresses and phone numbers with [email], [url] and [phone]."""
    if not text:
        return text
    masked = _EMAIL.sub(EMAIL_TOKEN, text)
    masked = _URL.sub(URL_TOKEN, masked)
    return _PHONE_CANDIDATE.sub(_mask_phone, masked)
