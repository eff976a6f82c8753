"""Charts for the HTML report, drawn in memory as PNG bytes (the report embeds them; no file is left behind)."""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from opencode.analysis.tables.crosstab import FrequencyTable  # noqa: E402
from opencode.files.palette import OKABE_ITO  # noqa: E402

CODE_COLOUR = OKABE_ITO["blue"]
NET_COLOUR = OKABE_ITO["orange"]


def frequency_chart_png(table: FrequencyTable, max_label: int = 42) -> bytes:
    """Horizontal bars of % of respondents per code and net (nets in their own colour), in table order."""
    shares = np.nan_to_num(100 * np.asarray(table.respondent_share, dtype=float))
    labels = [("    " * r.level) + _short(f"{r.number} {r.label}", max_label) for r in table.rows]
    colours = [NET_COLOUR if r.kind == "net" else CODE_COLOUR for r in table.rows]
    height = 0.9 + 0.26 * max(len(labels), 1)
    figure, ax = plt.subplots(figsize=(7.2, height))
    positions = np.arange(len(labels))[::-1]
    ax.barh(positions, shares, color=colours, height=0.7)
    ax.set_yticks(positions, labels, fontsize=8)
    for y, value in zip(positions, shares):
        ax.text(value + 0.5, y, f"{value:.0f}%", va="center", fontsize=7, color=OKABE_ITO["black"])
    ax.set_xlim(0, max(10.0, float(shares.max(initial=0)) * 1.15))
    ax.set_xlabel("% of respondents in the base (a respondent can have several codes)", fontsize=8)
    ax.tick_params(axis="x", labelsize=7)
    ax.spines[["top", "right"]].set_visible(False)
    base = f"base {table.base.n:,}" + (f", weighted {table.base.weighted:,.1f}" if table.weighted else "")
    caution = " - small base, read with caution" if table.small_base else ""
    ax.set_title(f"{base}{caution}", fontsize=8, loc="left")
    handles = [plt.Rectangle((0, 0), 1, 1, color=NET_COLOUR), plt.Rectangle((0, 0), 1, 1, color=CODE_COLOUR)]
    ax.legend(handles, ["net", "code"], fontsize=7, frameon=False, loc="lower right")
    figure.tight_layout()
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110)
    plt.close(figure)
    return buffer.getvalue()


def _short(text: str, limit: int) -> str:
    """Cut a label to `limit` characters with an ellipsis."""
    return text if len(text) <= limit else text[: limit - 1] + "\u2026"
