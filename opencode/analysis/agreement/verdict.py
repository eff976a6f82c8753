"""What a lead does with an agreement result: codes ranked least to most reliable, the codes whose interval
reaches under the bar flagged, one headline verdict, and advice naming the codes coders swap.

A code is judged at the low end of its bootstrap interval (its value when there is no interval), so a code
that looks fine on few examples is flagged until more double coding narrows its interval. The bars default to
Landis & Koch (1977)'s "substantial" (kappa above 0.60) and Krippendorff (2004)'s lowest alpha for tentative
conclusions (0.667).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from opencode.errors import OpenCodeError
# the bars: Landis & Koch (1977) read kappa above 0.60 as "substantial"; Krippendorff (2004) draws tentative
# conclusions from alpha of 0.667 up
from opencode.analysis.choices import AGREEMENT_ALPHA_BAR as ALPHA_BAR, AGREEMENT_KAPPA_BAR as KAPPA_BAR

#: special codes left out of the headline by default: non-answers and "don't know" agree by construction (the
#: non-answer flag codes them), so they would lift the mean without saying anything about the code frame.
LEFT_OUT_SPECIALS = ("nonanswer", "dontknow")
ADVICE_PAIRS = 3  # how many swapped code pairs the advice names
MIN_SWAPS = 3  # common practice (no published source): a pair swapped on fewer verbatims is noise, not a pattern
SHOWN_IDS = 8  # respondent ids printed with a piece of advice (the CSV and result.swapped carry them all)


@dataclass(frozen=True)
class CodeStanding:
    """One code's place in the ranking: its kappa and alpha, the value it is ranked and judged on, and the flag."""

    code: object
    label: str
    rank: int | None  # 1 = least reliable; None when kappa is undefined for the code
    kappa: object  # Estimate of the per-code kappa (Cohen's for two coders, Fleiss' for more)
    alpha: object  # Estimate of the per-code Krippendorff's alpha
    n_mentions: int
    n_disputed: int  # verbatims on which the coders split over this code
    special: str | None  # the frame's special kind ("nonanswer", "dontknow", ...) or None
    in_headline: bool  # counted in the headline mean
    flagged: bool
    why: str  # why flagged (or why not ranked), in words; empty when the code clears both bars

    @property
    def kappa_basis(self) -> float | None:
        """What the code is ranked and judged on: kappa's lower bound, else its value."""
        return _basis(self.kappa)


@dataclass(frozen=True)
class SwappedPair:
    """Two codes coders swap, the verbatims (respondent ids) where they did, and what to do about it."""

    code_a: object
    label_a: str
    code_b: object
    label_b: str
    verbatims: tuple

    @property
    def n_verbatims(self) -> int:
        return len(self.verbatims)

    @property
    def advice(self) -> str:
        """'tighten the definitions of 7 A and 9 B; recode the 16 verbatims where they were swapped (...)'."""
        shown = ", ".join(map(str, self.verbatims[:SHOWN_IDS]))
        more = f" and {self.n_verbatims - SHOWN_IDS} more" if self.n_verbatims > SHOWN_IDS else ""
        return (f"tighten the definitions of {self.code_a} {self.label_a} and {self.code_b} {self.label_b}; recode "
                f"the {self.n_verbatims} verbatims where they were swapped (respondents {shown}{more})")


@dataclass(frozen=True)
class Headline:
    """The one reading of the whole result: a verdict, the sentences saying it, and the bars used."""

    verdict: str  # "reliable", "review codes", "not reliable yet", "undefined"
    lines: tuple[str, ...]
    kappa_bar: float
    alpha_bar: float
    n_flagged: int  # flagged codes among those in the headline
    n_judged: int  # codes in the headline with a defined kappa

    @property
    def text(self) -> str:
        return " ".join(self.lines)


def check_bars(kappa_bar: float, alpha_bar: float) -> None:
    """Bars are agreement values: between -1 and 1."""
    for name, bar in (("kappa bar", kappa_bar), ("alpha bar", alpha_bar)):
        if not -1.0 <= bar <= 1.0:
            raise OpenCodeError(f"{name} must be between -1 and 1 (e.g. {KAPPA_BAR} for kappa, {ALPHA_BAR} for "
                                f"alpha); got {bar}")


def _basis(estimate) -> float | None:
    if estimate is None or estimate.value is None:
        return None
    return estimate.low if estimate.low is not None else estimate.value


def _under(estimate, bar: float, name: str) -> str:
    """Why an estimate is under its bar, or '' when it clears it (or is undefined)."""
    basis = _basis(estimate)
    if basis is None or basis >= bar:
        return ""
    if estimate.low is not None:
        return f"{name}'s low end {basis:.3f} < {bar:.3f}"
    return f"{name} {basis:.3f} < {bar:.3f}"


def rank_codes(per_code: Sequence, kappa_name: str, special_codes: Mapping, include_special: bool,
               kappa_bar: float, alpha_bar: float) -> tuple[CodeStanding, ...]:
    """Every code with its rank (least reliable first: lowest kappa lower bound, then lowest kappa, then frame
    order) and its flag (kappa's or alpha's interval reaching under its bar); undefined codes last, unranked."""
    draft = []
    for item in per_code:
        kappa = item.statistics[kappa_name]
        alpha = item.statistics.get("krippendorff_alpha")
        special = special_codes.get(item.code)
        reasons = [r for r in (_under(kappa, kappa_bar, "kappa"), _under(alpha, alpha_bar, "alpha")) if r]
        why = "; ".join(reasons) if kappa.value is not None else kappa.words
        draft.append((item, kappa, alpha, special, bool(reasons), why))
    defined = [i for i, d in enumerate(draft) if d[1].value is not None]
    order = sorted(defined, key=lambda i: (_basis(draft[i][1]), draft[i][1].value, i))
    ranks = {i: r + 1 for r, i in enumerate(order)}
    out = []
    for i in order + [i for i in range(len(draft)) if i not in ranks]:
        item, kappa, alpha, special, flagged, why = draft[i]
        out.append(CodeStanding(item.code, item.label, ranks.get(i), kappa, alpha, item.n_mentions,
                                item.n_disputed, special, include_special or special is None,
                                flagged, why))
    return tuple(out)


def _named(standings: Sequence[CodeStanding]) -> str:
    return ", ".join(f"{s.code} {s.label}" for s in standings)


def _figure(estimate, name: str, bar: float) -> str:
    if estimate is None or estimate.value is None:
        return f"{name} undefined"
    interval = f" [{estimate.low:.3f}, {estimate.high:.3f}]" if estimate.low is not None else " (no interval)"
    return f"{name} {estimate.value:.3f}{interval}, bar {bar:.3f}"


def headline(standings: Sequence[CodeStanding], mean_kappa, frame_alpha, kappa_bar: float, alpha_bar: float,
             kappa_label: str, alpha_label: str) -> Headline:
    """One verdict for the whole result, judged the same way as each code (the low end of the interval against
    the bar): not reliable yet when the frame as a whole is under a bar, review codes when some codes are,
    else reliable."""
    counted = [s for s in standings if s.in_headline and s.rank is not None]
    flagged = [s for s in counted if s.flagged]
    figures = (f"{_figure(mean_kappa, f'mean per-code {kappa_label}', kappa_bar)}; "
               f"{_figure(frame_alpha, alpha_label, alpha_bar)}")
    frame_under = [r for r in (_under(mean_kappa, kappa_bar, f"mean {kappa_label}"),
                               _under(frame_alpha, alpha_bar, alpha_label)) if r]
    if not counted or mean_kappa is None or mean_kappa.value is None:
        verdict, first = "undefined", "Headline: agreement is undefined for every code in the headline."
    elif frame_under:
        verdict = "not reliable yet"
        first = f"Headline: not reliable yet: {'; '.join(frame_under)}."
        if flagged:
            first += (f" {len(flagged)} of {len(counted)} codes are under the bar, least reliable first: "
                      f"{_named(flagged)}.")
    elif flagged:
        verdict = "review codes"
        first = (f"Headline: review {len(flagged)} of {len(counted)} codes before relying on them (least reliable "
                 f"first): {_named(flagged)}. The frame as a whole clears both bars.")
    else:
        verdict = "reliable"
        first = (f"Headline: reliable: all {len(counted)} codes and the frame as a whole clear both bars at the low "
                 "end of their intervals.")
    lines = [first, f"Figures: {figures} (kappa read on Landis & Koch 1977, alpha on Krippendorff 2004)."]
    specials = [s for s in standings if s.special is not None]
    if specials and not specials[0].in_headline:
        lines.append(f"Left out of the headline mean: the special codes {_named(specials)} (non-answers and "
                     "don't know agree almost by construction, which would lift the mean).")
    elif specials:
        lines.append(f"The special codes {_named(specials)} are counted in the headline mean.")
    return Headline(verdict, tuple(lines), kappa_bar, alpha_bar, len(flagged), len(counted))


def advice(standings: Sequence[CodeStanding], swapped: Sequence[SwappedPair], kappa_bar: float,
           alpha_bar: float) -> tuple[str, ...]:
    """What to do, most useful first: tighten the definitions of swapped pairs and recode their verbatims; for a
    flagged code no pair explains, tighten its definition (its value is under a bar) or double-code more
    verbatims (only its interval reaches under the bar: too few examples to tell)."""
    out = [pair.advice[0].upper() + pair.advice[1:] + "." for pair in swapped]
    explained = {c for pair in swapped for c in (pair.code_a, pair.code_b)}
    for s in standings:
        if not s.flagged or not s.in_headline or s.code in explained:
            continue
        alpha_value = None if s.alpha is None else s.alpha.value
        values_clear = s.kappa.value >= kappa_bar and (alpha_value is None or alpha_value >= alpha_bar)
        if values_clear:
            out.append(f"{s.code} {s.label}: its value ({s.kappa.value:.3f}) clears the bars but not the low end of its "
                       f"interval ({s.why}, on {s.n_mentions} mentions); double-code more verbatims to narrow the "
                       "interval before judging it.")
        else:
            out.append(f"{s.code} {s.label}: tighten its definition (what belongs, what does not) and recode the "
                       f"{s.n_disputed} verbatims where the coders split over it.")
    return tuple(out)
