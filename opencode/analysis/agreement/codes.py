"""Per-code (present / absent) agreement: per-unit feature columns whose sums give every statistic.

Summing the columns over units (weights 1) gives the point estimates; summing them with bootstrap
multiplicities gives every resample at once (one matrix product).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from opencode.analysis.agreement.matrix import CodingMatrix
from opencode.analysis.agreement.stats import (
    cohen_kappa_table,
    fleiss_kappa_totals,
    gwet_ac1_totals,
    krippendorff_alpha_coincidence,
    pabak_table,
)

TWO_CODER_STATISTICS = ("percent", "cohen_kappa", "krippendorff_alpha", "gwet_ac1", "pabak", "prevalence_index", "bias_index")
MANY_CODER_STATISTICS = ("percent", "fleiss_kappa", "krippendorff_alpha", "gwet_ac1")


def statistic_names(n_coders: int) -> tuple[str, ...]:
    """The per-code statistics reported for this many coders (Cohen and PABAK need exactly two)."""
    return TWO_CODER_STATISTICS if n_coders == 2 else MANY_CODER_STATISTICS


@dataclass(frozen=True, eq=False)
class CodeFeatures:
    """Per-unit columns (units x columns, float32): two shared columns, then one block of codes per feature.

    Two coders: blocks a (both), b (first only), c (second only). More coders: blocks pair agreement,
    share of coders using the code, Krippendorff disagreement k(m-k)/(m-1), coders using the code.
    """

    columns: np.ndarray
    n_codes: int
    two_coders: bool

    @classmethod
    def from_matrix(cls, matrix: CodingMatrix) -> "CodeFeatures":
        """Compute the feature columns from a coding matrix (only units with two or more coders count)."""
        pairable = matrix.pairable
        m = np.where(pairable, matrix.coders_per_unit, 0).astype(np.float32)[:, None]
        present = matrix.present & pairable[:, None, None]
        if len(matrix.coders) == 2:
            first, second = present[:, 0, :], present[:, 1, :]
            blocks = [first & second, first & ~second, ~first & second]
        else:
            k = present.sum(axis=1, dtype=np.float32)
            safe_m = np.where(m > 0, m, 2.0)
            agree = np.where(m > 0, (k * (k - 1) + (m - k) * (m - k - 1)) / (safe_m * (safe_m - 1)), 0.0)
            blocks = [agree, np.where(m > 0, k / safe_m, 0.0), k * (m - k) / (safe_m - 1), k]
        shared = np.hstack([pairable[:, None].astype(np.float32), m])
        columns = np.hstack([shared] + [np.asarray(b, dtype=np.float32) for b in blocks])
        return cls(columns, len(matrix.codes), len(matrix.coders) == 2)

    def totals(self) -> np.ndarray:
        """Column sums over all units in double precision (the point-estimate totals)."""
        return self.columns.sum(axis=0, dtype=np.float64)

    def parts(self, totals: np.ndarray) -> dict[str, np.ndarray]:
        """Split totals (..., columns) into named arrays (..., codes) plus the shared unit counts."""
        totals = np.asarray(totals, dtype=float)
        n_units, m_sum = totals[..., 0:1], totals[..., 1:2]
        blocks = np.split(totals[..., 2:], (totals.shape[-1] - 2) // self.n_codes, axis=-1)
        if self.two_coders:
            a, b, c = blocks
            d = n_units - a - b - c
            k_sum = 2 * a + b + c
            return {
                "n_units": np.broadcast_to(n_units, a.shape), "m_sum": np.broadcast_to(m_sum, a.shape),
                "agree": a + d, "share": k_sum / 2, "disagree": b + c, "k_sum": k_sum,
                "table": np.stack([np.stack([a, b], -1), np.stack([c, d], -1)], -2),
            }
        agree, share, disagree, k_sum = blocks
        return {
            "n_units": np.broadcast_to(n_units, agree.shape), "m_sum": np.broadcast_to(m_sum, agree.shape),
            "agree": agree, "share": share, "disagree": disagree, "k_sum": k_sum,
        }

    def statistics(self, totals: np.ndarray) -> dict[str, np.ndarray]:
        """Every per-code statistic (..., codes) from totals (..., columns); NaN where undefined."""
        p = self.parts(totals)
        n, m_sum, k_sum, dis = p["n_units"], p["m_sum"], p["k_sum"], p["disagree"]
        shares = np.stack([p["share"], n - p["share"]], axis=-1)
        coincidence = np.stack(
            [np.stack([k_sum - dis, dis], -1), np.stack([dis, m_sum - k_sum - dis], -1)], -2
        )
        with np.errstate(divide="ignore", invalid="ignore"):
            out = {"percent": np.where(n > 0, p["agree"] / np.where(n > 0, n, 1), np.nan)}
        out["krippendorff_alpha"] = krippendorff_alpha_coincidence(coincidence)
        out["gwet_ac1"] = gwet_ac1_totals(p["agree"], shares, n)
        if self.two_coders:
            out["cohen_kappa"] = cohen_kappa_table(p["table"])
            out["pabak"], out["prevalence_index"], out["bias_index"] = pabak_table(p["table"])
        else:
            out["fleiss_kappa"] = fleiss_kappa_totals(p["agree"], shares, n)
        return out
