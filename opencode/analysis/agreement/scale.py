"""Agreement on an ordered scale of codes (a rating or a sentiment scale coded by people): one code per verbatim.

The frame's codes (or the ones named) form the scale in the order given; each coder gives a verbatim at most
one of them. Ordinal level: the scale positions 1..q; interval and ratio: the code numbers as values.
Statistics: exact and weighted agreement, Cohen's weighted kappa (two coders) or Fleiss' and Conger's
weighted kappas (more), Gwet's AC2, Brennan-Prediger, and Krippendorff's alpha at the level; each with a
seeded bootstrap percentile interval (resampling verbatims) and, where a formula exists, an analytic
standard error and interval (see weighted.py).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from opencode.analysis.agreement.bands import cited_krippendorff, cited_landis_koch
from opencode.analysis.agreement.bootstrap import percentile_interval
from opencode.analysis.agreement.stats import _ratio
from opencode.analysis.agreement.weighted import (
    LEVELS,
    WEIGHTS,
    agreement_weights,
    coincidence_matrix,
    cohen_weighted,
    conger_kappa,
    gwet_family,
    krippendorff_alpha_level,
)
from opencode.errors import OpenCodeError

SCALE_LEVELS = tuple(level for level in LEVELS if level != "nominal")
DEFAULT_WEIGHTS = {"ordinal": "linear", "interval": "quadratic", "ratio": "quadratic"}
SMALL_BASE = 30  # common practice (no published source)
_MEMORY = 4_000_000  # array elements per bootstrap block

SCALE_LABELS = {
    "percent": "% exact agreement",
    "weighted_percent": "% weighted agreement",
    "cohen_kappa_w": "Cohen's weighted kappa",
    "fleiss_kappa_w": "Fleiss' weighted kappa",
    "conger_kappa_w": "Conger's weighted kappa",
    "gwet_ac2": "Gwet's AC2",
    "brennan_prediger_w": "Brennan-Prediger (weighted)",
    "krippendorff_alpha": "Krippendorff's alpha",
}
_KAPPA_LIKE = {"cohen_kappa_w", "fleiss_kappa_w", "conger_kappa_w", "gwet_ac2", "brennan_prediger_w"}
ANALYTIC_SOURCES = {
    "cohen_kappa_w": "Fleiss, Cohen & Everitt (1969)",
    "fleiss_kappa_w": "Gwet (2014)", "conger_kappa_w": "Gwet (2014)", "gwet_ac2": "Gwet (2008, 2014)",
    "brennan_prediger_w": "Gwet (2014)",
}


@dataclass(frozen=True, eq=False)
class ScaleRatings:
    """Units x coders scale positions (-1 = not rated on the scale) with the scale's codes and labels."""

    units: tuple
    coders: tuple[str, ...]
    codes: tuple[int, ...]
    positions: np.ndarray
    labels: dict = field(default_factory=dict)
    n_without_scale_code: int = 0

    @classmethod
    def from_sets(cls, sets: Mapping[str, Mapping[object, frozenset]], scale: Sequence[int],
                  labels: Mapping | None = None) -> "ScaleRatings":
        """Build from {coder: {unit: codes}}; a coder's codes off the scale are ignored, two scale codes on one
        unit are an error, and a unit a coder coded with no scale code counts as not rated by that coder."""
        scale = [int(c) for c in scale]
        if len(scale) < 2:
            raise OpenCodeError(f"a scale needs at least two codes; got {', '.join(map(str, scale)) or 'none'}")
        if len(set(scale)) != len(scale):
            raise OpenCodeError("the scale lists a code twice")
        coders = tuple(sets)
        if len(coders) < 2:
            raise OpenCodeError(f"agreement needs at least 2 coders; got {len(coders)}")
        position = {code: k for k, code in enumerate(scale)}
        units = sorted({u for coded in sets.values() for u in coded}, key=lambda u: (str(type(u)), u))
        row = {u: i for i, u in enumerate(units)}
        positions = np.full((len(units), len(coders)), -1, dtype=int)
        without = 0
        for r, coder in enumerate(coders):
            for unit, codes in sets[coder].items():
                on_scale = sorted(c for c in codes if c in position)
                if len(on_scale) > 1:
                    raise OpenCodeError(
                        f"coder {coder!r} gave verbatim {unit!r} {len(on_scale)} codes of the scale "
                        f"({', '.join(map(str, on_scale))}); a scale takes one code per verbatim")
                if on_scale:
                    positions[row[unit], r] = position[on_scale[0]]
                else:
                    without += 1
        return cls(tuple(units), coders, tuple(scale), positions, dict(labels or {}), without)


@dataclass(frozen=True)
class ScaleEstimate:
    """A statistic: value, bootstrap interval, analytic standard error and interval; None where undefined."""

    value: float | None
    low: float | None = None
    high: float | None = None
    se: float | None = None
    se_low: float | None = None
    se_high: float | None = None
    words: str = ""


@dataclass(frozen=True)
class ScaleAgreementResult:
    """Agreement on a scale: settings, bases, statistics and each coder's distribution over the scale."""

    coders: tuple[str, ...]
    level: str
    weights: str
    codes: tuple[int, ...]
    values: tuple[float, ...]
    code_labels: dict
    n_units: int
    n_pairable: int
    n_single: int
    n_without_scale_code: int
    units_per_coder: dict
    statistics: dict
    distribution: np.ndarray  # coders x scale codes
    n_resamples: int = 0
    confidence: float = 0.95
    random_state: int | None = 0
    warnings: tuple[str, ...] = ()

    def label(self, code) -> str:
        """The code's label, or the code itself."""
        return str(self.code_labels.get(code, code))


def _values(ratings: ScaleRatings, level: str) -> np.ndarray:
    if level == "ordinal":
        return np.arange(1, len(ratings.codes) + 1, dtype=float)
    values = np.asarray(ratings.codes, dtype=float)
    if level == "ratio" and (values < 0).any():
        raise OpenCodeError("ratio level needs code numbers of 0 or more (a true zero); use --level interval")
    if np.any(np.diff(values) <= 0):
        raise OpenCodeError(f"at {level} level the code numbers are the values, so the scale must list them in "
                            f"increasing order; got {', '.join(map(str, ratings.codes))}")
    return values


def scale_statistics(onehot: np.ndarray, values: np.ndarray, level: str, weights: np.ndarray,
                     confidence: float = 0.95) -> dict:
    """Every scale statistic per batch from one-hot ratings (units, coders, batch, q): name -> (value, se, low, high)."""
    two = onehot.shape[1] == 2
    out = {}
    counts = onehot.sum(axis=1)
    ri = counts.sum(axis=-1)
    pair = ri >= 2
    exact = np.where(pair, (counts * (counts - 1)).sum(axis=-1) / np.where(pair, ri * (ri - 1), 1), 0.0)
    nan = np.full(onehot.shape[2], np.nan)
    out["percent"] = (_ratio(exact.sum(axis=0), pair.sum(axis=0)), nan, nan, nan)
    ac2 = gwet_family(onehot, weights, "gwet", confidence)
    out["weighted_percent"] = (ac2.observed, nan, nan, nan)
    if two:
        both = onehot[:, 0].sum(axis=-1) * onehot[:, 1].sum(axis=-1)  # (units, batch) 1 when both rated
        table = np.einsum("ub,ubk,ubl->bkl", both, onehot[:, 0], onehot[:, 1])
        c = cohen_weighted(table, weights, confidence)
        out["cohen_kappa_w"] = (c.value, c.se, c.low, c.high)
    else:
        for name, coefficient in (("fleiss_kappa_w", gwet_family(onehot, weights, "fleiss", confidence)),
                                  ("conger_kappa_w", conger_kappa(onehot, weights, confidence))):
            out[name] = (coefficient.value, coefficient.se, coefficient.low, coefficient.high)
    out["gwet_ac2"] = (ac2.value, ac2.se, ac2.low, ac2.high)
    bp = gwet_family(onehot, weights, "bp", confidence)
    out["brennan_prediger_w"] = (bp.value, bp.se, bp.low, bp.high)
    alpha = krippendorff_alpha_level(coincidence_matrix(onehot), values, level)
    out["krippendorff_alpha"] = (alpha, nan, nan, nan)
    return out


def _onehot(positions: np.ndarray, q: int) -> np.ndarray:
    """(units, coders) positions -> (units, coders, 1, q) float one-hot."""
    out = np.zeros(positions.shape + (q,))
    rated = positions >= 0
    out[np.nonzero(rated) + (positions[rated],)] = 1.0
    return out[:, :, None, :]


def _number(x) -> float | None:
    x = float(x)
    return None if math.isnan(x) else x


def _words(name: str, value: float | None, no_interval: bool) -> str:
    if value is None:
        return "undefined: every coder used one scale code only, or no verbatim was rated by two coders"
    band = ""
    if name in _KAPPA_LIKE:
        band = cited_landis_koch(value)
    elif name == "krippendorff_alpha":
        band = cited_krippendorff(value)
    parts = [band] if band else []
    if no_interval:
        parts.append("no interval: undefined in most resamples")
    return "; ".join(parts)


def measure_scale_agreement(ratings: ScaleRatings, *, level: str = "ordinal", weights: str | None = None,
                            n_resamples: int = 1000, confidence: float = 0.95,
                            random_state: int | None = 0) -> ScaleAgreementResult:
    """Agreement on a scale at `level` with `weights` (default linear for ordinal, quadratic for interval/ratio)."""
    if level not in SCALE_LEVELS:
        raise OpenCodeError(f"level must be one of {', '.join(SCALE_LEVELS)} for a scale; got {level!r} "
                            "(nominal codes use the per-code statistics)")
    weights = weights or DEFAULT_WEIGHTS[level]
    if weights not in WEIGHTS or weights == "identity":
        raise OpenCodeError(f"weights must be linear or quadratic for a scale; got {weights!r}")
    if not 0 < confidence < 1:
        raise OpenCodeError(f"confidence must be between 0 and 1, got {confidence}")
    if n_resamples < 0:
        raise OpenCodeError(f"number of bootstrap resamples must be 0 or more, got {n_resamples}")
    values = _values(ratings, level)
    w = agreement_weights(values, weights)
    q = len(ratings.codes)
    per_unit = (ratings.positions >= 0).sum(axis=1)
    keep = per_unit >= 1
    positions = ratings.positions[keep]
    n_pairable = int((per_unit >= 2).sum())
    if n_pairable == 0:
        raise OpenCodeError(f"no verbatim was rated on the scale by two or more of the coders "
                            f"{', '.join(ratings.coders)}: nothing to compare")
    point = scale_statistics(_onehot(positions, q), values, level, w, confidence)
    samples: dict[str, list[np.ndarray]] = {name: [] for name in point}
    if n_resamples:
        rng = np.random.default_rng(random_state)
        n = positions.shape[0]
        base = _onehot(positions, q)[:, :, 0, :]
        block = max(1, min(64, _MEMORY // max(1, n * positions.shape[1] * q)))
        for start in range(0, n_resamples, block):
            size = min(block, n_resamples - start)
            draws = rng.integers(0, n, size=(size, n))
            onehot = base[draws.T].transpose(0, 2, 1, 3)  # (units, coders, resamples, q)
            for name, (value, *_rest) in scale_statistics(onehot, values, level, w, confidence).items():
                samples[name].append(value)
    statistics = {}
    for name, (value, se, low, high) in point.items():
        v = _number(value[0])
        b_low = b_high = None
        no_interval = False
        if n_resamples:
            lo, hi = percentile_interval(np.concatenate(samples[name])[:, None], confidence)
            b_low, b_high = _number(lo[0]), _number(hi[0])
            no_interval = v is not None and b_low is None
        statistics[name] = ScaleEstimate(v, b_low, b_high, _number(se[0]), _number(low[0]), _number(high[0]),
                                         _words(name, v, no_interval))
    n_single = int((per_unit == 1).sum())
    notes = []
    if n_single:
        notes.append(f"{n_single} verbatims rated on the scale by one coder only count towards the category "
                     "shares of the kappa-type statistics, not towards agreement (Gwet 2014)")
    if ratings.n_without_scale_code:
        notes.append(f"{ratings.n_without_scale_code} coder ratings hold no code of the scale and are left out")
    if n_pairable < SMALL_BASE:
        notes.append(f"small base: only {n_pairable} verbatims rated by two or more coders; read with care")
    distribution = np.stack([np.bincount(ratings.positions[:, r][ratings.positions[:, r] >= 0], minlength=q)
                             for r in range(len(ratings.coders))])
    return ScaleAgreementResult(
        coders=ratings.coders, level=level, weights=weights, codes=ratings.codes, values=tuple(values.tolist()),
        code_labels=ratings.labels, n_units=int(keep.sum()), n_pairable=n_pairable, n_single=n_single,
        n_without_scale_code=ratings.n_without_scale_code,
        units_per_coder={c: int((ratings.positions[:, r] >= 0).sum()) for r, c in enumerate(ratings.coders)},
        statistics=statistics, distribution=distribution, n_resamples=n_resamples, confidence=confidence,
        random_state=random_state, warnings=tuple(notes))
