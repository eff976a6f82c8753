"""Per-code (present / absent) agreement: per-unit feature columns whose sums give every statistic.

Summing the columns over units (weights 1) gives the point estimates; summing them with bootstrap
multiplicities gives every resample at once (one matrix product).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from opencode.analysis.agreement.matrix import CodingMatrix
from opencode.analysis.agreement.stats import (
    _chance_corrected,
    _ratio,
    cohen_kappa_table,
    fleiss_kappa_totals,
    gwet_ac1_totals,
    krippendorff_alpha_coincidence,
    pabak_table,
)

TWO_CODER_STATISTICS = ("percent", "cohen_kappa", "krippendorff_alpha", "gwet_ac1", "pabak", "prevalence_index", "bias_index")
MANY_CODER_STATISTICS = ("percent", "fleiss_kappa", "conger_kappa", "krippendorff_alpha", "gwet_ac1", "brennan_prediger")


def statistic_names(n_coders: int) -> tuple[str, ...]:
    """The per-code statistics reported for this many coders (Cohen and PABAK need exactly two; with two
    coders Conger's kappa is Cohen's and Brennan-Prediger is PABAK, so they are not repeated)."""
    return TWO_CODER_STATISTICS if n_coders == 2 else MANY_CODER_STATISTICS


@dataclass(frozen=True, eq=False)
class CodeFeatures:
    """Per-unit columns (units x columns, float32): shared columns, then one block of codes per feature.

    Shared: pairable (two or more coders), coders on a pairable unit, rated (one or more coders), and with
    more than two coders one column per coder (coded the unit). Two coders: blocks a (both), b (first only),
    c (second only), share of the unit's coders using the code (every rated unit). More coders: blocks pair
    agreement, share (every rated unit), Krippendorff disagreement k(m-k)/(m-1), coders using the code
    (pairable units), then one block per coder (gave the code). Shares use every rated unit and agreement
    only units with two or more coders (Gwet 2014).
    """

    columns: np.ndarray
    n_codes: int
    two_coders: bool
    n_coders: int = 2

    @classmethod
    def from_matrix(cls, matrix: CodingMatrix) -> "CodeFeatures":
        """Compute the feature columns from a coding matrix."""
        pairable = matrix.pairable
        coders = matrix.coders_per_unit.astype(np.float32)
        rated = coders >= 1
        m = np.where(pairable, coders, 0).astype(np.float32)[:, None]
        all_k = matrix.present.sum(axis=1, dtype=np.float32)
        share_all = np.where(rated[:, None], all_k / np.where(rated, coders, 1.0)[:, None], 0.0)
        present = matrix.present & pairable[:, None, None]
        shared = [pairable[:, None].astype(np.float32), m, rated[:, None].astype(np.float32)]
        if len(matrix.coders) == 2:
            first, second = present[:, 0, :], present[:, 1, :]
            blocks = [first & second, first & ~second, ~first & second, share_all]
        else:
            k = present.sum(axis=1, dtype=np.float32)
            safe_m = np.where(m > 0, m, 2.0)
            agree = np.where(m > 0, (k * (k - 1) + (m - k) * (m - k - 1)) / (safe_m * (safe_m - 1)), 0.0)
            blocks = [agree, share_all, k * (m - k) / (safe_m - 1), k]
            blocks += [matrix.present[:, r, :] for r in range(len(matrix.coders))]
            shared.append(matrix.coded.astype(np.float32))
        columns = np.hstack([np.asarray(b, dtype=np.float32) for b in shared + blocks])
        return cls(columns, len(matrix.codes), len(matrix.coders) == 2, len(matrix.coders))

    def totals(self) -> np.ndarray:
        """Column sums over all units in double precision (the point-estimate totals)."""
        return self.columns.sum(axis=0, dtype=np.float64)

    @property
    def _n_shared(self) -> int:
        return 3 if self.two_coders else 3 + self.n_coders

    def parts(self, totals: np.ndarray) -> dict[str, np.ndarray]:
        """Split totals (..., columns) into named arrays (..., codes) plus the shared unit counts."""
        totals = np.asarray(totals, dtype=float)
        n_units, m_sum, n_rated = totals[..., 0:1], totals[..., 1:2], totals[..., 2:3]
        head = self._n_shared
        blocks = np.split(totals[..., head:], (totals.shape[-1] - head) // self.n_codes, axis=-1)
        if self.two_coders:
            a, b, c, share = blocks
            d = n_units - a - b - c
            k_sum = 2 * a + b + c
            return {
                "n_units": np.broadcast_to(n_units, a.shape), "m_sum": np.broadcast_to(m_sum, a.shape),
                "n_rated": np.broadcast_to(n_rated, a.shape),
                "agree": a + d, "share": share, "disagree": b + c, "k_sum": k_sum,
                "table": np.stack([np.stack([a, b], -1), np.stack([c, d], -1)], -2),
            }
        agree, share, disagree, k_sum = blocks[:4]
        coded = totals[..., 3:head]
        return {
            "n_units": np.broadcast_to(n_units, agree.shape), "m_sum": np.broadcast_to(m_sum, agree.shape),
            "n_rated": np.broadcast_to(n_rated, agree.shape),
            "agree": agree, "share": share, "disagree": disagree, "k_sum": k_sum,
            "coder_present": np.stack(blocks[4:], axis=-2), "coder_units": coded,
        }

    def statistics(self, totals: np.ndarray) -> dict[str, np.ndarray]:
        """Every per-code statistic (..., codes) from totals (..., columns); NaN where undefined."""
        p = self.parts(totals)
        n, m_sum, k_sum, dis, n_rated = p["n_units"], p["m_sum"], p["k_sum"], p["disagree"], p["n_rated"]
        shares = np.stack([p["share"], n_rated - p["share"]], axis=-1)
        coincidence = np.stack(
            [np.stack([k_sum - dis, dis], -1), np.stack([dis, m_sum - k_sum - dis], -1)], -2
        )
        with np.errstate(divide="ignore", invalid="ignore"):
            out = {"percent": np.where(n > 0, p["agree"] / np.where(n > 0, n, 1), np.nan)}
        out["krippendorff_alpha"] = krippendorff_alpha_coincidence(coincidence)
        out["gwet_ac1"] = gwet_ac1_totals(p["agree"], n, shares, n_rated)
        if self.two_coders:
            out["cohen_kappa"] = cohen_kappa_table(p["table"])
            out["pabak"], out["prevalence_index"], out["bias_index"] = pabak_table(p["table"])
        else:
            out["fleiss_kappa"] = fleiss_kappa_totals(p["agree"], n, shares, n_rated)
            out["conger_kappa"] = _conger_binary(out["percent"], p["coder_present"], p["coder_units"])
            out["brennan_prediger"] = _chance_corrected(out["percent"], np.full_like(out["percent"], 0.5))
        return out


def _conger_binary(observed: np.ndarray, coder_present: np.ndarray, coder_units: np.ndarray) -> np.ndarray:
    """Conger (1980) kappa per code: chance = sum over present/absent of (mean_g p_gk)^2 - s_k^2 / r, with
    p_gk coder g's share of category k over every unit g coded and s_k^2 its variance across coders."""
    units = np.asarray(coder_units, dtype=float)[..., :, None]  # (..., coders, 1)
    p_present = _ratio(coder_present, np.broadcast_to(units, coder_present.shape))  # (..., coders, codes)
    r = p_present.shape[-2]
    chance = np.zeros(p_present.shape[:-2] + p_present.shape[-1:])
    for p in (p_present, 1.0 - p_present):
        chance = chance + p.mean(axis=-2) ** 2 - p.var(axis=-2, ddof=1) / r
    return _chance_corrected(observed, chance)
