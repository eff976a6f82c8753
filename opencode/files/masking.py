"""Mask identifiers in verbatims before they leave the study: e-mail and web addresses, phone numbers,
postcodes, payment card numbers, bank account numbers (IBAN) and national identity numbers.

Verbatims can identify people; exports carry masked text unless the user asks for the raw answers. What is
masked (each replaced by a bracketed word, e.g. "[phone]"), in this order:

- e-mail addresses, also with letters beyond ASCII ("josé@...") and written around a filter
  ("john[at]example.com", "john (at) example (dot) com", "john at example dot com");
- web addresses: with a scheme or www., bare domains with a common ending, and any domain followed by a
  path ("mysite.xyz/page");
- payment card numbers: 13 to 19 digits (spaced or dashed in groups) that pass the Luhn check
  (ISO/IEC 7812-1);
- IBANs: country letters, check digits and account, passing the ISO 13616 mod-97 check;
- national identity numbers of the lexicon languages' countries where a public format exists: UK National
  Insurance number and US Social Security number (shape), German tax identification number (11 digits with
  its ISO 7064 MOD 11,10 check digit), French social security number NIR (13 digits with the 97-modulus
  key), Spanish DNI and NIE (with the check letter), Dutch BSN (9 digits passing the 11-test);
- postcodes: UK shape (e.g. "SW1A 1AA", any case, not ordinals like "2nd") and US ZIP+4 ("12345-6789");
- phone numbers: 7 to 15 digits (ITU-T E.164) in runs with spaces, dots, dashes, slashes or brackets,
  also after a prefix or glued to a word ("tel:", "mob-", "no.", "me(...)"), but not dates, years,
  year ranges, times, decimals or amounts after a currency sign.

What it misses: names, street addresses, dates of birth, workplaces, rare jobs, stories only one person
could tell, numbers in other countries' formats, card numbers that fail the Luhn check, identifiers written
in words, and anything split across lines. Masking is a help, not a guarantee: read before sharing.
"""

from __future__ import annotations

import re

EMAIL_TOKEN = "[email]"
PHONE_TOKEN = "[phone]"
URL_TOKEN = "[url]"
POSTCODE_TOKEN = "[postcode]"
CARD_TOKEN = "[card]"
BANK_TOKEN = "[bank account]"
ID_TOKEN = "[id number]"

# -- e-mail ------------------------------------------------------------------------------------------------
_AT = r"(?:\s*@\s*|\s*[\[({<]\s*at\s*[\])}>]\s*|\s+at\s+(?=[\w-]+(?:\s*[\[({<]?\s*dot\s*[\])}>]?\s*[\w-]+)+))"
_DOT = r"(?:\.|\s*[\[({<]\s*dot\s*[\])}>]\s*|\s+dot\s+)"
_EMAIL = re.compile(
    rf"(?<![\w.+-])[\w][\w.%+-]*{_AT}[\w](?:[\w-]*[\w])?(?:{_DOT}[\w](?:[\w-]*[\w])?)*{_DOT}[^\W\d_]{{2,}}\b",
    re.IGNORECASE,
)

# -- web addresses -----------------------------------------------------------------------------------------
# Common top-level domains for addresses written without a scheme ("wrenfield-library.org").
_BARE_TLDS = (
    "com|org|net|edu|gov|info|biz|io|co|uk|de|fr|nl|be|es|it|eu|ie|au|nz|ca|us|ch|at|se|no|dk|fi|pl|"
    "pt|jp|cn|in|br|mx|za|ru|app|dev|online|site|shop|blog|me|tv|ly|gl|gd|to|xyz|top|club|live|store|"
    "tech|website|space|fun|email|page|link|cat|lu|cz|gr|hu|ro"
)
_URL_TAIL = r"(?:[^\s<>\"']*[^\s<>\"'.,;:!?)\]}])?"
_URL = re.compile(
    r"(?:\b(?:https?|ftp)://|\bwww\.)[^\s<>\"']*[^\s<>\"'.,;:!?)\]}]"
    rf"|\b(?:[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?\.)+(?:{_BARE_TLDS})\b(?:/{_URL_TAIL})?"
    rf"|\b(?:[A-Za-z0-9](?:[A-Za-z0-9-]*[A-Za-z0-9])?\.)+[A-Za-z]{{2,24}}/{_URL_TAIL}",
    re.IGNORECASE,
)

# -- payment cards, IBANs ----------------------------------------------------------------------------------
_CARD = re.compile(r"(?<![\d.,/+-])[1-9](?:[ -]?\d){12,18}(?![\d])")
_IBAN = re.compile(r"\b[A-Z]{2}\d{2}(?: ?[A-Z0-9]){11,30}\b")


def luhn_valid(digits: str) -> bool:
    """The Luhn check (ISO/IEC 7812-1) of a digit string."""
    total = 0
    for position, ch in enumerate(reversed(digits)):
        value = int(ch)
        if position % 2:
            value = value * 2 - 9 if value > 4 else value * 2
        total += value
    return total % 10 == 0


def _mask_card(match: re.Match) -> str:
    digits = re.sub(r"\D", "", match.group(0))
    return CARD_TOKEN if 13 <= len(digits) <= 19 and luhn_valid(digits) else match.group(0)


def iban_valid(text: str) -> bool:
    """ISO 13616: move the first four characters to the end, letters to numbers (A=10), mod 97 == 1."""
    compact = text.replace(" ", "").upper()
    if not 15 <= len(compact) <= 34:
        return False
    moved = compact[4:] + compact[:4]
    return int("".join(str(int(ch, 36)) for ch in moved)) % 97 == 1


def _mask_iban(match: re.Match) -> str:
    return BANK_TOKEN if iban_valid(match.group(0)) else match.group(0)


# -- national identity numbers -----------------------------------------------------------------------------
# UK National Insurance number: two letters (not D F I Q U V; second not O; not BG GB NK KN NT TN ZZ), six
# digits, a final letter A-D (HMRC's published format).
_UK_NINO = re.compile(
    r"\b(?!BG|GB|NK|KN|NT|TN|ZZ)[A-CEGHJ-PR-TW-Z][A-CEGHJ-NPR-TW-Z] ?\d{2} ?\d{2} ?\d{2} ?[A-D]\b", re.IGNORECASE)
# US Social Security number written with dashes: area not 000, 666 or 9xx; group not 00; serial not 0000.
_US_SSN = re.compile(r"(?<![\d-])(?!000|666|9\d\d)\d{3}-(?!00)\d{2}-(?!0000)\d{4}(?![\d-])")
# German tax identification number: 11 digits, first not 0 (written whole or as 2-3-3-3).
_DE_TAX_ID = re.compile(r"(?<![\d./-])[1-9]\d(?: ?\d{3}){3}(?![\d])")
# French NIR: sex, year, month, department (2A/2B for Corsica), commune, order, then a two-digit key.
_FR_NIR = re.compile(
    r"(?<![\d])[1-478] ?\d{2} ?(?:0[1-9]|1[0-2]|[2-9]\d) ?(?:\d{2}|2[AB]) ?\d{3} ?\d{3} ?\d{2}(?![\d])",
    re.IGNORECASE)
# Spanish DNI (8 digits) and NIE (X, Y or Z and 7 digits), then the check letter.
_ES_DNI = re.compile(r"\b(?:([XYZ])[ -]?)?(\d{7,8})[ -]?([A-HJ-NP-TV-Z])\b", re.IGNORECASE)
_ES_LETTERS = "TRWAGMYFPDXBNJZSQVHLCKE"
# Dutch BSN: 9 digits (also written 1234.56.789) passing the 11-test.
_NL_BSN = re.compile(r"(?<![\d.,-])\d{4}[. ]?\d{2}[. ]?\d{3}(?![\d]|[.,]\d)")


def de_tax_id_valid(digits: str) -> bool:
    """The German tax id check digit: ISO 7064 MOD 11,10 over the first ten digits (from memory)."""
    if len(digits) != 11 or digits[0] == "0":
        return False
    product = 10
    for ch in digits[:10]:
        total = (int(ch) + product) % 10 or 10
        product = (total * 2) % 11
    check = (11 - product) % 10
    return check == int(digits[10])


def fr_nir_valid(text: str) -> bool:
    """The NIR key: 97 minus the first 13 digits modulo 97 (Corsica: 2A read as 19, 2B as 18; from memory)."""
    compact = text.replace(" ", "").upper()
    body, key = compact[:13], compact[13:]
    body = body.replace("2A", "19").replace("2B", "18") if not body.isdigit() else body
    return body.isdigit() and key.isdigit() and 97 - int(body) % 97 == int(key)


def es_dni_valid(prefix: str | None, number: str, letter: str) -> bool:
    """The DNI / NIE check letter: the number (NIE: X=0, Y=1, Z=2 in front) modulo 23 picks the letter."""
    if prefix:
        if len(number) != 7:
            return False
        number = str("XYZ".index(prefix.upper())) + number
    elif len(number) != 8:
        return False
    return _ES_LETTERS[int(number) % 23] == letter.upper()


def nl_bsn_valid(digits: str) -> bool:
    """The Dutch 11-test: 9*d1 + 8*d2 + ... + 2*d8 - 1*d9 is a multiple of 11 (and not all zeros)."""
    if len(digits) != 9 or digits == "0" * 9:
        return False
    total = sum(int(d) * w for d, w in zip(digits, (9, 8, 7, 6, 5, 4, 3, 2, -1)))
    return total % 11 == 0


def _mask_checked(valid):
    def mask(match: re.Match) -> str:
        return ID_TOKEN if valid(re.sub(r"[^0-9A-Za-z]", "", match.group(0))) else match.group(0)
    return mask


def _mask_dni(match: re.Match) -> str:
    return ID_TOKEN if es_dni_valid(*match.groups()) else match.group(0)


# -- postcodes ---------------------------------------------------------------------------------------------
_UK_POSTCODE = re.compile(
    r"\b(?:GIR ?0AA|[A-PR-UWYZ][A-HK-Y]?\d[A-Z\d]? ?\d(?!st\b|nd\b|rd\b|th\b)[ABD-HJLNP-UW-Z]{2})\b", re.IGNORECASE)
_US_ZIP4 = re.compile(r"(?<![\d-])\d{5}-\d{4}(?![\d-])")

# -- phone numbers -----------------------------------------------------------------------------------------
# A run that may be a phone number: optional + or (, digit groups split by space, dot, dash, slash or
# brackets. It may follow a word or a prefix ("tel:", "mob-", "no.", "me("), never a digit, a currency sign
# or a decimal point after a digit. The atomic group stops a run from matching only its front part.
_PHONE_CANDIDATE = re.compile(
    r"(?<![\d£$€¥+])(?<!\d[.,])(?>(?:\+|\(\+?)?\d+(?:[ ().\-/]{1,3}\d+)*\)?)(?![\d%]|[.,]\d)"
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
    groups = [g for g in re.split(r"[ ().\-/]+", compact) if g]
    if len(groups) == 1:
        # A bare digit run: only long ones (or ones with an international prefix) are phone numbers.
        return digits >= 9 or candidate.startswith("+")
    if all(_YEAR.match(g) for g in groups):
        return False
    if sum(len(g) == 1 for g in groups[1:]) > 1 and "(0)" not in candidate:
        return False
    if set(candidate) <= set("0123456789.") and candidate.count(".") == 1:
        return False
    if 1 <= len(groups[0]) <= 2 and all(len(g) == 3 for g in groups[1:]) and not candidate.startswith(("+", "(")):
        return False  # a count with thousands spaced out ("12 345 678")
    if "/" in candidate and len(groups) == 2 and min(len(g) for g in groups) <= 2:
        return False  # a score or fraction ("10/10", "1/2")
    return True


def _mask_phone(match: re.Match) -> str:
    text = match.group(0)
    if not _looks_like_phone(text):
        return text
    # Keep a bracket that opened before the number and is not part of it: "me(07700 900123)".
    if text.endswith(")") and text.count("(") < text.count(")"):
        return PHONE_TOKEN + ")"
    return PHONE_TOKEN


def mask_identifiers(text: str) -> str:
    """Replace e-mail and web addresses, cards, bank accounts, identity numbers, postcodes and phone
    numbers with bracketed words ([email], [url], [card], [bank account], [id number], [postcode],
    [phone])."""
    if not text:
        return text
    masked = _EMAIL.sub(EMAIL_TOKEN, text)
    masked = _URL.sub(URL_TOKEN, masked)
    masked = _IBAN.sub(_mask_iban, masked)
    masked = _CARD.sub(_mask_card, masked)
    masked = _UK_NINO.sub(ID_TOKEN, masked)
    masked = _US_SSN.sub(ID_TOKEN, masked)
    masked = _ES_DNI.sub(_mask_dni, masked)
    masked = _FR_NIR.sub(_mask_checked(fr_nir_valid), masked)
    masked = _DE_TAX_ID.sub(_mask_checked(de_tax_id_valid), masked)
    masked = _NL_BSN.sub(_mask_checked(nl_bsn_valid), masked)
    masked = _US_ZIP4.sub(POSTCODE_TOKEN, masked)
    masked = _UK_POSTCODE.sub(POSTCODE_TOKEN, masked)
    return _PHONE_CANDIDATE.sub(_mask_phone, masked)
