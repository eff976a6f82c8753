"""Phrase suggestions by Dunning's G2 (checked against scipy) and PMI."""

import math

import numpy as np
import pytest
from scipy.stats import chi2_contingency

from opencode.text.analyzer import Analyzer
from opencode.text.phrases import dunning_g2, format_phrase_suggestions, pmi, suggest_phrases


@pytest.mark.parametrize("table,value", [([[1, 0], [0, 1]], 2.7726), ([[10, 0], [0, 10]], 27.726)])
def test_g2_published_toy_values(table, value):
    # Dunning (1993), Computational Linguistics 19(1): G2 = 2 sum O ln(O/E); toy values from CHECKS.md.
    (a, b), (c, d) = table
    assert dunning_g2(np.array([a]), np.array([b]), np.array([c]), np.array([d]))[0] == pytest.approx(value, abs=1e-3)


def test_g2_equals_scipy_log_likelihood():
    # Reference: scipy.stats.chi2_contingency(correction=False, lambda_="log-likelihood").
    rng = np.random.default_rng(3)
    tables = rng.integers(1, 400, size=(25, 4))
    ours = dunning_g2(*tables.T)
    for table, g2 in zip(tables, ours):
        ref = chi2_contingency(table.reshape(2, 2), correction=False, lambda_="log-likelihood")[0]
        assert g2 == pytest.approx(ref, rel=1e-9)


def test_pmi_formula():
    # Church & Hanks (1990) PMI: log2(P(ab)/(P(a)P(b))).
    assert pmi(np.array([10]), np.array([20]), np.array([40]), 1000.0)[0] == pytest.approx(math.log2(10 * 1000 / (20 * 40)))


def test_suggestions_find_planted_pair_and_skip_existing_phrases():
    texts = ["the opening hours are short", "longer opening hours please", "opening hours again",
             "books and hours", "more books", "parking space", "parking is hard", "opening times"] * 3
    rows = suggest_phrases(texts, Analyzer(), min_count=3)
    found = {r.phrase: r for r in rows}
    assert found["opening hours"].count == 9
    assert all(r.count >= 3 for r in rows)
    assert [r.g2 for r in rows] == sorted((r.g2 for r in rows), reverse=True)
    # The G2 of the planted pair equals scipy's on the hand-built 2x2 table of adjacent content pairs:
    # opening-hours x9, longer-opening x3, hours-please x3, parking-space x3, opening-times x3 -> N = 21.
    ref = chi2_contingency([[9, 3], [0, 9]], correction=False, lambda_="log-likelihood")[0]
    assert found["opening hours"].g2 == pytest.approx(ref)
    table = format_phrase_suggestions(rows)
    assert "opening hours" in table and table.splitlines()[0].split() == ["phrase", "count", "G2", "PMI"]
    known = suggest_phrases(texts, Analyzer(phrases=["opening hours"]), min_count=3)
    assert all(r.phrase != "opening hours" for r in known)
