"""Top terms, kwic and spelling-variant suggestions."""

import numpy as np
import pytest
from nltk.metrics import edit_distance

from opencode.errors import OpenCodeError
from opencode.text.analyzer import Analyzer
from opencode.text.kwic import format_kwic, kwic
from opencode.text.matrix import build_matrix
from opencode.text.spelling_variants import allowed_distance, close_pairs, format_variants, suggest_variants
from opencode.text.words import format_top_terms, top_terms

TEXTS = [
    "Parking is awful near the library.",
    "I love the parking and the Library staff",
    "Opening hours are too short; not safe after dark",
    "no comment",
    "The libary needs parking",
    "PARKED cars everywhere, parking again",
]


def test_top_terms_counts_and_percent():
    tm = build_matrix(TEXTS, Analyzer(), exclude=[0, 0, 0, 1, 0, 0])
    rows = top_terms(tm, n=3)
    assert rows[0].label == "parking" and rows[0].verbatims == 4 and rows[0].count == 5
    assert rows[0].percent == pytest.approx(100 * 4 / 5)
    sub = top_terms(tm, subset=np.array([1, 1, 0, 0, 0, 0], bool))
    assert {r.label for r in sub[:2]} == {"parking", "library"}
    assert [r.percent for r in sub[:2]] == pytest.approx([100.0, 100.0])
    assert "parking" in format_top_terms(rows)
    with pytest.raises(OpenCodeError, match="subset"):
        top_terms(tm, subset=[True])


def test_kwic_finds_every_surface_form_in_original_text():
    tm = build_matrix(TEXTS, Analyzer(join_negations=True))
    lines = kwic(tm, TEXTS, "parking", width=12)
    assert [line.match for line in lines] == ["Parking", "parking", "parking", "PARKED", "parking"]
    assert lines[0].doc_id == 0 and lines[0].right.startswith("is awful")
    negated = kwic(tm, TEXTS, "not safe")
    assert [line.match for line in negated] == ["not safe"]
    table = format_kwic(lines, width=12)
    assert len({len(row.split("PARKED")[0]) for row in table.splitlines() if "PARKED" in row}) == 1
    with pytest.raises(OpenCodeError, match="not in the vocabulary"):
        kwic(tm, TEXTS, "zebra")


def test_close_pairs_equal_brute_force_nltk():
    # Reference: nltk.metrics.edit_distance over every pair (brute force).
    rare = ["libary", "parkng", "hourz", "opnening", "staf", "bookes", "zzzz", "hoursa"]
    frequent = ["library", "parking", "hours", "opening", "staff", "books", "open"]
    ours = {(a, b) for a, b, _ in close_pairs(rare, frequent)}
    brute = {(a, b) for a in rare for b in frequent if edit_distance(a, b) <= allowed_distance(a, 2)}
    assert ours == brute and ("libary", "library") in ours


def test_variant_suggestions_on_matrix():
    texts = ["library"] * 12 + ["libary"]
    tm = build_matrix(texts, Analyzer(stemmer=None))
    rows = suggest_variants(tm)
    assert [(r.label, r.target_label, r.distance) for r in rows] == [("libary", "library", 1)]
    assert "libary" in format_variants(rows)
