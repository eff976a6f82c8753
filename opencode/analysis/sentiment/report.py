"""The sentiment mix per code as a chart and a table for the HTML report (one section per scored question)."""

from __future__ import annotations

import html
import io

import numpy as np

from opencode.analysis.tables.mix import MixTable
from opencode.analysis.tables.output import to_html
from opencode.files.html_embed import png_img
from opencode.files.palette import OKABE_ITO, SIDE_A, SIDE_B

#: negative / neutral / positive: the house pair for opposed sides (orange, bluish green), grey between
COLOURS = {"negative": SIDE_A, "neutral": "#BBBBBB", "positive": SIDE_B}


def mix_chart_png(table: MixTable, max_label: int = 40) -> bytes:
    """Stacked horizontal bars: each row's negative / neutral / positive shares (categories in table order)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    shares = np.nan_to_num(100 * np.asarray(table.share, dtype=float))
    labels = [(("    " * r.level) + (f"{r.number} " if r.kind != "total" else "") + r.label) for r in table.rows]
    labels = [x if len(x) <= max_label else x[: max_label - 1] + "\u2026" for x in labels]
    labels = [f"{x} (n={n:,})" + (" !" if small else "") for x, n, small in
              zip(labels, table.base_n, table.small_base & (table.base_n > 0))]
    figure, ax = plt.subplots(figsize=(7.4, 0.9 + 0.28 * max(len(labels), 1)))
    y = np.arange(len(labels))[::-1]
    left = np.zeros(len(labels))
    for k, (_, name) in enumerate(table.categories):
        colour = COLOURS.get(name, OKABE_ITO["sky_blue"])
        ax.barh(y, shares[:, k], left=left, color=colour, height=0.7, label=name)
        for yy, start, width in zip(y, left, shares[:, k]):
            if width >= 8:
                ax.text(start + width / 2, yy, f"{width:.0f}", ha="center", va="center", fontsize=7,
                        color=OKABE_ITO["black"])
        left = left + shares[:, k]
    ax.set_yticks(y, labels, fontsize=8)
    ax.set_xlim(0, 100)
    ax.set_xlabel(f"% of the respondents with the code ({table.variable})", fontsize=8)
    ax.tick_params(axis="x", labelsize=7)
    ax.spines[["top", "right"]].set_visible(False)
    ax.legend(fontsize=7, frameon=False, ncols=len(table.categories), loc="lower left", bbox_to_anchor=(0, 1.0))
    figure.tight_layout()
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110)
    plt.close(figure)
    return buffer.getvalue()


def mix_section_html(table: MixTable, settings: dict | None = None) -> str:
    """The chart and the table of a sentiment mix, with how the scores were made and their limits."""
    method = (settings or {}).get("method", "vaderSentiment")
    cut = (settings or {}).get("cut", 0.05)
    img = png_img(mix_chart_png(table), f"Stacked bars: sentiment mix per code of {table.question}",
                  css_class="oc-chart-image")
    return "\n".join([
        f'<section class="oc-sentiment"><h3>Sentiment within each code: {html.escape(table.question)}</h3>',
        f'<p class="oc-lead">Each verbatim scored with VADER (Hutto &amp; Gilbert 2014; {html.escape(method)}), '
        f"sentence by sentence; positive at a compound score of +{cut:g} or more, negative at -{cut:g} or less. "
        "A lexicon score misses sarcasm, domain words and mixed answers: read verbatims before quoting it.</p>",
        f'<figure class="oc-chart">{img}<figcaption>Row % of respondents with each code; ! base under '
        f"{table.min_base}.</figcaption></figure>",
        '<div class="oc-scroll">' + to_html(table) + "</div>",
        "</section>"])
