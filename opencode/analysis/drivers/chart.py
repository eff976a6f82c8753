"""Chart of the strongest driver terms on each side: horizontal bars of model coefficients, Okabe-Ito colours."""

from __future__ import annotations

import os
import textwrap
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from opencode.errors import OpenCodeError
from opencode.files.safe_write import atomic_path
from opencode.files.palette import SIDE_A, SIDE_B


def _pyplot():
    """matplotlib's pyplot on the file-only Agg backend, imported at the first chart (it costs a command's
    start-up seconds otherwise, charts or not)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


@dataclass(frozen=True)
class ChartBars:
    """What the chart draws, bottom to top: term, coefficient, bar colour."""

    terms: list[str]
    values: list[float]
    colours: list[str]


def chart_bars(table: pd.DataFrame, n: int = 10, value: str = "coef") -> ChartBars:
    """The n terms with the most negative and the n with the most positive `value`, side 0 in SIDE_A."""
    if value not in table.columns:
        raise OpenCodeError(f"cannot chart column {value!r}; columns are {', '.join(table.columns)}")
    ordered = table.sort_values(value, kind="stable")
    low = ordered[ordered[value] < 0].head(n)
    high = ordered[ordered[value] > 0].tail(n)
    chosen = pd.concat([low, high])
    colours = [SIDE_A if v < 0 else SIDE_B for v in chosen[value]]
    return ChartBars(chosen["term"].astype(str).tolist(), chosen[value].astype(float).tolist(), colours)


def write_driver_chart(table: pd.DataFrame, path: str | os.PathLike, labels: tuple[str, str], *, n: int = 10,
                       value: str = "coef", title: str | None = None) -> Path:
    """Write a PNG of the top terms for side 0 (left, SIDE_A) and side 1 (right, SIDE_B); returns the path."""
    bars = chart_bars(table, n=n, value=value)
    if not bars.terms:
        raise OpenCodeError(f"{path}: no term has a non-zero {value}; nothing to chart")
    height = 1.2 + 0.32 * len(bars.terms)
    fig, ax = _pyplot().subplots(figsize=(7.5, height), dpi=120)
    try:
        positions = range(len(bars.terms))
        ax.barh(positions, bars.values, color=bars.colours, edgecolor="#000000", linewidth=0.4)
        ax.set_yticks(list(positions), bars.terms)
        ax.axvline(0, color="#000000", linewidth=0.8)
        # Labels wrap and the figure is saved around everything drawn, so no label is cut at an edge.
        ax.set_xlabel("\n".join(textwrap.wrap(f"{value} (log-odds, penalized model): left leans to {labels[0]}, "
                                               f"right to {labels[1]}", 80)))
        handles = [_pyplot().Rectangle((0, 0), 1, 1, color=SIDE_A), _pyplot().Rectangle((0, 0), 1, 1, color=SIDE_B)]
        ax.legend(handles, [labels[0], labels[1]], loc="lower right", frameon=False)  # empty: side 0 bars point left
        ax.set_title("\n".join(textwrap.wrap(title or f"Terms that predict {labels[1]} vs {labels[0]}", 70)))
        fig.tight_layout()
        with atomic_path(path, suffix=".png") as tmp:
            fig.savefig(tmp, format="png", bbox_inches="tight", pad_inches=0.1)
    finally:
        _pyplot().close(fig)
    return Path(path)
