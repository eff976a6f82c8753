"""Inter-coder agreement for one question's multi-code data: per code, across the frame, and where coders differ.

Entry points: `CodingMatrix.from_assignments(...)` builds the data, `measure_agreement(matrix)` returns an
`AgreementResult`; agreement_report.py turns it into terminal text, CSV or an HTML section.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from opencode.analysis.agreement.bands import cited_krippendorff, cited_landis_koch
from opencode.analysis.agreement.bootstrap import bootstrap_totals, percentile_interval
from opencode.analysis.agreement.codes import CodeFeatures, statistic_names
from opencode.analysis.agreement.disagreement import (
    ConfusedPair,
    DisputedUnit,
    PairTables,
    confused_pairs,
    disputed_units,
    disputed_verbatims_per_code,
    pair_tables,
    swapped_units,
)
from opencode.analysis.agreement.matrix import CodingMatrix
from opencode.analysis.agreement.sets import DISTANCES, SetAlphaParts, alpha_from_totals
from opencode.analysis.agreement.verdict import (ADVICE_PAIRS, ALPHA_BAR, KAPPA_BAR, MIN_SWAPS, CodeStanding,
                                                 Headline, SwappedPair, advice, check_bars, headline, rank_codes)
from opencode.analysis.agreement.weighted import cohen_weighted, conger_kappa, gwet_family_counts
from opencode.errors import OpenCodeError

__all__ = ["AgreementResult", "CodeAgreement", "CodingMatrix", "Estimate", "STATISTIC_LABELS", "measure_agreement"]

STATISTIC_LABELS = {
    "percent": "% agreement",
    "cohen_kappa": "Cohen's kappa",
    "fleiss_kappa": "Fleiss' kappa",
    "conger_kappa": "Conger's kappa",
    "brennan_prediger": "Brennan-Prediger",
    "krippendorff_alpha": "Krippendorff's alpha",
    "gwet_ac1": "Gwet's AC1",
    "pabak": "PABAK",
    "prevalence_index": "prevalence index",
    "bias_index": "bias index",
    "alpha_masi": "Krippendorff's alpha, MASI distance",
    "alpha_jaccard": "Krippendorff's alpha, Jaccard distance",
    "mean_kappa": "mean per-code kappa",
}
_LANDIS_KOCH = {"cohen_kappa", "fleiss_kappa", "conger_kappa", "gwet_ac1", "pabak", "brennan_prediger", "mean_kappa"}
_KRIPPENDORFF = {"krippendorff_alpha", "alpha_masi", "alpha_jaccard"}
SMALL_BASE = 30  # common practice (no published source): flag bases under 30


@dataclass(frozen=True)
class Estimate:
    """A statistic with its bootstrap interval and, where a formula exists, its analytic standard error and
    interval; None where undefined, with `words` saying why or how to read it."""

    value: float | None
    low: float | None = None
    high: float | None = None
    words: str = ""
    se: float | None = None
    se_low: float | None = None
    se_high: float | None = None


#: per-code statistics with an analytic standard error, and where its formula comes from
ANALYTIC_SOURCES = {
    "cohen_kappa": "Fleiss, Cohen & Everitt (1969)",
    "gwet_ac1": "Gwet (2008, 2014)",
    "fleiss_kappa": "Gwet (2014)",
    "conger_kappa": "Gwet (2014)",
    "brennan_prediger": "Gwet (2014)",
}
_ANALYTIC_BLOCK = 4_000_000  # array elements per block of codes


@dataclass(frozen=True)
class CodeAgreement:
    """Agreement on one code (present / absent) over the units coded by two or more coders."""

    code: object
    label: str
    n_pairable: int
    n_mentions: int  # ratings with this code on those units, summed over coders
    statistics: dict[str, Estimate]
    n_disputed: int = 0  # verbatims on which the coders split over this code


@dataclass(frozen=True)
class AgreementResult:
    """Everything `measure_agreement` found, ready for the text, CSV and HTML formatters."""

    coders: tuple[str, ...]
    n_units: int
    n_pairable: int
    n_single: int
    units_per_coder: dict[str, int]
    statistic_names: tuple[str, ...]
    per_code: tuple[CodeAgreement, ...]
    frame: dict[str, Estimate]
    n_distinct_sets: int
    pair_tables: PairTables
    disputed_units: tuple[DisputedUnit, ...]
    confused_pairs: tuple[ConfusedPair, ...]
    code_labels: dict = field(default_factory=dict)
    n_resamples: int = 0
    confidence: float = 0.95
    random_state: int | None = 0
    warnings: tuple[str, ...] = ()
    special_codes: dict = field(default_factory=dict)  # code -> special kind, left out of the headline
    include_special: bool = False  # special codes counted in the headline mean after all
    kappa_bar: float = KAPPA_BAR
    alpha_bar: float = ALPHA_BAR
    standings: tuple[CodeStanding, ...] = ()  # every code, least reliable first (undefined ones last)
    swapped: tuple[SwappedPair, ...] = ()  # the code pairs most often swapped, with their verbatims
    headline: Headline | None = None
    advice: tuple[str, ...] = ()

    def label(self, code) -> str:
        """The code's label, or the code itself when the frame gave none."""
        return str(self.code_labels.get(code, code))

    @property
    def kappa_name(self) -> str:
        """The per-code kappa the ranking uses: Cohen's for two coders, Fleiss' for more."""
        return "cohen_kappa" if "cohen_kappa" in self.statistic_names else "fleiss_kappa"

    @property
    def flagged(self) -> tuple[CodeStanding, ...]:
        """The codes under the bar, least reliable first (special codes left out of the headline included)."""
        return tuple(s for s in self.standings if s.flagged)

    def with_bars(self, kappa_bar: float | None = None, alpha_bar: float | None = None) -> "AgreementResult":
        """The same result judged against other bars (ranking, flags, headline and advice again; no recount)."""
        return _judged(self, KAPPA_BAR if kappa_bar is None else kappa_bar,
                       ALPHA_BAR if alpha_bar is None else alpha_bar)

    def to_frame(self) -> pd.DataFrame:
        """One row per code, least reliable first (undefined codes last), then the whole frame as code None:
        rank, flagged (interval reaching under the bar), why, special, in_headline, then each statistic with its
        interval. The whole-frame row is flagged when the headline says not reliable yet."""
        rows = []
        by_code = {item.code: item for item in self.per_code}
        for standing in self.standings:
            item = by_code[standing.code]
            row = {"code": item.code, "label": item.label, "rank": standing.rank, "flagged": standing.flagged,
                   "why": standing.why, "special": standing.special, "in_headline": standing.in_headline,
                   "n_pairable": item.n_pairable, "n_mentions": item.n_mentions, "n_disputed": item.n_disputed}
            for name, estimate in item.statistics.items():
                row.update({name: estimate.value, f"{name}_low": estimate.low, f"{name}_high": estimate.high})
            rows.append(row)
        under = self.headline is not None and self.headline.verdict == "not reliable yet"
        whole = {"code": None, "label": "whole frame", "rank": None, "flagged": under,
                 "why": self.headline.text if self.headline else "", "special": None, "in_headline": True,
                 "n_pairable": self.n_pairable}
        for name, estimate in self.frame.items():
            whole.update({name: estimate.value, f"{name}_low": estimate.low, f"{name}_high": estimate.high})
        frame = pd.DataFrame(rows + [whole])
        frame["rank"] = frame["rank"].astype("Int64")
        return frame


def _judged(result: AgreementResult, kappa_bar: float, alpha_bar: float) -> AgreementResult:
    """Rank, flag, headline and advise a result against the bars."""
    import dataclasses

    check_bars(kappa_bar, alpha_bar)
    kappa_name = result.kappa_name
    standings = rank_codes(result.per_code, kappa_name, result.special_codes, result.include_special, kappa_bar,
                           alpha_bar)
    said = headline(standings, result.frame.get("mean_kappa"), result.frame.get("alpha_masi"), kappa_bar, alpha_bar,
                    STATISTIC_LABELS[kappa_name], "Krippendorff's alpha (MASI, whole code sets)")
    return dataclasses.replace(result, kappa_bar=kappa_bar, alpha_bar=alpha_bar, standings=standings, headline=said,
                               advice=advice(standings, result.swapped, kappa_bar, alpha_bar))


def _swapped_pairs(matrix: CodingMatrix, pairs, labels: Mapping) -> tuple[SwappedPair, ...]:
    """The most swapped code pairs worth advice: swapped on MIN_SWAPS verbatims or more, at most ADVICE_PAIRS."""
    found = []
    for pair in pairs:
        units = swapped_units(matrix, pair.code_a, pair.code_b)
        if len(units) >= MIN_SWAPS:
            found.append(SwappedPair(pair.code_a, str(labels.get(pair.code_a, pair.code_a)), pair.code_b,
                                     str(labels.get(pair.code_b, pair.code_b)), units))
    found.sort(key=lambda p: -p.n_verbatims)
    return tuple(found[:ADVICE_PAIRS])


def _number(x) -> float | None:
    """A plain float, or None for NaN (undefined)."""
    x = float(x)
    return None if math.isnan(x) else x


def _band(name: str, value: float | None) -> str:
    if name in _LANDIS_KOCH:
        return cited_landis_koch(value)
    if name in _KRIPPENDORFF:
        return cited_krippendorff(value)
    return ""


def _estimate(name: str, value, low, high, undefined: str, interval_note: str = "",
              analytic: tuple = (np.nan, np.nan, np.nan)) -> Estimate:
    """Wrap numbers as an Estimate, with band words or the reason the statistic is undefined."""
    value, low, high = _number(value), _number(low), _number(high)
    if value is None:
        return Estimate(None, None, None, undefined)
    words = "; ".join(part for part in (_band(name, value), interval_note) if part)
    se, se_low, se_high = (_number(x) for x in analytic)
    return Estimate(value, low, high, words, se, se_low, se_high)


def analytic_errors(matrix: CodingMatrix, names, confidence: float = 0.95) -> dict[str, tuple[np.ndarray, ...]]:
    """Per-code analytic (standard error, low, high) for the statistics in ANALYTIC_SOURCES among `names`.

    Cohen's kappa: Fleiss, Cohen & Everitt (1969) on the units both coders coded; the others: Gwet (2014)'s
    linearised variance over every rated unit (t interval, n - 1 degrees of freedom).
    """
    wanted = [n for n in names if n in ANALYTIC_SOURCES]
    codes = len(matrix.codes)
    out = {n: tuple(np.full(codes, np.nan) for _ in range(3)) for n in wanted}
    if not wanted or codes == 0:
        return out
    coded = matrix.coded[:, :, None]
    block = max(1, _ANALYTIC_BLOCK // max(1, 2 * matrix.coded.size))  # codes per block
    identity = np.eye(2)
    for start in range(0, codes, block):
        part = slice(start, min(codes, start + block))
        present = matrix.present[:, :, part]
        found = {}
        if "cohen_kappa" in wanted:
            both = matrix.coded.all(axis=1)[:, None]
            first, second = present[:, 0] & both, present[:, 1] & both
            a, b, c = (x.sum(axis=0) for x in (first & second, first & ~second, ~first & second))
            table = np.stack([np.stack([a, b], -1), np.stack([c, both.sum() - a - b - c], -1)], -2)
            found["cohen_kappa"] = cohen_weighted(table.astype(float), identity, confidence)
        k = present.sum(axis=1, dtype=np.float64)
        counts = np.stack([k, matrix.coders_per_unit[:, None] - k], axis=-1)
        for name, kind in (("gwet_ac1", "gwet"), ("fleiss_kappa", "fleiss"), ("brennan_prediger", "bp")):
            if name in wanted:
                found[name] = gwet_family_counts(counts, identity, kind, confidence)
        if "conger_kappa" in wanted:
            ratings = np.stack([present & coded, ~present & coded], axis=-1).astype(float)
            found["conger_kappa"] = conger_kappa(ratings, identity, confidence)
        for name, coefficient in found.items():
            for target, values in zip(out[name], (coefficient.se, coefficient.low, coefficient.high)):
                target[part] = values
    return out


def _undefined_reasons(matrix: CodingMatrix, parts: dict[str, np.ndarray]) -> list[str]:
    """Why a per-code statistic can be undefined, in words, one per code."""
    used = matrix.present.any(axis=(0, 1))
    reasons = []
    for c in range(len(matrix.codes)):
        n, k, m = parts["n_units"][c], parts["k_sum"][c], parts["m_sum"][c]
        if n == 0:
            reasons.append("undefined: no verbatim was coded by two or more coders")
        elif k == 0 and not used[c]:
            reasons.append("undefined: no coder used this code")
        elif k == 0:
            reasons.append(f"undefined: no coder used this code on the {int(n)} verbatims coded by two or more coders")
        elif k == m:
            reasons.append("undefined: every coder used this code on every verbatim they coded")
        else:
            reasons.append("undefined for these data")
    return reasons


def _interval(samples: np.ndarray | None, confidence: float, shape) -> tuple[np.ndarray, np.ndarray]:
    if samples is None:
        return np.full(shape, np.nan), np.full(shape, np.nan)
    return percentile_interval(samples, confidence)


def _interval_note(has_samples: bool, value: float, low: float) -> str:
    if has_samples and not math.isnan(value) and math.isnan(low):
        return "no interval: undefined in most resamples"
    return ""


def measure_agreement(
    matrix: CodingMatrix,
    *,
    code_labels: Mapping | None = None,
    n_resamples: int = 1000,
    confidence: float = 0.95,
    random_state: int | None = 0,
    top: int = 10,
    max_sets_for_interval: int = 5000,
    special_codes: Mapping | None = None,
    include_special: bool = False,
    kappa_bar: float = KAPPA_BAR,
    alpha_bar: float = ALPHA_BAR,
) -> AgreementResult:
    """Per-code and frame-wide agreement with seeded bootstrap percentile intervals (resampling units), the codes
    ranked least to most reliable and flagged where their interval reaches under the bars, one headline, and
    advice on the code pairs coders swap.

    `special_codes` (code -> special kind, e.g. {98: "dontknow", 99: "nonanswer"}) are left out of the mean
    per-code kappa and the headline unless `include_special`. `max_sets_for_interval` bounds the distinct code
    sets for which the set-valued alphas get an interval (that interval needs a sets x sets distance matrix);
    above it the value comes without one.
    """
    check_bars(kappa_bar, alpha_bar)
    special_codes = {code: kind for code, kind in (special_codes or {}).items() if code in matrix.codes}
    if not 0 < confidence < 1:
        raise OpenCodeError(f"confidence must be between 0 and 1, got {confidence}")
    if n_resamples < 0:
        raise OpenCodeError(f"number of bootstrap resamples must be 0 or more, got {n_resamples}")
    pairable = matrix.pairable
    n_pairable = int(pairable.sum())
    if n_pairable == 0:
        raise OpenCodeError(
            f"no verbatim was coded by two or more of the coders {', '.join(matrix.coders)}: nothing to compare"
        )
    names = statistic_names(len(matrix.coders))
    features = CodeFeatures.from_matrix(matrix)
    point_totals = features.totals()
    point = features.statistics(point_totals)
    kappa_name = "cohen_kappa" if "cohen_kappa" in names else "fleiss_kappa"
    sets = SetAlphaParts.from_matrix(matrix)
    n_sets = sets.n_sets

    samples: dict[str, np.ndarray] | None = None
    set_samples: dict[str, np.ndarray] = {}
    if n_resamples > 0:
        dense_sets = np.column_stack([sets.unit_disagreement[k] for k in DISTANCES]).astype(np.float32)
        with_sets = n_sets <= max_sets_for_interval
        columns = [features.columns, dense_sets] + ([sets.value_counts] if with_sets else [])
        totals = bootstrap_totals(columns, n_resamples, random_state)
        samples = features.statistics(totals[0])
        if with_sets:
            counts = totals[2]
            expected = sets.expected_sums(counts)
            for d, kind in enumerate(DISTANCES):
                set_samples[kind] = alpha_from_totals(totals[1][:, d], counts.sum(axis=1), expected[kind])

    reasons = _undefined_reasons(matrix, features.parts(point_totals))
    labels = dict(code_labels or {})
    per_stat = {}
    for name in names:
        low, high = _interval(None if samples is None else samples[name], confidence, point[name].shape)
        per_stat[name] = (point[name], low, high)
    k_sum = features.parts(point_totals)["k_sum"]
    disputed = disputed_verbatims_per_code(matrix)
    analytic = analytic_errors(matrix, names, confidence)
    per_code = []
    for c, code in enumerate(matrix.codes):
        stats = {}
        for name in names:
            value, low, high = (arr[c] for arr in per_stat[name])
            extra = tuple(arr[c] for arr in analytic[name]) if name in analytic else (np.nan,) * 3
            stats[name] = _estimate(name, value, low, high, reasons[c], _interval_note(samples is not None, value, low),
                                    extra)
        per_code.append(CodeAgreement(code, str(labels.get(code, code)), n_pairable, int(k_sum[c]), stats,
                                      int(disputed[c])))

    frame = {}
    point_alphas = sets.alphas()
    for kind in DISTANCES:
        value = point_alphas[kind]
        note = ""
        low = high = np.nan
        if kind in set_samples:
            low, high = percentile_interval(set_samples[kind], confidence)
            note = _interval_note(True, value, low)
        elif n_resamples > 0:
            note = f"no interval: {n_sets:,} distinct code sets (interval limit {max_sets_for_interval:,})"
        frame[f"alpha_{kind}"] = _estimate(
            f"alpha_{kind}", value, low, high, "undefined: every coder gave every verbatim the same set of codes", note
        )
    counted = np.array([include_special or code not in special_codes for code in matrix.codes], dtype=bool)
    defined = ~np.isnan(point[kappa_name]) & counted
    n_defined = int(defined.sum())
    mean_low = mean_high = np.nan
    if samples is not None and n_defined:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            mean_samples = np.nanmean(samples[kappa_name][:, defined], axis=1)
        mean_low, mean_high = percentile_interval(mean_samples, confidence)
    mean_value = point[kappa_name][defined].mean() if n_defined else np.nan
    n_special = int((~counted).sum())
    left_out = len(matrix.codes) - n_special - n_defined
    specials = ", ".join(f"{code} {labels.get(code, code)}" for code in matrix.codes if code in special_codes
                         and not include_special)
    mean_note = f"{STATISTIC_LABELS[kappa_name]} averaged over {n_defined} of {len(matrix.codes)} codes" + "".join(
        f" ({part})" for part in ((f"special codes {specials} left out" if n_special else ""),
                                  (f"{left_out} undefined, left out" if left_out else "")) if part)
    frame["mean_kappa"] = _estimate(
        "mean_kappa", mean_value, mean_low, mean_high, "undefined: kappa is undefined for every code", mean_note
    )

    n_single = int((matrix.coders_per_unit == 1).sum())
    notes = []
    if n_single:
        notes.append(f"{n_single} verbatims coded by one coder only are left out of the agreement (they count "
                     "towards the code shares of the kappa-type statistics and AC1, as in Gwet 2014)")
    if n_pairable < SMALL_BASE:
        notes.append(f"small base: only {n_pairable} verbatims coded by two or more coders; read with care")
    confused = tuple(confused_pairs(matrix, top))
    swap_candidates = confused_pairs(matrix, max(top, ADVICE_PAIRS * 4))
    result = AgreementResult(
        coders=matrix.coders,
        n_units=len(matrix.units),
        n_pairable=n_pairable,
        n_single=n_single,
        units_per_coder={coder: int(matrix.coded[:, r].sum()) for r, coder in enumerate(matrix.coders)},
        statistic_names=names,
        per_code=tuple(per_code),
        frame=frame,
        n_distinct_sets=n_sets,
        pair_tables=pair_tables(matrix),
        disputed_units=tuple(disputed_units(matrix, top)),
        confused_pairs=confused,
        code_labels=labels,
        n_resamples=n_resamples,
        confidence=confidence,
        random_state=random_state,
        warnings=tuple(notes),
        special_codes=special_codes,
        include_special=include_special,
        swapped=_swapped_pairs(matrix, swap_candidates, labels),
    )
    return _judged(result, kappa_bar, alpha_bar)

