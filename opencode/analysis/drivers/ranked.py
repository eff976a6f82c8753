"""The drivers in a few lines for a screen: the top terms on each side of the question's chosen outcome.

Reads the outcome `oecode drivers` stored for the question (else the variable with role outcome), fits the
ranking on the study's cached term matrix, and returns rows to show with the model's quality line, or no
rows and a sentence saying why there are none.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

from opencode.analysis.drivers import study as study_drivers
from opencode.errors import OpenCodeError
from opencode.study.store import Study

#: Driver terms shown per side.
DRIVERS_PER_SIDE = 8
NO_OUTCOME = "drivers: set a closed-ended outcome first (oecode drivers / a variable with role outcome)"


@dataclass(frozen=True)
class RankedDrivers:
    """Rows of (term as people wrote it, figure such as "+ OR 2.31") and a note on the model or on why none."""

    rows: list[tuple[str, str]] = field(default_factory=list)
    note: str = ""


def ranked_drivers(study: Study, question: str, progress: Callable[[int, int], None] | None = None,
                   n_subsamples: int = 50) -> RankedDrivers:
    """Drivers for the question's outcome; progress(done, total) as in `question_drivers`."""
    choice = study_drivers.drivers_choice(study, question)
    if choice is None:
        return RankedDrivers([], NO_OUTCOME)
    try:
        result = study_drivers.question_drivers(study, question, choice["outcome"], split=choice.get("split"),
                                                one_vs_rest=bool(choice.get("one_vs_rest")), progress=progress,
                                                n_subsamples=n_subsamples)
    except OpenCodeError as error:
        return RankedDrivers([], f"drivers against {choice['outcome']}: {error}")
    comparison = result.first
    note = "  ".join(study_drivers.quality_lines(comparison))
    if comparison.ranker.quality_note_:
        return RankedDrivers([], f"{note}\n{comparison.ranker.quality_note_}")
    rows = []
    labels = dict(zip(comparison.table["term"], comparison.table["label"]))
    for side in (1, 0):
        arrow = "+" if side == 1 else "-"
        for _, row in comparison.ranker.top_terms(side, DRIVERS_PER_SIDE).iterrows():
            rows.append((labels[row["term"]], f"{arrow} OR {row['odds_ratio']:.2f}"))
    return RankedDrivers(rows, note)
