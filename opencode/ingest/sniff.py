"""Tell what a survey file is: its format (by content, not only by extension), text encoding and delimiter."""

from __future__ import annotations

import codecs
import csv
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


def detect_encoding(raw: bytes) -> str:
    """The text encoding: a BOM wins; then strict UTF-8; then the best guess among legacy encodings."""
    if raw.startswith(codecs.BOM_UTF8):
        return "utf-8-sig"
    if raw.startswith(codecs.BOM_UTF16_LE) or raw.startswith(codecs.BOM_UTF16_BE):
        return "utf-16"
    try:
        raw.decode("utf-8")
        return "utf-8"
    except UnicodeDecodeError:
        pass
    guess = from_bytes(raw[:200_000], cp_isolation=["cp1252", "latin_1", "utf_16", "cp1250", "iso8859_15"]).best()
    if guess is not None:
        return guess.encoding
    return "cp1252"


def decode_text(path: Path, raw: bytes, encoding: str | None, head_only: bool = False) -> tuple[str, str]:
    """Decode the file (or, for UTF-8 that is already known valid, only its first 64 KB for sniffing).

    A forced encoding that fails names the line and byte.
    """
    chosen = encoding or detect_encoding(raw)
    try:
        codecs.lookup(chosen)
    except LookupError as error:
        raise OpenCodeError(f"{path}: unknown encoding {chosen!r}") from error
    try:
        if head_only and encoding is None and chosen in ("utf-8", "utf-8-sig"):
            return raw[:65536].decode(chosen, errors="ignore"), chosen  # detect_encoding validated it all
        return raw.decode(chosen), chosen
    except UnicodeDecodeError as error:
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
