"""Plain-text tables of theme runs, k searches and run comparisons for the terminal."""

from __future__ import annotations

import textwrap

import pandas as pd

from opencode.analysis.theme_search import KSearch
from opencode.analysis.theme_summary import ThemeRun


def _shorten(text: str | None, width: int) -> str:
    """One line of at most `width` characters."""
    return textwrap.shorten(" ".join(str(text or "").split()), width=width, placeholder="...")


def format_themes(run: ThemeRun, n_terms: int = 8, n_verbatims: int = 2, width: int = 100) -> str:
    """Each theme: label, share it dominates, coherence, top terms with weights, a few verbatims."""
    included = run.n_docs - run.n_empty
    lines = [f"{len(run.themes)} themes ({run.params.get('method', '?')}) from {included} verbatims with terms "
             f"of {run.n_docs}; {run.n_empty} empty, {run.n_unexplained} explained by no theme"]
    for theme in run.themes:
        seeded = "  [seeded]" if theme.seed_terms else ""
        lines.append("")
        lines.append(f"{theme.index + 1:>2}. {theme.label}  {theme.n_dominant} verbatims ({theme.share:.1%})  "
                     f"NPMI {theme.npmi:+.2f}  UMass {theme.umass:.2f}{seeded}")
        terms = ", ".join(f"{t} {w:.3f}" for t, w in zip(theme.top_terms[:n_terms], theme.top_weights[:n_terms]))
        lines.append(textwrap.fill(terms, width=width, initial_indent="    ", subsequent_indent="    "))
        for rep in theme.representatives[:n_verbatims]:
            who = rep.doc_id if rep.doc_id is not None else f"row {rep.row}"
            lines.append(f"    - [{who}] {_shorten(rep.text, width - 20)}" if rep.text is not None
                         else f"    - [{who}] weight {rep.score:.3f}")
    lines += ["", *run.notes]
    return "\n".join(lines)


def format_k_search(search: KSearch) -> str:
    """The k-selection curve as a table, the recommended k marked with '*', then the explanation."""
    table = search.table
    lines = ["   k    NPMI   UMass  stability  unexplained  rank", "-" * 50]
    for row in table.itertuples():
        mark = "*" if row.k == search.recommended_k else " "
        lines.append(f"{mark}{row.k:>3}  {row.npmi:+.3f}  {row.umass:6.2f}  {row.stability:9.3f}  "
                     f"{row.unexplained:11.1%}  {row.combined_rank:4.1f}")
    return "\n".join(lines + ["", search.note])


def format_comparison(table: pd.DataFrame) -> str:
    """The matched themes of two runs (compare_runs), best match first."""
    lines = [f"{'A':>3}  {'label A':<30} {'B':>3}  {'label B':<30} {'Jaccard':>7}", "-" * 80]
    for row in table.itertuples():
        a = "" if pd.isna(row.theme_a) else int(row.theme_a) + 1
        b = "" if pd.isna(row.theme_b) else int(row.theme_b) + 1
        lines.append(f"{a!s:>3}  {_shorten(row.label_a, 30):<30} {b!s:>3}  {_shorten(row.label_b, 30):<30} "
                     f"{row.jaccard:7.2f}")
    return "\n".join(lines)


def format_prevalence(run: ThemeRun) -> str:
    """Theme shares by group with the per-theme test; empty string when the run has no grouping."""
    prevalence = run.prevalence
    if prevalence is None:
        return ""
    groups = list(prevalence.shares.columns)
    header = f"{'theme':<28}" + "".join(f"{_shorten(g, 10):>11}" for g in groups) + f"{'p adj.':>9}"
    lines = [header, f"{'base':<28}" + "".join(f"{int(b):>11}" for b in prevalence.bases) + " " * 9,
             "-" * len(header)]
    for theme, shares, p_adj in zip(run.themes, prevalence.shares.to_numpy(), prevalence.tests["p_adjusted"]):
        p_text = "    -" if pd.isna(p_adj) else f"{p_adj:9.4f}"
        lines.append(f"{_shorten(f'{theme.index + 1}. {theme.label}', 28):<28}"
                     + "".join(f"{s:>11.1%}" for s in shares) + f"{p_text:>9}")
    return "\n".join(lines + ["", prevalence.note])
