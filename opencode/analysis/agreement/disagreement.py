"""Where coders differ: per-code coder-pair tables, the units that drive disagreement, codes confused for each other."""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np
import scipy.sparse as sp

from opencode.analysis.agreement.matrix import CodingMatrix
from opencode.analysis.agreement.stats import cohen_kappa_table


@dataclass(frozen=True)
class PairTables:
    """For each coder pair, per code, the 2 x 2 table [[both, first only], [second only, neither]] and its kappa."""

    pairs: tuple[tuple[str, str], ...]
    codes: tuple
    tables: np.ndarray  # (pairs, codes, 2, 2) int, over the units both coders coded
    kappa: np.ndarray  # (pairs, codes) Cohen's kappa, NaN where undefined


@dataclass(frozen=True)
class DisputedUnit:
    """A verbatim on which coders disagree about several codes, with each coder's set (None = not coded)."""

    unit: object
    n_disputed_codes: int
    sets: dict[str, tuple | None]


@dataclass(frozen=True)
class ConfusedPair:
    """Two codes that coders swap: one coder has `code_a` (not `code_b`) where another has `code_b` (not `code_a`)."""

    code_a: object
    code_b: object
    count: int


def _pair_indices(matrix: CodingMatrix) -> list[tuple[int, int]]:
    return list(combinations(range(len(matrix.coders)), 2))


def pair_tables(matrix: CodingMatrix) -> PairTables:
    """Per code and coder pair, the 2 x 2 present/absent table over units both coders coded."""
    pairs = _pair_indices(matrix)
    tables = np.empty((len(pairs), len(matrix.codes), 2, 2), dtype=np.int64)
    for p, (i, j) in enumerate(pairs):
        both = (matrix.coded[:, i] & matrix.coded[:, j])[:, None]
        x, y = matrix.present[:, i, :], matrix.present[:, j, :]
        for row, a in enumerate((x, ~x)):
            for col, b in enumerate((y, ~y)):
                tables[p, :, row, col] = (a & b & both).sum(axis=0)
    names = tuple((matrix.coders[i], matrix.coders[j]) for i, j in pairs)
    return PairTables(names, matrix.codes, tables, cohen_kappa_table(tables))


def disputed_codes_per_unit(matrix: CodingMatrix) -> np.ndarray:
    """How many codes the unit's coders split on (some coders gave it, others who coded the unit did not)."""
    k = matrix.present.sum(axis=1)
    m = np.where(matrix.pairable, matrix.coders_per_unit, 0)[:, None]
    return ((k > 0) & (k < m)).sum(axis=1)


def disputed_verbatims_per_code(matrix: CodingMatrix) -> np.ndarray:
    """Per code, how many units its coders split on (some gave the code, others who coded the unit did not)."""
    k = matrix.present.sum(axis=1)
    m = np.where(matrix.pairable, matrix.coders_per_unit, 0)[:, None]
    return ((k > 0) & (k < m)).sum(axis=0)


def disputed_units(matrix: CodingMatrix, top: int = 10) -> list[DisputedUnit]:
    """The `top` units with most disputed codes (ties in unit order), listing each coder's codes."""
    disputed = disputed_codes_per_unit(matrix)
    order = np.argsort(-disputed, kind="stable")[:top]
    codes = np.asarray(matrix.codes, dtype=object)
    out = []
    for u in order[disputed[order] > 0]:
        sets = {
            coder: tuple(codes[matrix.present[u, r]]) if matrix.coded[u, r] else None
            for r, coder in enumerate(matrix.coders)
        }
        out.append(DisputedUnit(matrix.units[u], int(disputed[u]), sets))
    return out


def confusion_counts(matrix: CodingMatrix) -> np.ndarray:
    """Codes x codes symmetric counts of (unit, coder pair) where one has A not B and the other B not A."""
    n = len(matrix.codes)
    counts = np.zeros((n, n), dtype=np.int64)
    for i, j in _pair_indices(matrix):
        both = (matrix.coded[:, i] & matrix.coded[:, j])[:, None]
        x, y = matrix.present[:, i, :], matrix.present[:, j, :]
        only_x = sp.csc_matrix(x & ~y & both, dtype=np.int64)
        only_y = sp.csc_matrix(y & ~x & both, dtype=np.int64)
        swapped = (only_x.T @ only_y).toarray()
        counts += swapped + swapped.T
    return counts


def confused_pairs(matrix: CodingMatrix, top: int = 10) -> list[ConfusedPair]:
    """The `top` code pairs most often swapped between coders on the same unit."""
    counts = confusion_counts(matrix)
    a, b = np.triu_indices(len(matrix.codes), k=1)
    values = counts[a, b]
    order = np.argsort(-values, kind="stable")[:top]
    return [ConfusedPair(matrix.codes[a[o]], matrix.codes[b[o]], int(values[o])) for o in order if values[o] > 0]


def swapped_units(matrix: CodingMatrix, code_a, code_b) -> tuple:
    """The units on which some coder pair swapped two codes (one has `code_a` without `code_b`, the other
    `code_b` without `code_a`), in unit order: the verbatims to recode once the definitions are tightened."""
    a, b = matrix.codes.index(code_a), matrix.codes.index(code_b)
    hit = np.zeros(len(matrix.units), dtype=bool)
    for i, j in _pair_indices(matrix):
        both = matrix.coded[:, i] & matrix.coded[:, j]
        x, y = matrix.present[:, i, :], matrix.present[:, j, :]
        one_way = x[:, a] & ~x[:, b] & y[:, b] & ~y[:, a]
        other_way = x[:, b] & ~x[:, a] & y[:, a] & ~y[:, b]
        hit |= both & (one_way | other_way)
    return tuple(matrix.units[u] for u in np.flatnonzero(hit))
