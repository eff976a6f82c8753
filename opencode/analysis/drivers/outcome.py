"""Turn a closed-ended variable into the 0/1 outcome that drivers predict: binary as is, or a split of a scale.

Split specs (a string, case-insensitive):
    "4,5 vs 1,2"   codes (or ranges "4-5", or value labels) on side 1, then side 0
    "top2"         the top 2 scale points against the bottom 2 (same as "top2 vs bottom2")
    "top2 vs rest" top 2 against every other valid answer; "3 vs rest" is one category against the rest
Side 1 is always the left-hand side. Scale order is the value-label codes (else the observed codes), sorted.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from opencode.errors import OpenCodeError

#: Below this many verbatims in an outcome group, driver results are flagged as unstable (common practice).
MIN_GROUP = 20

_TOP_BOTTOM = re.compile(r"^(top|bottom)[\s-]*(\d+)$")
_RANGE = re.compile(r"^(-?\d+(?:\.\d+)?)\s*-\s*(-?\d+(?:\.\d+)?)$")


@dataclass(frozen=True)
class Outcome:
    """A 0/1 outcome over the rows used, plus what was left out and how the two sides read."""

    variable: str
    y: np.ndarray
    mask: np.ndarray
    labels: tuple[str, str]
    codes: tuple[tuple[float, ...], tuple[float, ...]]
    n_empty: int
    n_missing_code: int
    n_outside_split: int
    warnings: tuple[str, ...] = field(default=())

    @property
    def n_excluded(self) -> int:
        """Rows not used: empty, declared missing, or a valid answer on neither side of the split."""
        return self.n_empty + self.n_missing_code + self.n_outside_split

    @property
    def counts(self) -> tuple[int, int]:
        """Number of rows on side 0 and side 1."""
        ones = int(self.y.sum())
        return len(self.y) - ones, ones


def small_group_warning(n_side0: int, n_side1: int, labels: Sequence[str] = ("side 0", "side 1")) -> str | None:
    """A warning string when either outcome group has fewer than MIN_GROUP verbatims, else None."""
    small = [f"{label!r} has {n}" for label, n in zip(labels, (n_side0, n_side1)) if n < MIN_GROUP]
    if not small:
        return None
    return (f"small groups: {', '.join(small)} verbatims (fewer than {MIN_GROUP}); "
            "driver results are unstable, read them as hints only")


def _code_text(code: float) -> str:
    return str(int(code)) if float(code).is_integer() else str(code)


def _side_label(codes: Sequence[float], value_labels: Mapping[float, str], name: str | None = None) -> str:
    parts = " / ".join(value_labels.get(code, _code_text(code)) for code in codes)
    return f"{name} ({parts})" if name else parts


def _as_codes(values, variable: str) -> np.ndarray:
    try:
        return np.asarray(values, dtype=float).ravel()
    except (TypeError, ValueError) as exc:
        raise OpenCodeError(f"variable {variable!r}: values must be numeric codes ({exc})") from None


def _parse_side(text: str, scale: list[float], value_labels: Mapping[float, str], variable: str) -> list[float] | str:
    """Codes named by one side of a split spec, or a keyword ('rest')."""
    text = text.strip().lower()
    if text == "rest":
        return "rest"
    match = _TOP_BOTTOM.match(text)
    if match:
        k = int(match.group(2))
        if not 0 < k < len(scale):
            raise OpenCodeError(f"variable {variable!r}: {text!r} needs 1..{len(scale) - 1} scale points, "
                                f"the scale has {len(scale)}")
        return scale[-k:] if match.group(1) == "top" else scale[:k]
    by_label = {label.strip().lower(): code for code, label in value_labels.items()}
    codes: list[float] = []
    for token in filter(None, (t.strip() for t in text.split(","))):
        if token in by_label:
            codes.append(by_label[token])
            continue
        span = _RANGE.match(token)
        try:
            if span:
                low, high = float(span.group(1)), float(span.group(2))
                codes.extend(code for code in scale if low <= code <= high)
            else:
                codes.append(float(token))
        except ValueError:
            raise OpenCodeError(f"variable {variable!r}: {token!r} in the split is neither a code nor a "
                                f"value label") from None
    if not codes:
        raise OpenCodeError(f"variable {variable!r}: the split side {text!r} names no code")
    return codes


def parse_split(spec: str, scale: Sequence[float], value_labels: Mapping[float, str] | None = None,
                variable: str = "outcome") -> tuple[list[float], list[float], tuple[str | None, str | None]]:
    """Codes on side 1 and side 0 of a split spec over the given scale, plus short names for keyword sides."""
    labels = dict(value_labels or {})
    scale = sorted(float(s) for s in scale)
    text = spec.strip().lower()
    if _TOP_BOTTOM.match(text):
        k = _TOP_BOTTOM.match(text).group(2)
        text = f"top{k} vs bottom{k}"
    parts = re.split(r"\s+vs\.?\s+", text)
    if len(parts) != 2:
        raise OpenCodeError(f"variable {variable!r}: cannot read split {spec!r}; write e.g. '4,5 vs 1,2', "
                            "'top2', 'top2 vs rest' or '3 vs rest'")
    one, zero = (_parse_side(part, scale, labels, variable) for part in parts)
    if one == "rest" and zero == "rest":
        raise OpenCodeError(f"variable {variable!r}: split {spec!r} has 'rest' on both sides")
    names = tuple(_side_name(part) for part in parts)
    if one == "rest":
        one = [code for code in scale if code not in zero]
    if zero == "rest":
        zero = [code for code in scale if code not in one]
    unknown = [code for code in one + zero if code not in scale]
    if unknown:
        raise OpenCodeError(f"variable {variable!r}: code {_code_text(unknown[0])} in split {spec!r} is not a "
                            f"valid answer (valid: {', '.join(_code_text(c) for c in scale)})")
    both = sorted(set(one) & set(zero))
    if both:
        raise OpenCodeError(f"variable {variable!r}: code {_code_text(both[0])} is on both sides of split {spec!r}")
    if not one or not zero:
        raise OpenCodeError(f"variable {variable!r}: split {spec!r} leaves one side without codes")
    return sorted(set(one)), sorted(set(zero)), names


def _side_name(part: str) -> str | None:
    part = part.strip().lower()
    match = _TOP_BOTTOM.match(part)
    if match:
        return f"{match.group(1)} {match.group(2)}"
    return "all other answers" if part == "rest" else None


def make_outcome(values, *, variable: str, value_labels: Mapping[float, str] | None = None,
                 missing_codes: Sequence[float] = (), split: str | None = None) -> Outcome:
    """Build the 0/1 outcome from numeric codes (NaN = empty); without a split the variable must be binary.

    For a binary variable the higher code is side 1. Missing codes and empties are excluded and counted.
    """
    codes = _as_codes(values, variable)
    labels = {float(k): str(v) for k, v in (value_labels or {}).items()}
    missing = {float(m) for m in missing_codes}
    empty = np.isnan(codes)
    declared_missing = np.isin(codes, list(missing)) & ~empty
    valid = ~empty & ~declared_missing
    if not valid.any():
        raise OpenCodeError(f"variable {variable!r}: every row is empty or a missing code "
                            f"({int(empty.sum())} empty, {int(declared_missing.sum())} missing code)")
    observed = sorted(set(np.unique(codes[valid]).tolist()))
    scale = sorted(({c for c in labels if c not in missing} | set(observed)))
    if split is None:
        if len(observed) != 2:
            raise OpenCodeError(
                f"variable {variable!r}: has {len(observed)} valid answer codes "
                f"({', '.join(_code_text(c) for c in observed)}); "
                + ("it has one class only, so nothing can predict it" if len(observed) < 2
                   else "choose a split, e.g. 'top2' or '4,5 vs 1,2'"))
        one, zero, names = [observed[1]], [observed[0]], (None, None)
    else:
        one, zero, names = parse_split(split, scale, labels, variable)
    is_one = np.isin(codes, one) & valid
    is_zero = np.isin(codes, zero) & valid
    mask = is_one | is_zero
    side_labels = (_side_label(zero, labels, names[1]), _side_label(one, labels, names[0]))
    n1, n0 = int(is_one.sum()), int(is_zero.sum())
    if n1 == 0 or n0 == 0:
        empty_side = side_labels[1] if n1 == 0 else side_labels[0]
        raise OpenCodeError(f"variable {variable!r}: one class only, no row falls on the side {empty_side!r}; "
                            "nothing can predict it")
    warning = small_group_warning(n0, n1, side_labels)
    return Outcome(
        variable=variable,
        y=is_one[mask].astype(np.int8),
        mask=mask,
        labels=side_labels,
        codes=(tuple(zero), tuple(one)),
        n_empty=int(empty.sum()),
        n_missing_code=int(declared_missing.sum()),
        n_outside_split=int((valid & ~mask).sum()),
        warnings=(warning,) if warning else (),
    )


def one_vs_rest(values, *, variable: str, value_labels: Mapping[float, str] | None = None,
                missing_codes: Sequence[float] = ()) -> dict[float, Outcome]:
    """One outcome per valid category: that category (side 1) against every other valid answer."""
    codes = _as_codes(values, variable)
    missing = {float(m) for m in missing_codes}
    valid = codes[~np.isnan(codes) & ~np.isin(codes, list(missing))]
    if valid.size == 0:
        raise OpenCodeError(f"variable {variable!r}: every row is empty or a missing code")
    return {
        float(code): make_outcome(codes, variable=variable, value_labels=value_labels,
                                  missing_codes=missing_codes, split=f"{_code_text(code)} vs rest")
        for code in np.unique(valid)
    }
