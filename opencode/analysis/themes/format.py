"""Plain-text tables of theme runs, k searches, run comparisons and prevalence by group for the terminal."""

from __future__ import annotations

import textwrap

import pandas as pd

from opencode.analysis.themes.search import KSearch
from opencode.analysis.themes.summary import ThemeRun
from opencode.files.textout import format_table


def _shorten(text: str | None, width: int) -> str:
    """One line of at most `width` characters."""
    return textwrap.shorten(" ".join(str(text or "").split()), width=width, placeholder="...")


def format_themes(run: ThemeRun, n_terms: int = 8, n_verbatims: int = 2, width: int | None = None) -> str:
    """Each theme: label, share it dominates, coherence, top terms with weights, a few verbatims; fitted to
    `width` (the terminal's by default)."""
    from opencode.files.textout import output_width, wrap_text

    width = width or output_width()
    included = run.n_docs - run.n_empty
    lines = [f"{len(run.themes)} themes ({run.params.get('method', '?')}) from {included} verbatims with terms "
             f"of {run.n_docs}; {run.n_empty} empty, {run.n_unexplained} explained by no theme"]
    for theme in run.themes:
        seeded = ("  [seeded]" if theme.seed_terms else "") + ("  [catch-all]" if theme.catch_all else "")
        lines.append("")
        lines.append(wrap_text(f"{theme.index + 1:>2}. {theme.label}  {theme.n_dominant} verbatims "
                               f"({theme.share:.1%})  NPMI {theme.npmi:+.2f}  UMass {theme.umass:.2f}{seeded}", width))
        terms = ", ".join(f"{t} {w:.3f}" for t, w in zip(theme.top_terms[:n_terms], theme.top_weights[:n_terms]))
        lines.append(textwrap.fill(terms, width=width, initial_indent="    ", subsequent_indent="    "))
        for rep in theme.representatives[:n_verbatims]:
            who = rep.doc_id if rep.doc_id is not None else f"row {rep.row}"
            lines.append(f"    - [{who}] {_shorten(rep.text, max(width - 20, 20))}" if rep.text is not None
                         else f"    - [{who}] weight {rep.score:.3f}")
    lines += ["", *(wrap_text(note, width) for note in run.notes)]
    return "\n".join(lines)


def format_k_search(search: KSearch) -> str:
    """The k-selection curve as a table, the recommended k marked with '*' and each k with a catch-all theme
    marked, then the rule and why it chose k."""
    has_largest = "largest" in search.table.columns  # searches kept before the largest share was measured
    rows = []
    for row in search.table.itertuples():
        cells = ["*" if row.k == search.recommended_k else "", row.k, f"{row.npmi:+.3f}", f"{row.umass:.2f}",
                 f"{row.stability:.3f}", f"{row.unexplained:.1%}"]
        if has_largest:
            cells += [f"{row.largest:.0%}", "catch-all" if row.catch_all else ""]
        rows.append(cells + [f"{row.combined_rank:.1f}"])
    headers = ["", "k", "NPMI", "UMass", "stability", "unexplained"]
    headers += ["largest", "theme"] if has_largest else []
    align = "lrrrrr" + ("rl" if has_largest else "") + "r"
    table = format_table(headers + ["rank"], rows, align=align, note="by k")
    return "\n".join([table, "", search.note])


def format_comparison(table: pd.DataFrame) -> str:
    """The matched themes of two runs (compare_runs), best match first."""
    rows = [["" if pd.isna(row.theme_a) else int(row.theme_a) + 1, _shorten(row.label_a, 30),
             "" if pd.isna(row.theme_b) else int(row.theme_b) + 1, _shorten(row.label_b, 30), f"{row.jaccard:.2f}"]
            for row in table.itertuples()]
    return format_table(["A", "label A", "B", "label B", "Jaccard"], rows, align="rlrlr", wrap=[1, 3],
                        note="best match first (by Jaccard)")


def p_value_text(p: float) -> str:
    """A p-value for a table: files/textout.format_p ('<0.001', three decimals, '-' when not tested)."""
    from opencode.files.textout import format_p

    return format_p(p)


def format_prevalence(run: ThemeRun, width: int | None = None) -> str:
    """Theme shares by group with full group labels as column heads (wrapped), the base row, p and q (adjusted
    p), then the note; theme labels wrap in their cell; empty string when the run has no grouping."""
    prevalence = run.prevalence
    if prevalence is None:
        return ""
    groups = [str(g) for g in prevalence.shares.columns]
    rows = [["base", *(f"{int(b):,}" for b in prevalence.bases), "", ""]]
    for theme, shares, p, q in zip(run.themes, prevalence.shares.to_numpy(), prevalence.tests["p"],
                                   prevalence.tests["p_adjusted"]):
        rows.append([f"{theme.index + 1}. {theme.label}", *(f"{s:.1%}" for s in shares), p_value_text(p),
                     p_value_text(q)])
    table = format_table(["theme", *groups, "p", "q"], rows, align="l" + "r" * (len(groups) + 2), wrap=[0],
                         width=width, note="rows in theme order")
    return "\n".join([table, "", prevalence.note])
