"""What a reader needs from a theme run: top terms, dominated shares, representative verbatims, prevalence.

A ThemeRun is plain data (no fitted estimator inside), so it can be stored as JSON-safe metadata plus numpy
arrays (to_record / from_record, no pickle) and compared with another run (compare_runs).
"""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass, field
from typing import Any, Sequence

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.stats import chi2_contingency
from sklearn.preprocessing import normalize

from opencode.analysis.themes.coherence import coherence, top_term_indices
from opencode.analysis.multiple_testing import bh_adjust
from opencode.analysis.themes.stability import depth_jaccard, match_themes
from opencode.analysis.themes.finder import ThemeFinder, as_count_matrix, catch_all_limit
from opencode.errors import OpenCodeError

RECORD_FORMAT = "opencode.themes/1"
MIN_GROUP_BASE = 30  # Common practice (no published source): no tests on bases under 30.
NEAR_DUPLICATE_COSINE = 0.9


@dataclass
class Representative:
    """One verbatim that shows a theme well: its row, id, text (if given), theme weight and share."""

    row: int
    doc_id: Any
    text: str | None
    score: float
    share: float


@dataclass
class ThemeSummary:
    """One theme as a reader sees it."""

    index: int
    label: str
    top_terms: list[str]
    top_weights: list[float]
    n_dominant: int
    share: float
    npmi: float
    umass: float
    representatives: list[Representative] = field(default_factory=list)
    seed_terms: list[str] | None = None
    catch_all: bool = False


@dataclass
class Prevalence:
    """How often each theme dominates within each group of a closed-ended variable, with tests."""

    shares: pd.DataFrame  # themes x groups: share of the group's verbatims the theme dominates
    counts: pd.DataFrame  # themes x groups: verbatims dominated
    bases: pd.Series  # verbatims with terms per group
    tests: pd.DataFrame  # per theme: chi2, dof, p, p_adjusted (Benjamini-Hochberg across themes)
    tested_groups: list[str]
    note: str


@dataclass
class ThemeRun:
    """A finished theme run: parameters, themes, per-verbatim results and counts of what was left out."""

    params: dict
    terms: list[str]
    themes: list[ThemeSummary]
    components: np.ndarray
    doc_theme: np.ndarray
    dominant: np.ndarray
    included: np.ndarray
    doc_ids: np.ndarray | None
    n_docs: int
    n_empty: int
    n_unexplained: int
    min_share: float
    prevalence: Prevalence | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def empty_rows(self) -> np.ndarray:
        """Rows of verbatims with no terms after the lexicon (left out of the fit)."""
        return np.flatnonzero(~self.included)

    @property
    def unexplained_rows(self) -> np.ndarray:
        """Rows of verbatims with terms that no theme explains."""
        return np.flatnonzero((self.dominant < 0) & self.included)

    def to_record(self) -> tuple[dict, dict[str, np.ndarray]]:
        """JSON-safe metadata and numpy arrays (no object dtype, so np.savez / np.load need no pickle)."""
        meta = {
            "format": RECORD_FORMAT,
            "params": _json_safe(self.params),
            "terms": list(self.terms),
            "themes": [_json_safe(asdict(theme)) for theme in self.themes],
            "n_docs": self.n_docs, "n_empty": self.n_empty, "n_unexplained": self.n_unexplained,
            "min_share": self.min_share, "notes": list(self.notes),
            "prevalence": None if self.prevalence is None else _prevalence_record(self.prevalence),
        }
        arrays = {"components": self.components, "doc_theme": self.doc_theme,
                  "dominant": self.dominant.astype(np.int64), "included": self.included.astype(bool)}
        if self.doc_ids is not None:
            ids = np.asarray(self.doc_ids)
            arrays["doc_ids"] = ids.astype(str) if ids.dtype == object else ids
        return meta, arrays

    @classmethod
    def from_record(cls, meta: dict, arrays: dict[str, np.ndarray]) -> "ThemeRun":
        """Rebuild a run stored with to_record."""
        if meta.get("format") != RECORD_FORMAT:
            raise OpenCodeError(f"theme run record: unknown format {meta.get('format')!r}, expected {RECORD_FORMAT}")
        themes = []
        for theme in meta["themes"]:
            theme = dict(theme)
            theme["representatives"] = [Representative(**rep) for rep in theme["representatives"]]
            themes.append(ThemeSummary(**theme))
        return cls(params=meta["params"], terms=list(meta["terms"]), themes=themes,
                   components=np.asarray(arrays["components"]), doc_theme=np.asarray(arrays["doc_theme"]),
                   dominant=np.asarray(arrays["dominant"]), included=np.asarray(arrays["included"], dtype=bool),
                   doc_ids=np.asarray(arrays["doc_ids"]) if "doc_ids" in arrays else None,
                   n_docs=meta["n_docs"], n_empty=meta["n_empty"], n_unexplained=meta["n_unexplained"],
                   min_share=meta["min_share"], notes=list(meta["notes"]),
                   prevalence=None if meta["prevalence"] is None else _prevalence_from_record(meta["prevalence"]))


def _json_safe(value):
    """Numpy scalars and arrays as plain Python values; NaN as None."""
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if isinstance(value, np.ndarray):
        return _json_safe(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def _prevalence_record(prevalence: Prevalence) -> dict:
    """A Prevalence as JSON-safe lists."""
    return {"groups": [str(g) for g in prevalence.shares.columns],
            "shares": _json_safe(prevalence.shares.to_numpy()),
            "counts": _json_safe(prevalence.counts.to_numpy()),
            "bases": _json_safe(prevalence.bases.to_numpy()),
            "tests": _json_safe(prevalence.tests.to_dict(orient="list")),
            "tested_groups": list(prevalence.tested_groups), "note": prevalence.note}


def _prevalence_from_record(record: dict) -> Prevalence:
    """Inverse of _prevalence_record."""
    groups = record["groups"]
    shares = pd.DataFrame(record["shares"], columns=groups, dtype=float)
    counts = pd.DataFrame(record["counts"], columns=groups, dtype=np.int64)
    tests = pd.DataFrame(record["tests"]).astype({"chi2": float, "p": float, "p_adjusted": float})
    return Prevalence(shares=shares, counts=counts, bases=pd.Series(record["bases"], index=groups, dtype=np.int64),
                      tests=tests, tested_groups=list(record["tested_groups"]), note=record["note"])


def propose_code_label(top_labels: Sequence[str], n_words: int = 3) -> str:
    """A draft code label: a theme's top-weighted terms as they are, e.g. "no damage / engine / ce".

    Nothing is dropped for being short, a placeholder or a negation: dropping "no" can reverse what a theme
    says, and dropping "ce" loses a two-letter abbreviation that may be the theme's heart. When the lexicon
    joins negations ("negations join"), "no damage" is one term and stays together here. Only an exact repeat
    is skipped; phrase terms joined by "_" read as words.
    """
    chosen: list[str] = []
    for raw in top_labels:
        term = " ".join(str(raw).replace("_", " ").split())
        if term and term not in chosen:
            chosen.append(term)
        if len(chosen) == n_words:
            break
    return " / ".join(chosen) if chosen else "Unnamed theme"


def _normalised_text(text: str | None) -> str | None:
    """Lower case, letters and digits only, single spaces: equal strings are duplicates for a reader."""
    if text is None:
        return None
    return " ".join(re.sub(r"[\W_]+", " ", str(text).lower()).split())


def representatives(weights: np.ndarray, shares: np.ndarray, dominant: np.ndarray, theme: int,
                    unit_rows: sp.csr_matrix, n: int, texts: Sequence[str] | None = None,
                    doc_ids: Sequence | None = None) -> list[Representative]:
    """The n verbatims the theme dominates with the highest weight, skipping near-duplicates.

    A candidate is a near-duplicate of one already chosen when the cosine similarity of their term rows
    exceeds 0.9 or their normalised texts are equal.
    """
    candidates = np.flatnonzero(dominant == theme)
    if n <= 0 or candidates.size == 0:
        return []
    pool_size = min(candidates.size, max(10 * n, 50))
    scores = weights[candidates, theme]
    pool = candidates[np.argpartition(-scores, pool_size - 1)[:pool_size]] if pool_size < candidates.size else candidates
    pool = pool[np.argsort(-weights[pool, theme], kind="stable")]
    similarity = (unit_rows[pool] @ unit_rows[pool].T).toarray()
    keys = [_normalised_text(texts[row]) for row in pool] if texts is not None else [None] * pool.size
    chosen: list[int] = []
    seen_texts: set[str] = set()
    for position in range(pool.size):
        if chosen and similarity[position, chosen].max() > NEAR_DUPLICATE_COSINE:
            continue
        if keys[position] is not None and keys[position] in seen_texts:
            continue
        chosen.append(position)
        if keys[position] is not None:
            seen_texts.add(keys[position])
        if len(chosen) == n:
            break
    return [Representative(row=int(pool[p]), doc_id=None if doc_ids is None else _json_safe(doc_ids[pool[p]]),
                           text=None if texts is None else str(texts[pool[p]]),
                           score=float(weights[pool[p], theme]), share=float(shares[pool[p], theme]))
            for p in chosen]


def theme_prevalence(dominant: np.ndarray, included: np.ndarray, groups: Sequence, n_themes: int,
                     min_base: int = MIN_GROUP_BASE) -> Prevalence:
    """Share of each group's verbatims that each theme dominates, with a chi-square test per theme.

    Per theme: (theme dominates / does not) x group on verbatims with terms and a non-missing group, groups
    with a base under `min_base` left out of the test; p-values adjusted across themes with
    Benjamini-Hochberg (1995).
    """
    group_series = pd.Series(groups)
    if len(group_series) != len(dominant):
        raise OpenCodeError(f"grouping variable: {len(group_series)} values for {len(dominant)} verbatims")
    valid = included & group_series.notna().to_numpy() & (group_series.astype(str).str.strip() != "").to_numpy()
    categorical = group_series[valid].astype("category")
    labels = [str(c) for c in categorical.cat.categories]
    codes = categorical.cat.codes.to_numpy()
    themes_of = dominant[valid]
    counts = np.zeros((n_themes, len(labels)), dtype=np.int64)
    explained = themes_of >= 0
    np.add.at(counts, (themes_of[explained], codes[explained]), 1)
    bases = np.bincount(codes, minlength=len(labels)).astype(np.int64)
    shares = np.divide(counts, bases, out=np.zeros(counts.shape), where=bases > 0)
    tested = bases >= min_base
    stats = np.full((n_themes, 3), np.nan)
    if tested.sum() >= 2:
        for theme in range(n_themes):
            present = counts[theme, tested]
            table = np.vstack([present, bases[tested] - present])
            if (table.sum(axis=1) > 0).all():
                chi2, p, dof, _ = chi2_contingency(table, correction=False)
                stats[theme] = chi2, dof, p
    small = [label for label, ok in zip(labels, tested) if not ok]
    note = (f"groups with a base under {min_base} are shown but not tested: {', '.join(small)}" if small
            else "all groups tested")
    if tested.sum() < 2:
        note = f"fewer than two groups with a base of {min_base} or more: no tests"
    tests = pd.DataFrame({"theme": np.arange(n_themes), "chi2": stats[:, 0], "dof": stats[:, 1],
                          "p": stats[:, 2], "p_adjusted": bh_adjust(stats[:, 2])})
    return Prevalence(shares=pd.DataFrame(shares, columns=labels), counts=pd.DataFrame(counts, columns=labels),
                      bases=pd.Series(bases, index=labels), tests=tests,
                      tested_groups=[label for label, ok in zip(labels, tested) if ok], note=note)


def summarise(finder: ThemeFinder, counts, terms: Sequence[str], *, texts: Sequence[str] | None = None,
              doc_ids: Sequence | None = None, groups: Sequence | None = None, n_top: int = 10,
              n_representatives: int = 5) -> ThemeRun:
    """Turn a fitted ThemeFinder into a ThemeRun (top terms, shares, representatives, coherence, prevalence)."""
    matrix = as_count_matrix(counts)
    n_docs = matrix.shape[0]
    if len(terms) != matrix.shape[1]:
        raise OpenCodeError(f"term labels: {len(terms)} given for a matrix with {matrix.shape[1]} columns")
    for name, values in (("texts", texts), ("doc_ids", doc_ids)):
        if values is not None and len(values) != n_docs:
            raise OpenCodeError(f"{name}: {len(values)} values for {n_docs} verbatims")
    components = finder.components_
    term_weights = components / np.maximum(components.sum(axis=1, keepdims=True), np.finfo(float).tiny)
    top = top_term_indices(components, n_top)
    kept_counts = matrix if finder.included_.all() else matrix[finder.included_]
    npmi, umass = coherence(kept_counts, top)
    n_included = int(finder.included_.sum())
    n_dominant = np.bincount(finder.dominant_theme_[finder.dominant_theme_ >= 0], minlength=finder.n_themes)
    unit_rows = normalize(matrix)
    seeds = [list(s) for s in (finder.seed_terms or [])] if finder.method == "nmf" else []
    themes = []
    for theme in range(finder.n_themes):
        labels = [terms[j] for j in top[theme]]
        themes.append(ThemeSummary(
            index=theme, label=propose_code_label(labels), top_terms=labels,
            top_weights=[float(w) for w in term_weights[theme, top[theme]]],
            n_dominant=int(n_dominant[theme]), share=float(n_dominant[theme] / n_included),
            npmi=float(npmi[theme]), umass=float(umass[theme]),
            representatives=representatives(finder.weights_, finder.doc_theme_, finder.dominant_theme_, theme,
                                            unit_rows, n_representatives, texts, doc_ids),
            seed_terms=seeds[theme] if theme < len(seeds) else None,
            catch_all=bool(n_included and n_dominant[theme] / n_included > catch_all_limit(finder.n_themes))))
    notes = [finder.convergence_note_] if getattr(finder, "convergence_note_", "") else []
    for summary in themes:
        if summary.catch_all:
            notes.append(f"theme {summary.index + 1} ({summary.label}) holds {summary.share:.0%} of the verbatims "
                         f"with terms: a catch-all (over {catch_all_limit(finder.n_themes):.0%}). It likely lumps "
                         "unlike answers together; read its verbatims, and try a larger k or the k search")
    if finder.n_empty_:
        notes.append(f"{finder.n_empty_} of {n_docs} verbatims have no terms after the lexicon and were left out")
    if finder.n_unexplained_:
        notes.append(f"{finder.n_unexplained_} verbatims with terms are explained by no theme "
                     f"(no theme above a {finder.min_share_:.0%} share)")
    if n_included < MIN_GROUP_BASE:
        notes.append(f"small base: only {n_included} verbatims with terms; treat the themes as tentative")
    notes.append("Reading the themes and their verbatims is the final test of a theme run.")
    return ThemeRun(params=_json_safe(finder.get_params()), terms=list(terms), themes=themes,
                    components=components, doc_theme=finder.doc_theme_, dominant=finder.dominant_theme_,
                    included=finder.included_,
                    doc_ids=None if doc_ids is None else np.asarray(doc_ids), n_docs=n_docs,
                    n_empty=finder.n_empty_, n_unexplained=finder.n_unexplained_, min_share=finder.min_share_,
                    prevalence=None if groups is None else theme_prevalence(
                        finder.dominant_theme_, finder.included_, groups, finder.n_themes),
                    notes=notes)


def find_themes(counts, terms: Sequence[str], *, k: int = 10, method: str = "nmf",
                texts: Sequence[str] | None = None, doc_ids: Sequence | None = None,
                groups: Sequence | None = None, n_top: int = 10, n_representatives: int = 5,
                random_state: int | None = 0, **finder_params) -> ThemeRun:
    """Fit a ThemeFinder with k themes and summarise it: the one call behind `oecode themes`."""
    finder = ThemeFinder(method=method, n_themes=k, random_state=random_state, **finder_params)
    finder.fit(counts, terms=terms)
    return summarise(finder, counts, terms, texts=texts, doc_ids=doc_ids, groups=groups, n_top=n_top,
                     n_representatives=n_representatives)


def unexplained_verbatims(run: ThemeRun, texts: Sequence[str] | None = None) -> pd.DataFrame:
    """The verbatims with terms that no theme explains: row, id, best share and text (if given)."""
    rows = run.unexplained_rows
    return pd.DataFrame({"row": rows,
                         "doc_id": run.doc_ids[rows] if run.doc_ids is not None else rows,
                         "best_share": run.doc_theme[rows].max(axis=1, initial=0.0),
                         "text": [str(texts[r]) for r in rows] if texts is not None else [None] * rows.size})


def compare_runs(a: ThemeRun, b: ThemeRun, n_top: int = 10) -> pd.DataFrame:
    """Match the themes of two runs one to one (Hungarian) by the Jaccard index of their top-term sets.

    Themes of the larger run left without a partner appear with an empty side and Jaccard 0.
    """
    tops_a = [t.top_terms[:n_top] for t in a.themes]
    tops_b = [t.top_terms[:n_top] for t in b.themes]
    depth = min(min(len(t) for t in tops_a), min(len(t) for t in tops_b))
    vocabulary = {term: i for i, term in enumerate(dict.fromkeys(sum(tops_a + tops_b, [])))}
    ids_a = np.array([[vocabulary[t] for t in top[:depth]] for top in tops_a])
    ids_b = np.array([[vocabulary[t] for t in top[:depth]] for top in tops_b])
    jaccard = depth_jaccard(ids_a, ids_b)[:, :, -1]
    rows, cols = match_themes(jaccard)
    records = [{"theme_a": int(i), "label_a": a.themes[i].label, "theme_b": int(j), "label_b": b.themes[j].label,
                "jaccard": float(jaccard[i, j]),
                "shared_terms": ", ".join(t for t in tops_a[i][:depth] if t in set(tops_b[j][:depth]))}
               for i, j in zip(rows, cols)]
    records += [{"theme_a": int(i), "label_a": a.themes[i].label, "theme_b": None, "label_b": "",
                 "jaccard": 0.0, "shared_terms": ""} for i in sorted(set(range(len(tops_a))) - set(rows))]
    records += [{"theme_a": None, "label_a": "", "theme_b": int(j), "label_b": b.themes[j].label,
                 "jaccard": 0.0, "shared_terms": ""} for j in sorted(set(range(len(tops_b))) - set(cols))]
    table = pd.DataFrame(records)
    return table.sort_values("jaccard", ascending=False, kind="stable").reset_index(drop=True)
