"""The mix of a closed-ended variable within each code: row percentages (e.g. negative / neutral / positive
sentiment per code), with an optional mean score and a per-row test.

Each row's base is the answered respondents holding the code (or any code of a net) who have a value on the
variable; the first row is everyone answered. The per-row chi-square compares the variable's distribution
among respondents with the code against the whole answered base's (code present / absent by category,
Bilder & Loughin 2004: one test per row), Benjamini-Hochberg adjusted across rows.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import sparse

from opencode.analysis.multiple_testing import bh_adjust
from opencode.analysis.tables.crosstab import (
    MIN_BASE,
    BannerVariable,
    CodedQuestion,
    SurveyWeight,
    TableRow,
    _banner_onehot,
    _code_matrix,
    _masks,
    _respondent_count,
    _row_indicators,
    _table_rows,
    _weights,
)
from opencode.analysis.tables.significance import chi_square_rows, effective_bases
from opencode.errors import OpenCodeError


@dataclass
class MixTable:
    """Rows (everyone answered, then nets and codes) x the variable's categories as row shares."""

    question: str
    question_label: str
    variable: str
    variable_label: str
    rows: tuple[TableRow, ...]
    categories: tuple[tuple[float, str], ...]
    share: np.ndarray  # rows x categories, row shares (weighted)
    count: np.ndarray  # rows x categories, unweighted counts
    base_n: np.ndarray
    base_weighted: np.ndarray
    base_effective: np.ndarray
    mean_score: np.ndarray | None
    score_label: str
    row_p: np.ndarray
    row_q: np.ndarray
    weight_name: str | None
    min_base: int = MIN_BASE

    @property
    def weighted(self) -> bool:
        """Whether a survey weight was applied."""
        return self.weight_name is not None

    @property
    def small_base(self) -> np.ndarray:
        """Rows whose effective base is under the minimum (flagged, not tested)."""
        return self.base_effective < self.min_base


def row_mix(question: CodedQuestion, variable: BannerVariable, weight: SurveyWeight | None = None, *,
            score=None, score_label: str = "mean", min_base: int = MIN_BASE) -> MixTable:
    """Row shares of `variable`'s categories per code and net of `question`; `score` (one number per
    respondent, NaN = none) adds each row's weighted mean."""
    n = _respondent_count(question)
    answered, non_answer = _masks(question, n)
    w = _weights(weight, question, answered | non_answer, n)
    rows, membership = _table_rows(question)
    row_matrix = _row_indicators(_code_matrix(question, n, answered), membership)
    everyone = sparse.csr_matrix(answered.reshape(-1, 1).astype(float))
    row_matrix = sparse.hstack([everyone, row_matrix], format="csr")
    rows = (TableRow("total", 0, "All answered", 0),) + rows
    categories, onehot = _banner_onehot(variable, n, answered)
    valued = np.asarray(onehot.sum(axis=1)).ravel() > 0
    weighted_onehot = sparse.diags(w) @ onehot
    count = np.asarray((row_matrix.T @ onehot).todense())
    amount = np.asarray((row_matrix.T @ weighted_onehot).todense())
    base_n = count.sum(axis=1)
    base_w = amount.sum(axis=1)
    base_w2 = np.asarray(row_matrix.T @ (w * w * valued)).ravel()
    base_eff = effective_bases(base_w, base_w2)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.where(base_w[:, None] > 0, amount / np.where(base_w > 0, base_w, 1.0)[:, None], np.nan)
    mean = None
    if score is not None:
        s = np.asarray(score, dtype=float)
        if s.shape != (n,):
            raise OpenCodeError(f"{score_label}: {s.size} values for {n} respondents")
        has = np.isfinite(s) & answered
        ws = np.where(has, w, 0.0)
        total = np.asarray(row_matrix.T @ (ws * np.nan_to_num(s))).ravel()
        weights = np.asarray(row_matrix.T @ ws).ravel()
        with np.errstate(divide="ignore", invalid="ignore"):
            mean = np.where(weights > 0, total / np.where(weights > 0, weights, 1.0), np.nan)
    testable = (base_eff >= min_base) & (base_n > 0)
    # Per row: code present vs the whole answered base, as present-count by category against category totals,
    # on Kish effective counts when weighted (the same approximation as the banner table's row test).
    scale = np.where(base_w > 0, base_eff / np.where(base_w > 0, base_w, 1.0), 0.0)
    effective = amount * scale[:, None]
    totals = np.broadcast_to(effective[0], effective.shape)
    stat, df, p = chi_square_rows(effective[1:], totals[1:])
    row_p = np.concatenate([[np.nan], np.where(testable[1:], p, np.nan)])
    return MixTable(
        question=question.name, question_label=question.label or question.name, variable=variable.name,
        variable_label=variable.label or variable.name, rows=rows, categories=tuple(categories), share=share,
        count=count.astype(int), base_n=base_n.astype(int), base_weighted=base_w, base_effective=base_eff,
        mean_score=mean, score_label=score_label, row_p=row_p, row_q=bh_adjust(row_p),
        weight_name=weight.name if weight is not None else None, min_base=min_base)
