"""Agreement between two sets of themes, compared through their ranked top terms.

Greene, O'Callaghan & Cunningham (2014) "How many topics? Stability analysis for topic models" (ECML PKDD):
two ranked term lists agree by their Average Jaccard (AJ), the mean over depths d = 1..t of the Jaccard index
of the top-d sets; two models agree by the mean AJ of their themes after matching themes one to one with the
Hungarian method (scipy.optimize.linear_sum_assignment). Stability of a k is the mean agreement between a
reference model and models fitted on resamples of the documents.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import linear_sum_assignment


def depth_jaccard(top_a: np.ndarray, top_b: np.ndarray) -> np.ndarray:
    """Jaccard index of the top-d term sets for every theme pair and depth (k_a x k_b x t).

    top_a, top_b: integer term ids, themes x t, heaviest first, no repeats within a row.
    """
    top_a, top_b = np.asarray(top_a), np.asarray(top_b)
    t = min(top_a.shape[1], top_b.shape[1])
    top_a, top_b = top_a[:, :t], top_b[:, :t]
    same = top_a[:, None, :, None] == top_b[None, :, None, :]
    depth_needed = np.maximum.outer(np.arange(t), np.arange(t))
    # A shared term counts in the top-d intersection once d exceeds both of its ranks.
    first_depth = np.zeros(same.shape[:2] + (t,))
    a_i, b_j, ra, rb = np.nonzero(same)
    np.add.at(first_depth, (a_i, b_j, depth_needed[ra, rb]), 1.0)
    intersection = np.cumsum(first_depth, axis=2)
    sizes = np.arange(1, t + 1, dtype=float)
    return intersection / (2.0 * sizes - intersection)


def match_themes(similarity: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One-to-one matching maximising total similarity (Hungarian method): row and column indices."""
    return linear_sum_assignment(np.asarray(similarity), maximize=True)


def average_jaccard(top_a: np.ndarray, top_b: np.ndarray) -> np.ndarray:
    """Average Jaccard (Greene et al. 2014) of every theme pair (k_a x k_b)."""
    return depth_jaccard(top_a, top_b).mean(axis=2)


def model_agreement(top_reference: np.ndarray, top_other: np.ndarray) -> float:
    """Mean Average Jaccard of Hungarian-matched themes, divided by the reference's number of themes."""
    aj = average_jaccard(top_reference, top_other)
    rows, cols = match_themes(aj)
    return float(aj[rows, cols].sum() / aj.shape[0])


def stability(top_reference: np.ndarray, top_resamples: list[np.ndarray]) -> float:
    """Stability of a k: the mean agreement between the reference model and each resample's model."""
    return float(np.mean([model_agreement(top_reference, other) for other in top_resamples]))
