"""Agreement output: terminal text, CSV (atomic, formula-safe) and HTML section; undefined values in words, never NaN."""

import csv
import re
from html.parser import HTMLParser

import pytest

from opencode.analysis.agreement.core import CodingMatrix, measure_agreement
from opencode.analysis.agreement.report import (
    CSV_HEADER,
    format_agreement_html,
    format_agreement_text,
    write_agreement_csv,
)
from opencode.errors import OpenCodeError

NAN = re.compile(r"\bnan\b", re.IGNORECASE)


def _result(coders=("ash", "bryn")):
    """Small invented double-coded set: codes 1-3 used, code 4 in the frame but never used."""
    rows = []
    for u in range(40):
        for r, coder in enumerate(coders):
            rows.append((u, coder, 1 + (u + (r if u % 5 == 0 else 0)) % 3))
    rows.append((40, coders[0], 2))  # coded by one coder only
    labels = {1: "longer hours", 2: "=staff cuts", 3: "safety after dark", 4: "parking"}
    matrix = CodingMatrix.from_assignments(rows, codes=[1, 2, 3, 4])
    return measure_agreement(matrix, code_labels=labels, n_resamples=200, random_state=3)


@pytest.mark.parametrize("coders", [("ash", "bryn"), ("ash", "bryn", "machine")])
def test_text_names_everything_and_never_prints_nan(coders, monkeypatch):
    monkeypatch.setenv("COLUMNS", "300")  # every cell on one line: the test reads the content, not the fitting
    text = format_agreement_text(_result(coders))
    assert not NAN.search(text)
    assert "undefined: no coder used this code" in text
    assert "1 by one coder only" in text
    assert "Krippendorff's alpha, MASI distance" in text and "mean per-code kappa" in text
    assert ("Cohen's kappa" if len(coders) == 2 else "Fleiss' kappa") in text
    assert all(coder in text for coder in coders)
    assert "Coder pair ash and bryn" in text


def test_text_can_limit_statistics():
    text = format_agreement_text(_result(), statistics=["percent", "cohen_kappa"])
    per_code = text.split("Per code")[1].split("Coder pair")[0]
    assert "Gwet's AC1" not in per_code and "% agreement" in per_code


def test_csv_is_long_safe_and_free_of_nan(tmp_path):
    target = write_agreement_csv(_result(), tmp_path / "agree.csv")
    with open(target, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0] == CSV_HEADER
    assert not any(NAN.search(cell) for row in rows for cell in row)
    unused = [r for r in rows if r[0] == "code" and r[1] == "4" and r[5] == "Cohen's kappa"][0]
    assert unused[6] == "" and unused[9] == "undefined: no coder used this code"
    # OWASP "CSV Injection": a label starting with '=' is written with a leading single quote.
    assert any(r[2] == "'=staff cuts" for r in rows)
    assert not any(r[2].startswith("=") for r in rows)
    kappa = [r for r in rows if r[0] == "code" and r[1] == "1" and r[5] == "Cohen's kappa"][0]
    assert float(kappa[7]) <= float(kappa[6]) <= float(kappa[8])
    assert {r[0] for r in rows} >= {"frame", "code", "pair", "disputed_unit", "confused_pair"}


def test_csv_into_missing_folder_is_a_clear_error(tmp_path):
    with pytest.raises(OpenCodeError, match="does not exist"):
        write_agreement_csv(_result(), tmp_path / "nowhere" / "agree.csv")


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.stack = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self.stack.append(tag)

    def handle_endtag(self, tag):
        assert self.stack.pop() == tag


def test_html_is_a_balanced_section_with_escaped_text():
    fragment = format_agreement_html(_result(), title="Why do you say that? <agreement>")
    parser = _Collector()
    parser.feed(fragment)
    assert parser.stack == []
    assert parser.tags[0] == ("section", {"class": "oc-agreement"})
    assert "&lt;agreement&gt;" in fragment
    assert not NAN.search(fragment)
    assert 'class="oc-undefined"' in fragment and "undefined: no coder used this code" in fragment
    assert sum(1 for tag, _ in parser.tags if tag == "table") >= 4
