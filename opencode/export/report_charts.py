"""Charts for the HTML report, drawn in memory as PNG bytes (the report embeds them; no file is left behind).

Every label is laid out inside the figure: labels are wrapped over lines, never cut, and each figure is saved
with a tight bounding box around everything drawn, so no label is clipped at an edge.
Marks that matter carry a shape and words, not colour alone (Okabe-Ito colours, see files/palette.py).
"""

from __future__ import annotations

import io
import textwrap
from typing import Sequence

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from opencode.analysis.tables.crosstab import FrequencyTable  # noqa: E402
from opencode.files.palette import OKABE_ITO  # noqa: E402

CODE_COLOUR = OKABE_ITO["blue"]
NET_COLOUR = OKABE_ITO["orange"]
UNDER_COLOUR = OKABE_ITO["vermillion"]
#: Characters of a label per line in a chart before it wraps.
LABEL_WRAP = 40
WIDTH_IN = 6.4
DPI = 110


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=DPI, bbox_inches="tight", pad_inches=0.08)
    plt.close(figure)
    return buffer.getvalue()


def labelled_bars_png(labels: Sequence[str], values: Sequence[float], *, nets: Sequence[bool] = (),
                      title: str = "", axis: str = "", unit: str = "%") -> bytes:
    """Horizontal bars with their labels whole (wrapped over lines, never cut) and the value at each bar's end."""
    values = np.nan_to_num(np.asarray(values, dtype=float))
    nets = list(nets) or [False] * len(values)
    wrapped = ["\n".join(textwrap.wrap(str(label), LABEL_WRAP) or [""]) for label in labels]
    lines = [w.count("\n") + 1 for w in wrapped]
    figure, ax = plt.subplots(figsize=(WIDTH_IN, 0.7 + 0.2 * sum(max(r, 1.3) for r in lines)))
    heights = np.array([max(r, 1.3) for r in lines], dtype=float)
    centres = -(np.cumsum(heights) - heights / 2)
    top = max(float(values.max(initial=0.0)), 1e-9)
    colours = [NET_COLOUR if net else CODE_COLOUR for net in nets]
    ax.barh(centres, values, height=0.9, color=colours)
    for y, value in zip(centres, values):
        ax.text(value + top * 0.01, y, f"{value:.0f}{unit}", va="center", ha="left", fontsize=8,
                color=OKABE_ITO["black"])
    ax.set_yticks(centres, wrapped, fontsize=8)
    for tick, net in zip(ax.get_yticklabels(), nets):
        if net:
            tick.set_fontweight("bold")
    ax.set_ylim(centres[-1] - heights[-1] / 2 - 0.2 if len(centres) else -1, 0.2)
    ax.set_xlim(0, top * 1.15)
    ax.spines[["top", "right"]].set_visible(False)
    ax.tick_params(axis="x", labelsize=8)
    if axis:
        ax.set_xlabel(axis, fontsize=8)
    if title:
        ax.set_title(title, fontsize=8, loc="left")
    if any(nets):
        handles = [plt.Rectangle((0, 0), 1, 1, color=NET_COLOUR), plt.Rectangle((0, 0), 1, 1, color=CODE_COLOUR)]
        ax.legend(handles, ["net (bold label)", "code"], fontsize=7, frameon=False, loc="lower right")
    return _png(figure)


def frequency_chart_png(table: FrequencyTable, top: int | None = None) -> bytes:
    """% of respondents per code and net in table order (or the `top` codes by share, nets left out)."""
    shares = np.nan_to_num(100 * np.asarray(table.respondent_share, dtype=float))
    rows = list(range(len(table.rows)))
    if top is not None:
        rows = [i for i in rows if table.rows[i].kind != "net"]
        rows = sorted(rows, key=lambda i: (-shares[i], i))[:top]
    labels = [("  " * table.rows[i].level if top is None else "") + f"{table.rows[i].number} {table.rows[i].label}"
              for i in rows]
    base = f"base {table.base.n:,}" + (f", weighted {table.base.weighted:,.1f}" if table.weighted else "")
    caution = " - small base, read with caution" if table.small_base else ""
    title = (f"Top {len(rows)} codes, " if top is not None else "") + f"{base}{caution}"
    return labelled_bars_png(labels, shares[rows], nets=[table.rows[i].kind == "net" for i in rows], title=title,
                             axis="% of respondents in the base (a respondent can have several codes)")


def agreement_chart_png(labels: Sequence[str], values: Sequence[float | None], lows: Sequence[float | None],
                        highs: Sequence[float | None], bar: float, statistic: str,
                        flagged: Sequence[bool] | None = None) -> bytes:
    """Per-code agreement with its interval against a bar: codes under the bar drawn as hollow triangles with
    "▽ under" added to their label, codes at or above it as filled circles (shape and words, not colour alone).
    `flagged` says which codes are under the bar (the agreement library's flags, judged on the low end of the
    interval); without it a code is under when its value is.
    Codes whose statistic is undefined say so in their label. Labels are the y axis, kept whole in the figure."""
    n = len(labels)
    figure, ax = plt.subplots(figsize=(WIDTH_IN, 0.75 + 0.24 * max(n, 2)))
    names = []
    lowest = 0.0
    for i, (label, value, low, high) in enumerate(zip(labels, values, lows, highs)):
        y = n - 1 - i
        name = "\n".join(textwrap.wrap(str(label), 38)[:2])
        if value is None:
            names.append(f"{name} (undefined)")
            continue
        under = bool(flagged[i]) if flagged is not None else value < bar
        names.append(f"▽ under: {name}" if under else name)
        if low is not None and high is not None:
            ax.plot([low, high], [y, y], color=OKABE_ITO["black"], linewidth=1)
            lowest = min(lowest, low)
        lowest = min(lowest, value)
        ax.plot([value], [y], marker="v" if under else "o", markersize=7,
                markerfacecolor="white" if under else CODE_COLOUR, markeredgecolor=UNDER_COLOUR if under else CODE_COLOUR,
                markeredgewidth=1.5, linestyle="none")
    ax.set_yticks(range(n - 1, -1, -1), names, fontsize=8)
    for tick, label in zip(ax.get_yticklabels(), names):
        if label.startswith("▽"):
            tick.set_fontweight("bold")
    ax.axvline(bar, color=OKABE_ITO["black"], linestyle="--", linewidth=0.8)
    ax.text(bar, n - 0.4, f" bar {bar:.2f}", fontsize=8, va="bottom", ha="left")
    ax.set_xlim(min(lowest - 0.05, 0.0), 1.04)
    ax.set_ylim(-0.7, n + 0.2)
    ax.spines[["top", "right"]].set_visible(False)
    ax.tick_params(axis="x", labelsize=8)
    ax.set_xlabel(f"{statistic} per code with its interval (● at or above the bar, ▽ under it)", fontsize=8)
    return _png(figure)
