"""What agreement tells a lead: the ranking, the flags against the bars, the headline mean without special codes,
and advice naming the swapped code pairs, on a small invented double-coded set whose counts are known by hand."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import cohen_kappa_score

from opencode.analysis.agreement.core import CodingMatrix, measure_agreement
from opencode.analysis.agreement.report import agreement_csv_rows, format_agreement_html, format_agreement_text
from opencode.analysis.agreement.verdict import ALPHA_BAR, KAPPA_BAR
from opencode.errors import OpenCodeError

LABELS = {1: "Not safe without staff", 2: "Staff jobs", 7: "Convenient after work", 9: "Fair access for shift workers",
          99: "No answer"}
SPECIAL = {99: "nonanswer"}
UNITS = [f"R{u:02d}" for u in range(60)]


def _sets() -> dict[str, dict[str, set[int]]]:
    """ash's and bryn's codes per respondent, built so that every count below can be read off by hand."""
    ash: dict[str, set[int]] = {u: set() for u in UNITS}
    bryn: dict[str, set[int]] = {u: set() for u in UNITS}
    for u in UNITS[0:12]:  # code 1: both on 12 verbatims ...
        ash[u].add(1), bryn[u].add(1)
    for u in UNITS[12:15]:  # ... ash alone on 3
        ash[u].add(1)
    for u in UNITS[15:25]:  # code 2: both on 10, never split: perfect agreement
        ash[u].add(2), bryn[u].add(2)
    for u in UNITS[25:31]:  # 7 and 9 swapped: ash 7 where bryn 9 on 6 verbatims ...
        ash[u].add(7), bryn[u].add(9)
    for u in UNITS[31:33]:  # ... and ash 9 where bryn 7 on 2 more: 8 swaps in all
        ash[u].add(9), bryn[u].add(7)
    for u in UNITS[33:41]:  # both 7 on 8
        ash[u].add(7), bryn[u].add(7)
    for u in UNITS[41:45]:  # both 9 on 4
        ash[u].add(9), bryn[u].add(9)
    for u in UNITS[45:53]:  # the special code: both on 8 non-answers
        ash[u].add(99), bryn[u].add(99)
    return {"ash": ash, "bryn": bryn}  # R53..R59: coded with no code by both


def _result(n_resamples: int = 0, **options):
    sets = _sets()
    rows = [(u, coder, c) for coder, by in sets.items() for u, codes in by.items() for c in codes]
    matrix = CodingMatrix.from_assignments(rows, {c: UNITS for c in sets}, codes=sorted(LABELS))
    return measure_agreement(matrix, code_labels=LABELS, n_resamples=n_resamples, random_state=1,
                             special_codes=SPECIAL, **options)


def _sklearn_kappa(code: int) -> float:
    """Outside check: scikit-learn's Cohen's kappa on the code's present / absent ratings."""
    sets = _sets()
    return cohen_kappa_score([code in sets["ash"][u] for u in UNITS], [code in sets["bryn"][u] for u in UNITS])


def test_special_codes_are_left_out_of_the_headline_mean_and_the_text_says_so():
    result = _result()
    kappas = {code: _sklearn_kappa(code) for code in LABELS}  # reference: sklearn.metrics.cohen_kappa_score
    assert kappas[99] == pytest.approx(1.0)
    by_hand = (kappas[1] + kappas[2] + kappas[7] + kappas[9]) / 4  # the four codes that are not special
    assert result.frame["mean_kappa"].value == pytest.approx(by_hand, abs=1e-12)
    assert by_hand < sum(kappas.values()) / 5  # the special code at 1.000 would have lifted it
    assert "special codes 99 No answer left out" in result.frame["mean_kappa"].words
    assert any("Left out of the headline mean: the special codes 99 No answer" in line
               for line in result.headline.lines)
    standing = next(s for s in result.standings if s.code == 99)
    assert standing.special == "nonanswer" and not standing.in_headline
    included = _result(include_special=True)
    assert included.frame["mean_kappa"].value == pytest.approx(sum(kappas.values()) / 5, abs=1e-12)
    assert "counted in the headline mean" in included.headline.text


def test_codes_rank_from_least_to_most_reliable():
    result = _result()
    kappas = {code: _sklearn_kappa(code) for code in LABELS}  # reference: sklearn.metrics.cohen_kappa_score
    # by hand: 7 and 9 are swapped most, code 1 has three one-sided mentions, 2 and 99 agree perfectly (a tie
    # broken by frame order)
    assert kappas[9] < kappas[7] < kappas[1] < kappas[2] == kappas[99]
    assert [s.code for s in result.standings] == [9, 7, 1, 2, 99]
    assert [s.rank for s in result.standings] == [1, 2, 3, 4, 5]
    frame = result.to_frame()
    assert frame["code"].tolist()[:5] == [9, 7, 1, 2, 99] and frame["label"].iloc[-1] == "whole frame"
    assert frame["rank"].tolist()[:5] == [1, 2, 3, 4, 5]
    assert {"rank", "flagged", "why", "special", "in_headline"} <= set(frame.columns)


def test_the_ranking_uses_the_low_end_of_the_interval():
    result = _result(n_resamples=300)
    lows = [s.kappa.low for s in result.standings]
    assert lows == sorted(lows)
    assert result.standings[0].code == 9


def test_a_code_whose_interval_reaches_under_the_bar_is_flagged_and_one_above_is_not():
    result = _result(n_resamples=300)
    by_code = {s.code: s for s in result.standings}
    assert result.kappa_bar == KAPPA_BAR == 0.60 and result.alpha_bar == ALPHA_BAR == 0.667
    for standing in result.standings:
        under = standing.kappa.low < KAPPA_BAR or standing.alpha.low < ALPHA_BAR
        assert standing.flagged == under, standing
    assert by_code[9].kappa.low < KAPPA_BAR and by_code[9].flagged  # swapped 8 times in 60
    assert by_code[2].kappa.low == 1.0 and not by_code[2].flagged  # never split
    assert "kappa's low end" in by_code[9].why
    assert result.flagged[0].code == 9
    frame = result.to_frame().set_index("label")
    assert bool(frame.loc["Fair access for shift workers", "flagged"])
    assert not bool(frame.loc["Staff jobs", "flagged"])


def test_the_bars_are_options():
    strict, lenient = _result(kappa_bar=0.95), _result(kappa_bar=0.10, alpha_bar=0.10)
    kappa1 = _sklearn_kappa(1)  # reference: sklearn.metrics.cohen_kappa_score; 0.10 < kappa1 < 0.95
    assert 0.10 < kappa1 < 0.95
    assert next(s for s in strict.standings if s.code == 1).flagged
    assert not next(s for s in lenient.standings if s.code == 1).flagged
    assert strict.headline.verdict != lenient.headline.verdict
    again = lenient.with_bars(kappa_bar=0.95)
    assert [s.flagged for s in again.standings] == [s.flagged for s in _result(kappa_bar=0.95).standings]
    assert "bar 0.950" in again.headline.text
    with pytest.raises(OpenCodeError, match="kappa bar must be between -1 and 1"):
        _result(kappa_bar=1.5)


def test_advice_names_the_most_swapped_pair_and_its_count():
    result = _result()
    sets = _sets()
    swapped_by_hand = [u for u in UNITS if (7 in sets["ash"][u]) != (7 in sets["bryn"][u])
                       and (9 in sets["ash"][u]) != (9 in sets["bryn"][u])]
    assert len(swapped_by_hand) == 8  # 6 one way, 2 the other (see _sets)
    pair = result.swapped[0]
    assert (pair.code_a, pair.code_b, pair.n_verbatims) == (7, 9, 8)
    assert list(pair.verbatims) == swapped_by_hand
    first = result.advice[0]
    assert first.startswith("Tighten the definitions of 7 Convenient after work and 9 Fair access for shift "
                            "workers; recode the 8 verbatims where they were swapped")
    assert "R25" in first
    text = format_agreement_text(result)
    assert "What to do" in text and "recode the 8 verbatims" in text
    assert text.index("Headline:") < text.index("What to do") < text.index("Codes from least to most reliable")


def test_renderers_carry_the_headline_ranking_and_advice():
    result = _result(n_resamples=100)
    text = format_agreement_text(result, special_hint="(an option puts them back)")
    assert "Landis & Koch 1977" in text and "Krippendorff 2004" in text
    assert "(an option puts them back)" in text
    assert text.count("Headline:") == 1
    page = format_agreement_html(result)
    assert 'class="oc-headline"' in page and "oc-agreement-ranking" in page and "What to do" in page
    rows = agreement_csv_rows(result)
    ranking = [r for r in rows if r[0] == "ranking"]
    assert [r[1] for r in ranking] == [str(s.code) for s in result.standings]
    assert [r for r in rows if r[0] == "headline"][0][5] == result.headline.verdict
    advice = [r for r in rows if r[0] == "advice"][0]
    assert advice[1:4] == ["7", "Convenient after work", "9"] and advice[6] == "8"


def test_the_verdict_says_not_reliable_when_the_frame_is_under_the_bar():
    rng = np.random.default_rng(3)
    rows = []
    for u in range(80):
        rows.append((u, "ash", int(rng.integers(1, 4))))
        rows.append((u, "bryn", int(rng.integers(1, 4))))  # independent coders: agreement near chance
    result = measure_agreement(CodingMatrix.from_assignments(rows), n_resamples=100, random_state=0)
    assert result.headline.verdict == "not reliable yet"
    assert result.headline.text.startswith("Headline: not reliable yet: mean Cohen's kappa")
