"""Theme charts as PNG: term-weight bars per theme (small multiples) and the k-selection curve."""

from __future__ import annotations

import math
import os
from pathlib import Path

from opencode.analysis.themes.search import KSearch
from opencode.analysis.themes.summary import ThemeRun
from opencode.files.safe_write import atomic_path
from opencode.files.palette import OKABE_ITO, SERIES


def _pyplot():
    """matplotlib's pyplot on the file-only Agg backend, imported at the first chart (it costs a command's
    start-up seconds otherwise, charts or not)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def _save(figure, path: str | os.PathLike) -> Path:
    """Write the figure as PNG through a temporary file and an atomic rename, then close it."""
    with atomic_path(path, suffix=".png") as tmp:
        figure.savefig(tmp, format="png", dpi=120, bbox_inches="tight")
    _pyplot().close(figure)
    return Path(path)


def plot_theme_terms(run: ThemeRun, path: str | os.PathLike, n_terms: int = 8, columns: int = 3) -> Path:
    """Small multiples: one horizontal bar chart of top-term weights per theme, titled with its draft label."""
    n_themes = len(run.themes)
    columns = max(1, min(columns, n_themes))
    rows = math.ceil(n_themes / columns)
    figure, axes = _pyplot().subplots(rows, columns, figsize=(3.4 * columns, 0.32 * n_terms * rows + 0.9 * rows),
                                squeeze=False)
    for ax, theme in zip(axes.flat, run.themes):
        terms, weights = theme.top_terms[:n_terms][::-1], theme.top_weights[:n_terms][::-1]
        ax.barh(range(len(terms)), weights, color=SERIES[theme.index % len(SERIES)])
        ax.set_yticks(range(len(terms)), terms, fontsize=8)
        ax.set_title(f"{theme.index + 1}. {theme.label}\n{theme.share:.0%} of verbatims", fontsize=9)
        ax.tick_params(axis="x", labelsize=7)
        ax.spines[["top", "right"]].set_visible(False)
    for ax in list(axes.flat)[n_themes:]:
        ax.set_visible(False)
    figure.supxlabel("term weight within theme", fontsize=9)
    figure.tight_layout()
    return _save(figure, path)


def plot_k_curve(search: KSearch, path: str | os.PathLike) -> Path:
    """NPMI coherence and stability against k, the recommended k marked."""
    table = search.table
    figure, coherence_ax = _pyplot().subplots(figsize=(6.4, 3.6))
    stability_ax = coherence_ax.twinx()
    coherence_ax.plot(table["k"], table["npmi"], marker="o", color=OKABE_ITO["blue"], label="NPMI coherence")
    stability_ax.plot(table["k"], table["stability"], marker="s", linestyle="--", color=OKABE_ITO["orange"],
                      label="stability")
    coherence_ax.axvline(search.recommended_k, color=OKABE_ITO["black"], linewidth=0.8, linestyle=":")
    coherence_ax.set_xlabel("number of themes k")
    coherence_ax.set_ylabel("mean NPMI coherence", color=OKABE_ITO["blue"])
    stability_ax.set_ylabel("stability (mean average Jaccard)", color=OKABE_ITO["orange"])
    coherence_ax.set_xticks(table["k"])
    coherence_ax.set_title(f"Choosing k: recommended k = {search.recommended_k}", fontsize=10)
    handles = coherence_ax.get_legend_handles_labels()[0] + stability_ax.get_legend_handles_labels()[0]
    coherence_ax.legend(handles, [h.get_label() for h in handles], fontsize=8, loc="lower right")
    figure.tight_layout()
    return _save(figure, path)
