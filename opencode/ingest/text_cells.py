"""Text cells as survey files give them: what counts as empty, and characters that break display.

An answer is kept exactly as the respondent typed it: "None", "NULL", "nan" or "n/a" are answers (the
non-answer flag may mark some of them, but never changes the text). Only the format's own empty value is
missing: an empty CSV cell (or \\N, a database dump's null), an empty spreadsheet cell, a declared null in
.sav, .dta or Parquet. In closed-ended (numeric or coded) columns the usual database null markers below also
read as missing.
"""

from __future__ import annotations

import re

import pandas as pd

#: The null marker of database text dumps: missing in every column (no respondent types it).
DUMP_NULL = "\\N"
#: In closed-ended columns only: cells that mean "no value" in text exports ("\\N" from database dumps, NULL,
#: and the like). Never applied to open answers.
NULL_MARKERS = frozenset({"", "\\N", "NULL", "null", "NaN", "nan", "#NULL!", "."})
# Characters that break a terminal or a table: C0/C1 controls (not tab or newline) and bidi overrides.
_BREAKS_DISPLAY = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_NEEDS_CLEANING = "[\r" + _BREAKS_DISPLAY.pattern[1:]
# A run of control characters between a word and a final "s" stands for a character lost in conversion, in
# practice the apostrophe of a possessive ("entity\x1a\x1as"): it becomes ’ instead of vanishing, so the text
# reads "entity’s" and the analyzer folds it into "entity" (dropping it would make a new word, "entitys").
# No lookaround: pyarrow strings run the pattern with RE2, which has none; the word character and the "s" are
# captured and written back.
_LOST_APOSTROPHE = r"(\w)[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f]+(s\b)"


def as_text(series: pd.Series) -> pd.Series:
    """A column as strings, empty where there is no value."""
    if pd.api.types.is_string_dtype(series) and not series.hasnans:
        return series
    return series.astype(object).where(series.notna(), "").astype(str)


def clean_text(series: pd.Series) -> pd.Series:
    """Text exactly as given, minus characters that break display; a line break is LF (CR LF and a lone CR
    inside a quoted answer both become LF, so no line break is lost). Empty cells, and the database dump's
    null marker \\N (MySQL and PostgreSQL text dumps: that format's own missing value, never typed by a
    respondent), become ""."""
    text = as_text(series).astype("string[pyarrow]")
    text = text.where(text != DUMP_NULL, "")
    # Most columns hold none of these characters: one fast look, and replace only where needed.
    if text.str.contains(_NEEDS_CLEANING, regex=True).any():
        text = (text.str.replace("\r\n", "\n", regex=False).str.replace("\r", "\n", regex=False)
                .str.replace(_LOST_APOSTROPHE, "\\1\u2019\\2", regex=True))
        text = text.str.replace(_BREAKS_DISPLAY.pattern, "", regex=True)
    return text.astype(str)


_WHOLE_NUMBER_WRITTEN_AS_DECIMAL = r"^([+-]?\d+)\.0+$"


def respondent_keys(series: pd.Series) -> pd.Series:
    """Respondent ids as text, stripped, with whole numbers written as decimals ("1.0", as spreadsheets and
    some exports write them) read as the number ("1"): one respondent, never two."""
    keys = as_text(series).str.strip()
    if not keys.str.contains(".", regex=False).any():  # one fast look; most id columns have no decimals
        return keys
    return keys.str.replace(_WHOLE_NUMBER_WRITTEN_AS_DECIMAL, r"\1", regex=True)
