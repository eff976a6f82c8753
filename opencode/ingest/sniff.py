"""Tell what a survey file is: its format (by content, not only by extension), text encoding and delimiter."""

from __future__ import annotations

import codecs
import csv
import re
from pathlib import Path

from charset_normalizer import from_bytes

from opencode.errors import OpenCodeError

FORMATS = ("csv", "tsv", "xlsx", "sav", "dta", "parquet")
_EXTENSIONS = {".csv": "csv", ".txt": "csv", ".tsv": "tsv", ".tab": "tsv", ".xlsx": "xlsx", ".xlsm": "xlsx",
               ".sav": "sav", ".zsav": "sav", ".dta": "dta", ".parquet": "parquet", ".pq": "parquet"}
_MAGIC = {"xlsx": (b"PK\x03\x04",), "sav": (b"$FL2", b"$FL3"), "parquet": (b"PAR1",)}
_NAMES = {"csv": "a CSV text file", "tsv": "a tab-separated text file", "xlsx": "an Excel .xlsx workbook",
          "sav": "an SPSS .sav file", "dta": "a Stata .dta file", "parquet": "a Parquet file"}


def _content_format(head: bytes) -> str | None:
    for name, magics in _MAGIC.items():
        if any(head.startswith(m) for m in magics):
            return name
    if head.startswith(b"<stata_dta>") or head[:1] in (b"\x71", b"\x72", b"\x73") and head[1:2] in (b"\x01", b"\x02"):
        return "dta"
    if head.startswith(b"\xd0\xcf\x11\xe0"):
        return "xls"
    return None


def detect_format(path: Path) -> str:
    """The file's format, checked against its content; a mismatch is an error naming both."""
    if not path.is_file():
        raise OpenCodeError(f"{path}: no such file")
    with open(path, "rb") as handle:
        head = handle.read(64)
    if not head:
        raise OpenCodeError(f"{path}: the file is empty")
    by_extension = _EXTENSIONS.get(path.suffix.lower())
    by_content = _content_format(head)
    if by_content == "xls":
        raise OpenCodeError(f"{path}: is an old binary Excel (.xls) workbook; save it as .xlsx or CSV first")
    if by_extension is None:
        if by_content:
            return by_content
        raise OpenCodeError(f"{path}: unknown file type {path.suffix or '(no extension)'}; "
                            "use CSV, TSV, XLSX, SPSS .sav, Stata .dta or Parquet")
    if by_extension in ("csv", "tsv"):
        if by_content is not None:
            raise OpenCodeError(f"{path}: the name says {_NAMES[by_extension]} but the content is {_NAMES[by_content]}")
        return by_extension
    if by_content != by_extension:
        found = _NAMES[by_content] if by_content else "not that (it looks like text or another format)"
        raise OpenCodeError(f"{path}: the name says {_NAMES[by_extension]} but the content is {found}")
    return by_extension


#: Signs that a wrong code page was used: they follow a letter inside a word ("za\u00bf\u00f3\u00b3\u00e6" is
#: Polish read as cp1252).
_WORD_BREAKERS = set("\u00b9\u00b2\u00b3\u00bf")
_ESCAPED = re.compile("[\udc80-\udcff]")
_NON_ASCII = re.compile("[^\x00-\x7f]")
#: How many bad places an otherwise UTF-8 file is described by (the message lists them).
SHOWN_BAD_BYTES = 5


def _utf16_without_bom(raw: bytes) -> str | None:
    """'utf-16-le' or 'utf-16-be' when the zero bytes fall on one side of each pair (text in UTF-16 with
    no byte-order mark), else None."""
    sample = raw[:8192]
    pairs = len(sample) // 2
    if pairs < 2:
        return None
    even = sample[0:pairs * 2:2].count(0)
    odd = sample[1:pairs * 2:2].count(0)
    if odd >= 0.3 * pairs and even <= odd / 4:
        return "utf-16-le"
    if even >= 0.3 * pairs and odd <= even / 4:
        return "utf-16-be"
    return None


def _mostly_utf8(raw: bytes) -> tuple[bool, list[int], int]:
    """Whether a file that is not valid UTF-8 is still UTF-8 apart from some bad bytes (it holds valid
    multi-byte sequences, at least a quarter as many as bad bytes: in legacy code-page text a valid UTF-8
    sequence is a rare accident), the byte offsets of the first bad bytes, and
    how many there are."""
    text = raw.decode("utf-8", errors="surrogateescape")
    bad = [m.start() for m in _ESCAPED.finditer(text)]
    valid = len(_NON_ASCII.findall(text)) - len(bad)
    offsets = [len(text[:i].encode("utf-8", errors="surrogateescape")) for i in bad[:SHOWN_BAD_BYTES]]
    return valid > 0 and 4 * valid >= len(bad), offsets, len(bad)


def _misread_signs(text: str) -> int:
    """How many non-ASCII signs sit where no sign belongs: between two letters, or a superscript digit or
    inverted question mark right after a letter."""
    count = 0
    for i in range(1, len(text) - 1):
        ch = text[i]
        if ch < "\x80" or ch.isalpha() or ch.isspace():
            continue
        if text[i - 1].isalpha() and (text[i + 1].isalpha() or ch in _WORD_BREAKERS):
            count += 1
    return count


def _western_or_central(raw: bytes) -> str:
    """cp1252 for Western European text (English, German, French, Spanish, Dutch: the lexicon languages),
    cp1250 only when the cp1252 reading is full of signs inside words and the cp1250 reading is not."""
    sample = raw[:200_000]
    western = _misread_signs(sample.decode("cp1252", errors="replace"))
    if western < 2:
        return "cp1252"
    try:
        central = _misread_signs(sample.decode("cp1250"))
    except UnicodeDecodeError:
        return "cp1252"
    return "cp1250" if central * 2 < western else "cp1252"


def detect_encoding(raw: bytes) -> str:
    """The text encoding: a BOM wins; then UTF-16 without a BOM (zero bytes on one side); then strict
    UTF-8; then cp1252 for Western European text (cp1250 only when its letters clearly dominate); then
    the best guess among other legacy encodings. A file that is UTF-8 apart from a few bad bytes is
    never re-read whole as a legacy code page: `decode_text` stops and names those bytes."""
    if raw.startswith(codecs.BOM_UTF8):
        return "utf-8-sig"
    if raw.startswith(codecs.BOM_UTF16_LE) or raw.startswith(codecs.BOM_UTF16_BE):
        return "utf-16"
    wide = _utf16_without_bom(raw)
    if wide:
        return wide
    try:
        raw.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError:
        pass
    if _mostly_utf8(raw[:2_000_000])[0]:
        return "utf-8"
    try:
        raw.decode("cp1252")
        return _western_or_central(raw)
    except UnicodeDecodeError:
        pass
    guess = from_bytes(raw[:200_000], cp_isolation=["cp1250", "latin_1", "iso8859_15", "cp1251"]).best()
    return guess.encoding if guess is not None else "latin-1"


def _line_of(raw: bytes, offset: int) -> int:
    return raw.count(b"\n", 0, offset) + 1


def decode_text(path: Path, raw: bytes, encoding: str | None, head_only: bool = False) -> tuple[str, str]:
    """Decode the file (or, for UTF-8 that is already known valid, only its first 64 KB for sniffing).

    A forced encoding that fails names the line and byte; a UTF-8 file with bad bytes stops with the lines
    and byte offsets of the bad bytes (never decoded whole as another code page); UTF-16 that cannot be
    read says so.
    """
    chosen = encoding or detect_encoding(raw)
    try:
        codecs.lookup(chosen)
    except LookupError as error:
        raise OpenCodeError(f"{path}: unknown encoding {chosen!r}") from error
    try:
        if head_only and encoding is None and chosen in ("utf-8", "utf-8-sig"):
            raw.decode(chosen)  # raises for a file that is UTF-8 apart from some bad bytes
            return raw[:65536].decode(chosen, errors="ignore"), chosen
        return raw.decode(chosen), chosen
    except UnicodeDecodeError as error:
        if encoding is None and chosen in ("utf-8", "utf-8-sig"):
            _, bad, count = _mostly_utf8(raw)
            places = ", ".join(f"line {_line_of(raw, b)} (byte offset {b}, 0x{raw[b]:02x})" for b in bad)
            more = f" and {count - len(bad)} more" if count > len(bad) else ""
            raise OpenCodeError(
                f"{path}: is UTF-8 text except for {count} byte(s) that are not UTF-8: {places}{more}; "
                "fix those bytes (the rest would read correctly), or give --encoding if the whole file is in "
                "another encoding") from None
        if encoding is None and chosen.startswith("utf-16"):
            raise OpenCodeError(
                f"{path}: looks like UTF-16 text ({chosen}, no byte-order mark) but cannot be read as it "
                f"(byte offset {error.start}); save it as UTF-8, or give --encoding") from None
        line = raw[: error.start].count(b"\n") + 1
        raise OpenCodeError(
            f"{path}: line {line}: byte 0x{raw[error.start]:02x} cannot be read as {chosen} "
            f"(try --encoding cp1252, latin-1 or utf-16)") from error


def sniff_delimiter(path: Path, text: str, kind: str) -> str:
    """The field delimiter: tab for TSV, else sniffed among , ; tab | from the first lines."""
    if kind == "tsv":
        return "\t"
    sample = "\n".join(text[:65536].splitlines()[:50])
    try:
        return csv.Sniffer().sniff(sample, delimiters=",;\t|").delimiter
    except csv.Error:
        header = sample.splitlines()[0] if sample else ""
        counts = {d: header.count(d) for d in ",;\t|"}
        best = max(counts, key=counts.get)
        return best if counts[best] else ","
