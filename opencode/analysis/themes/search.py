"""Choosing the number of themes k: coherence and stability over a range of k, and one recommendation.

Each k is fitted once on all verbatims with terms (the reference) and scored by the mean NPMI and UMass
coherence of its themes' top terms on the study's own verbatims (see coherence.py), and by its stability
(Greene, O'Callaghan & Cunningham 2014): the mean agreement between the reference and models fitted on
random 80% resamples of the verbatims (see stability.py), and by the share of verbatims with terms that its
largest theme dominates.

The rule that picks k (RULE below, printed with every search):
  1. Rank every k by mean NPMI (higher is better) and by stability (higher is better).
  2. Leave out each k whose largest theme is a catch-all: it dominates more than 30% of the verbatims with
     terms, or more than twice an even share (2/k) when that is larger (common practice, no published
     source). A catch-all lumps unlike answers together, so a k that needs one does not split the answers.
  3. Recommend, among the k left, the best mean of the two ranks; ties go to the more stable k, then the
     smaller. When every k has a catch-all, the rule picks among all of them and says so.
UMass is shown for reference only: Lau, Newman & Baldwin (2014) found NPMI closer to human judgements. For
speed the search reuses one tf-idf matrix and one set of resamples for every k, fits on at most `max_docs`
sampled verbatims, and stops earlier (max_iter, tol) than a final fit.
"""

from __future__ import annotations

import re
import time
import warnings
from dataclasses import dataclass
from typing import Callable, Iterable

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.exceptions import ConvergenceWarning

from opencode.analysis.themes.coherence import coherence, top_term_indices
from opencode.analysis.themes.stability import stability
from opencode.analysis.themes.finder import (ThemeFinder, as_count_matrix, catch_all_limit, check_corpus,
                                             largest_share, leading_svd, nndsvd_start)
from opencode.errors import OpenCodeError

DEFAULT_K_RANGE = "4:20"
RULE = ("k is picked by the best mean of its NPMI rank and its stability rank, leaving out any k whose largest "
        "theme is a catch-all (more than 30% of the verbatims with terms, or twice an even share 2/k when that "
        "is more); ties go to the more stable, then the smaller k")


@dataclass
class KSearch:
    """The k-selection curve (one row per k), the recommended k and the sentence explaining it."""

    table: pd.DataFrame
    recommended_k: int
    note: str

    def to_record(self) -> dict:
        """JSON-safe form for storing in the study."""
        table = self.table.astype(object).where(self.table.notna(), None)
        return {"table": table.to_dict(orient="list"), "recommended_k": int(self.recommended_k), "note": self.note}

    @classmethod
    def from_record(cls, record: dict) -> "KSearch":
        """Inverse of to_record."""
        return cls(table=pd.DataFrame(record["table"]).apply(pd.to_numeric), recommended_k=record["recommended_k"],
                   note=record["note"])


def parse_k_range(spec: str | Iterable[int]) -> list[int]:
    """"4:20" (both ends included), "4:20:2", or a list of whole numbers; each k at least 2, increasing."""
    if isinstance(spec, str):
        match = re.fullmatch(r"\s*(\d+)\s*:\s*(\d+)\s*(?::\s*(\d+)\s*)?", spec)
        if not match:
            raise OpenCodeError(f"k range {spec!r}: write it as FROM:TO (e.g. 4:20) or FROM:TO:STEP")
        low, high, step = int(match[1]), int(match[2]), int(match[3] or 1)
        if low > high:
            raise OpenCodeError(f"k range {spec!r}: FROM must not exceed TO (did you mean {high}:{low}?)")
        if step < 1:
            raise OpenCodeError(f"k range {spec!r}: STEP must be at least 1")
        ks = list(range(low, high + 1, step))
    else:
        ks = list(spec)
        if not ks or any(isinstance(k, bool) or int(k) != k for k in ks):
            raise OpenCodeError(f"k range {ks!r}: give whole numbers")
        ks = sorted({int(k) for k in ks})
    if ks[0] < 2:
        raise OpenCodeError(f"k range {spec!r}: every k must be at least 2")
    return ks


def _starts(template: ThemeFinder, matrices: list, k_max: int) -> list | None:
    """One SVD per matrix, shared by every k (NMF with an NNDSVD start); None when the model starts itself."""
    if template.method != "nmf" or template._nmf_init() not in ("nndsvd", "nndsvda"):
        return None
    return [(leading_svd(m, k_max, template.random_state), m.mean()) for m in matrices]


def _fit_k(template: ThemeFinder, k: int, matrices: list, starts: list | None, n_top: int, max_iter: int,
           tol: float) -> tuple[ThemeFinder, list[np.ndarray]]:
    """Fit k themes on each matrix (the reference first, then the resamples); the fits and their top terms."""
    fits, tops = [], []
    variant = template._nmf_init() if starts is not None else None
    for number, matrix in enumerate(matrices):
        seed = None if template.random_state is None else template.random_state + number
        finder = clone(template).set_params(n_themes=k, random_state=seed)
        start = None
        if starts is not None:
            (u, sv, vt), mean = starts[number]
            start = nndsvd_start(u[:, :k], sv[:k], vt[:k], variant, mean)
        finder._fit_input(matrix, np.ones(matrix.shape[0], dtype=bool), max_iter=max_iter, tol=tol, start=start)
        fits.append(finder)
        tops.append(top_term_indices(finder.components_, n_top))
    return fits[0], tops


def choose_k(counts, k_range: str | Iterable[int] = DEFAULT_K_RANGE, *, method: str = "nmf", n_top: int = 10,
             n_resamples: int = 3, sample_fraction: float = 0.8, max_docs: int | None = 20_000,
             max_iter: int = 50, tol: float = 1e-3,
             random_state: int | None = 0, progress: Callable[[int, int, int], None] | None = None,
             **finder_params) -> KSearch:
    """Score each k by NPMI, UMass and stability; recommend one. progress(done, total, k) after each k.

    With more than `max_docs` verbatims with terms, the fits use a seeded random sample of that many (the
    choice of k needs the shape of the corpus, not every verbatim); coherence is still counted on them all.
    """
    if finder_params.get("seed_terms"):
        raise OpenCodeError("the k search runs without seed terms; seed the final run instead")
    if not 0.1 <= sample_fraction < 1.0:
        raise OpenCodeError(f"sample_fraction={sample_fraction}: must be at least 0.1 and below 1")
    if n_resamples < 1:
        raise OpenCodeError(f"n_resamples={n_resamples}: at least one resample is needed for stability")
    ks = parse_k_range(k_range)
    matrix = as_count_matrix(counts)
    keep = check_corpus(matrix, ks[-1])
    kept_counts = matrix[keep]
    template = ThemeFinder(method=method, n_themes=ks[0], random_state=random_state, **finder_params)
    template._check_params()
    model_input, _ = template.model_input(kept_counts)
    rng = np.random.default_rng(random_state)
    if max_docs is not None and model_input.shape[0] > max(max_docs, ks[-1]):
        model_input = model_input[np.sort(rng.choice(model_input.shape[0], size=max(max_docs, ks[-1]),
                                                     replace=False))]
    n_kept = model_input.shape[0]
    resamples = [np.sort(rng.choice(n_kept, size=max(ks[-1], int(sample_fraction * n_kept)), replace=False))
                 for _ in range(n_resamples)]
    matrices = [model_input] + [model_input[sample] for sample in resamples]
    starts = _starts(template, matrices, ks[-1])
    rows = []
    for done, k in enumerate(ks, start=1):
        started = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)  # the search stops early on purpose
            reference, (top, *resampled_tops) = _fit_k(template, k, matrices, starts, n_top, max_iter, tol)
        npmi, umass = coherence(kept_counts, top)
        _, largest = largest_share(reference.dominant_theme_, reference.included_, k)
        rows.append({"k": k, "npmi": float(npmi.mean()), "umass": float(umass.mean()),
                     "stability": stability(top, resampled_tops),
                     "unexplained": float((reference.dominant_theme_ < 0).mean()),
                     "largest": largest, "catch_all": bool(largest > catch_all_limit(k)),
                     "seconds": time.perf_counter() - started})
        if progress is not None:
            progress(done, len(ks), k)
    table, recommended, note = recommend_k(pd.DataFrame(rows))
    return KSearch(table=table, recommended_k=recommended, note=note)


def recommend_k(table: pd.DataFrame) -> tuple[pd.DataFrame, int, str]:
    """Apply RULE to a k table (columns k, npmi, stability, largest, catch_all): the table with its ranks,
    the recommended k and the sentences saying why."""
    table = table.copy()
    n = len(table)
    table["rank_npmi"] = table["npmi"].rank(ascending=False, method="min")
    table["rank_stability"] = table["stability"].rank(ascending=False, method="min")
    table["combined_rank"] = (table["rank_npmi"] + table["rank_stability"]) / 2
    order = ["combined_rank", "stability", "k"]
    ranked = table.sort_values(order, ascending=[True, False, True])
    eligible = ranked[~ranked["catch_all"].astype(bool)]
    best = (eligible if len(eligible) else ranked).iloc[0]
    recommended = int(best["k"])
    ks = table["k"].tolist()
    why = (f"Recommended k = {recommended}: NPMI rank {int(best['rank_npmi'])} and stability rank "
           f"{int(best['rank_stability'])} of {n} (mean {best['combined_rank']:.1f}); its largest theme holds "
           f"{best['largest']:.0%} of the verbatims with terms.")
    ahead = ranked.iloc[:list(ranked["k"]).index(best["k"])]
    passed = ahead[ahead["catch_all"].astype(bool)]
    if len(eligible) == 0:
        why += (" Every k in the range has a catch-all theme, so none could be left out: try a larger k, "
                "phrases, or more stop words, and read the largest theme's verbatims.")
    elif len(passed):
        skipped = ", ".join(f"k = {int(r.k)} (largest theme {r.largest:.0%})" for r in passed.itertuples())
        why += f" Ranked better but left out for a catch-all theme: {skipped}."
    top_npmi = table.loc[table["npmi"].idxmax()]
    if int(top_npmi["k"]) != recommended:
        why += f" The best NPMI alone is at k = {int(top_npmi['k'])}."
    note = (f"Rule: {RULE}. {why} k = {ks[0]}..{ks[-1]} were scored (UMass is shown for reference). The numbers "
            f"only shortlist: reading the themes and their verbatims is the final test, so also look at "
            f"k = {recommended} +/- 2.")
    return table, recommended, note
