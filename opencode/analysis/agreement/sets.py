"""Krippendorff's alpha over whole code sets per verbatim, with MASI or Jaccard distance between sets.

MASI: Passonneau (2006), LREC: 1 - J * M, J the Jaccard similarity, M = 1 equal, 2/3 subset, 1/3 overlap,
0 disjoint. Two empty sets (coded with no code) are identical: distance 0.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations

import numpy as np
import scipy.sparse as sp

from opencode.analysis.agreement.bootstrap import one_blas_thread
from opencode.analysis.agreement.matrix import CodingMatrix
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


def distance_lookup(max_size: int, kind: str) -> np.ndarray:
    """Table of distances indexed [intersection, |A|, |B|] for sets of at most `max_size` codes."""
    grid = np.indices((max_size + 1,) * 3)
    return set_distance(grid[0], grid[1], grid[2], kind)


@dataclass(frozen=True, eq=False)
class SetAlphaParts:
    """Per-unit pieces of set-valued alpha: observed disagreement per unit, and which distinct set each coder gave."""

    unit_disagreement: dict[str, np.ndarray]  # kind -> (units,) sum over coder pairs of 2 * distance / (m - 1)
    value_counts: sp.csr_matrix  # (units, distinct sets) how many of the unit's coders gave each set
    values: np.ndarray  # (distinct sets, codes) bool

    @classmethod
    def from_matrix(cls, matrix: CodingMatrix, kinds: tuple[str, ...] = DISTANCES) -> "SetAlphaParts":
        """Collect the pieces from the units coded by two or more coders."""
        pairable = matrix.pairable
        coded = matrix.coded & pairable[:, None]
        m = matrix.coders_per_unit.astype(float)
        present = matrix.present
        sizes = present.sum(axis=2)
        disagreement = {kind: np.zeros(len(matrix.units)) for kind in kinds}
        for i, j in combinations(range(len(matrix.coders)), 2):
            both = coded[:, i] & coded[:, j]
            inter = (present[:, i, :] & present[:, j, :]).sum(axis=1)
            for kind in kinds:
                d = set_distance(inter, sizes[:, i], sizes[:, j], kind)
                disagreement[kind] += np.where(both, 2.0 * d / np.where(both, m - 1.0, 1.0), 0.0)
        unit_of, coder_of = np.nonzero(coded)
        packed = np.packbits(present[unit_of, coder_of, :], axis=1)
        _, first, inverse = np.unique(packed, axis=0, return_index=True, return_inverse=True)
        values = present[unit_of[first], coder_of[first], :]
        counts = sp.csr_matrix(
            (np.ones(unit_of.size), (unit_of, inverse.ravel())), shape=(len(matrix.units), values.shape[0])
        )
        return cls(disagreement, counts, values)

    @property
    def n_sets(self) -> int:
        """How many distinct code sets the coders gave."""
        return self.values.shape[0]

    def expected_sums(self, n_c: np.ndarray) -> dict[str, np.ndarray]:
        """sum_{c,k} n_c n_k distance(c, k) per kind, for set counts n_c (sets,) or (resamples, sets).

        Works in row blocks of the sets x sets distances (looked up from intersection and sizes) to bound memory.
        """
        dtype = np.float64 if np.ndim(n_c) == 1 else np.float32  # exact point estimates, fast resamples
        n = np.atleast_2d(np.asarray(n_c, dtype=dtype))
        v = self.values.astype(np.float32)
        sizes = self.values.sum(axis=1).astype(np.int32)
        side = int(sizes.max()) + 1
        tables = {kind: distance_lookup(side - 1, kind).astype(dtype).ravel() for kind in self.unit_disagreement}
        totals = {kind: np.zeros(n.shape[0]) for kind in tables}
        with one_blas_thread():
            for start in range(0, self.n_sets, _ROW_BLOCK):
                rows = slice(start, start + _ROW_BLOCK)
                inter = np.rint(v[rows] @ v.T).astype(np.int32)
                index = inter * (side * side) + (sizes[rows, None] * side + sizes[None, :])
                for kind, table in tables.items():
                    block = table[index]
                    totals[kind] += ((n @ block.T) * n[:, rows]).sum(axis=1, dtype=np.float64)
        return {kind: t if np.ndim(n_c) == 2 else t[0] for kind, t in totals.items()}

    def alphas(self) -> dict[str, float]:
        """Point estimates per kind: 1 - (n - 1) * sum of unit disagreements / sum_{c,k} n_c n_k distance(c, k)."""
        n_c = np.asarray(self.value_counts.sum(axis=0), dtype=float).ravel()
        expected = self.expected_sums(n_c)
        return {
            kind: float(alpha_from_totals(self.unit_disagreement[kind].sum(), n_c.sum(), expected[kind]))
            for kind in self.unit_disagreement
        }


def alpha_from_totals(observed_sum, n_values, expected_sum) -> np.ndarray:
    """Alpha from its three totals; NaN where the expected disagreement is zero (one set only)."""
    observed_sum = np.asarray(observed_sum, dtype=float)
    expected_sum = np.asarray(expected_sum, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = 1.0 - (np.asarray(n_values, dtype=float) - 1.0) * observed_sum / expected_sum
    return np.where(expected_sum > 0, out, np.nan)


def set_alpha(matrix: CodingMatrix, kind: str = "masi") -> float:
    """Krippendorff's alpha over each coder's whole code set per verbatim, with MASI or Jaccard distance."""
    return SetAlphaParts.from_matrix(matrix, (kind,)).alphas()[kind]
