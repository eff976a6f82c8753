"""Krippendorff's alpha over whole code sets per verbatim, with MASI or Jaccard distance between sets.

MASI: Passonneau (2006), LREC: 1 - J * M, J the Jaccard similarity, M = 1 equal, 2/3 subset, 1/3 overlap,
0 disjoint. Two empty sets (coded with no code) are identical: distance 0.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np
import scipy.sparse as sp

from opencode.analysis.agreement_matrix import CodingMatrix
from opencode.errors import OpenCodeError

DISTANCES = ("masi", "jaccard")
_ROW_BLOCK = 1024


def set_distance(intersection, size_a, size_b, kind: str = "masi") -> np.ndarray:
    """Distance between sets given |A & B|, |A| and |B| (arrays broadcast): 'masi' or 'jaccard'."""
    inter = np.asarray(intersection, dtype=float)
    size_a = np.asarray(size_a, dtype=float)
    size_b = np.asarray(size_b, dtype=float)
    union = size_a + size_b - inter
    jaccard = np.where(union > 0, inter / np.where(union > 0, union, 1.0), 1.0)
    if kind == "jaccard":
        return 1.0 - jaccard
    if kind != "masi":
        raise OpenCodeError(f"unknown set distance {kind!r}; choose one of {', '.join(DISTANCES)}")
    monotonicity = np.select(
        [(inter == size_a) & (inter == size_b), (inter == size_a) | (inter == size_b), inter > 0],
        [1.0, 2.0 / 3.0, 1.0 / 3.0],
        0.0,
    )
    return 1.0 - jaccard * monotonicity


def _set_distance_pair(a, b, kind: str) -> float:
    """Distance between two Python sets."""
    a, b = set(a), set(b)
    return float(set_distance(len(a & b), len(a), len(b), kind))


def masi_distance(a, b) -> float:
    """MASI distance between two sets (Passonneau 2006)."""
    return _set_distance_pair(a, b, "masi")


def jaccard_distance(a, b) -> float:
    """Jaccard distance 1 - |A & B| / |A | B| between two sets (0 for two empty sets)."""
    return _set_distance_pair(a, b, "jaccard")


@dataclass(frozen=True, eq=False)
class SetAlphaParts:
    """Per-unit pieces of set-valued alpha: observed disagreement per unit and which distinct set each coder gave."""

    unit_disagreement: np.ndarray  # (units,) sum over coder pairs of 2 * distance / (m - 1)
    value_counts: sp.csr_matrix  # (units, distinct sets) how many of the unit's coders gave each set
    values: np.ndarray  # (distinct sets, codes) bool
    kind: str

    @classmethod
    def from_matrix(cls, matrix: CodingMatrix, kind: str = "masi") -> "SetAlphaParts":
        """Collect the pieces from the units coded by two or more coders."""
        pairable = matrix.pairable
        coded = matrix.coded & pairable[:, None]
        m = matrix.coders_per_unit.astype(float)
        present = matrix.present
        sizes = present.sum(axis=2)
        disagreement = np.zeros(len(matrix.units))
        for i, j in combinations(range(len(matrix.coders)), 2):
            both = coded[:, i] & coded[:, j]
            inter = (present[:, i, :] & present[:, j, :]).sum(axis=1)
            d = set_distance(inter, sizes[:, i], sizes[:, j], kind)
            disagreement += np.where(both, 2.0 * d / np.where(both, m - 1.0, 1.0), 0.0)
        unit_of, coder_of = np.nonzero(coded)
        packed = np.packbits(present[unit_of, coder_of, :], axis=1)
        _, first, inverse = np.unique(packed, axis=0, return_index=True, return_inverse=True)
        values = present[unit_of[first], coder_of[first], :]
        counts = sp.csr_matrix(
            (np.ones(unit_of.size), (unit_of, inverse.ravel())), shape=(len(matrix.units), values.shape[0])
        )
        return cls(disagreement, counts, values, kind)

    def _distance_rows(self, rows: slice) -> np.ndarray:
        """Distances from the distinct sets in `rows` to every distinct set."""
        v = self.values.astype(np.float32)
        inter = v[rows] @ v.T
        sizes = v.sum(axis=1)
        return set_distance(inter, sizes[rows, None], sizes[None, :], self.kind)

    def distance_matrix(self) -> np.ndarray:
        """Distances between every pair of distinct sets (sets x sets)."""
        return self._distance_rows(slice(None))

    def expected_sum(self, n_c: np.ndarray) -> float:
        """sum_{c,k} n_c n_k distance(c, k), computed in row blocks to bound memory."""
        total = 0.0
        for start in range(0, n_c.size, _ROW_BLOCK):
            rows = slice(start, start + _ROW_BLOCK)
            total += float(n_c[rows] @ (self._distance_rows(rows) @ n_c))
        return total

    def alpha(self) -> float:
        """Point estimate: 1 - (n - 1) * sum of unit disagreements / sum_{c,k} n_c n_k distance(c, k)."""
        n_c = np.asarray(self.value_counts.sum(axis=0), dtype=float).ravel()
        return float(alpha_from_totals(self.unit_disagreement.sum(), n_c.sum(), self.expected_sum(n_c)))


def alpha_from_totals(observed_sum, n_values, expected_sum) -> np.ndarray:
    """Alpha from its three totals; NaN where the expected disagreement is zero (one set only)."""
    observed_sum = np.asarray(observed_sum, dtype=float)
    expected_sum = np.asarray(expected_sum, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = 1.0 - (np.asarray(n_values, dtype=float) - 1.0) * observed_sum / expected_sum
    return np.where(expected_sum > 0, out, np.nan)


def set_alpha(matrix: CodingMatrix, kind: str = "masi") -> float:
    """Krippendorff's alpha over each coder's whole code set per verbatim, with MASI or Jaccard distance."""
    return SetAlphaParts.from_matrix(matrix, kind).alpha()
