"""Code frequencies and banner tables of one study question (the library under `oecode tables`)."""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from opencode.analysis.tables import coded_data
from opencode.analysis.tables.output import TABLE_CSS, to_html, write_csv, write_xlsx
from opencode.analysis.tables.crosstab import (BannerTable, BannerVariable, FrequencyTable, SurveyWeight, banner_table,
                                      code_frequencies)
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.files.safe_write import atomic_open
from opencode.study.store import Study
from opencode.analysis.choices import TABLE_SUFFIXES  # noqa: F401  (the files tables are written as)



@dataclass
class QuestionTables:
    """A question's frequency table, its banner table (if banners were asked for) and the warnings to show."""

    frequencies: FrequencyTable
    banner: BannerTable | None
    warnings: list[str] = field(default_factory=list)

    @property
    def tables(self) -> list:
        """Every table made, frequencies first."""
        return [self.frequencies] + ([self.banner] if self.banner is not None else [])

    def to_frame(self) -> pd.DataFrame:
        """Frequencies, one row per code and net; with banners, a share column per banner column too."""
        f = self.frequencies
        table = pd.DataFrame({"kind": [r.kind for r in f.rows], "code": [r.number for r in f.rows],
                              "label": [r.label for r in f.rows], "count": f.count,
                              "weighted_count": f.weighted_count, "share_of_respondents": f.respondent_share,
                              "mentions": f.mentions, "share_of_mentions": f.mention_share})
        table.attrs["base"] = f.base.n
        if self.banner is not None:
            for j, column in enumerate(self.banner.columns):
                name = column.label if column.variable is None else f"{column.variable}={column.label}"
                table[f"share: {name}"] = self.banner.column_share[:, j]
        return table

    def to_full_frame(self) -> pd.DataFrame:
        """to_frame plus the intervals (when asked for), each banner column's letters and each banner
        variable's row test q: every number the text tables show, for scripts."""
        table = self.to_frame()
        f = self.frequencies
        if f.show_intervals and f.ci_low is not None:
            table["ci_low"], table["ci_high"] = f.ci_low, f.ci_high
        if self.banner is not None:
            b = self.banner
            letters = b.letters()
            for j, column in enumerate(b.columns):
                name = column.label if column.variable is None else f"{column.variable}={column.label}"
                table[f"letters: {name}"] = letters[:, j]
                if b.show_intervals and b.ci_low is not None:
                    table[f"ci_low: {name}"], table[f"ci_high: {name}"] = b.ci_low[:, j], b.ci_high[:, j]
            for v, (variable, _) in enumerate(b.variables):
                table[f"row test q: {variable}"] = b.row_q[:, v]
        return table


def question_tables(study: Study, question: str, banners: list[str] = (), *, coder: str = FINAL,
                    include_suggestions: bool = False, weight: str | None = None, unweighted: bool = False,
                    confidence: float = 0.95, lower_confidence: float | None = None,
                    intervals: bool = False) -> QuestionTables:
    """Frequencies and (with banners) the banner table, with tests, small-base flags and warnings;
    `intervals` shows each percentage's Wilson score interval."""
    coding = coded_data.load_coding(study, question, coder, include_suggestions=include_suggestions)
    survey_weight = None if unweighted else coded_data.survey_weight(study, weight)
    banner_variables = [coded_data.banner_variable(study, name) for name in dict.fromkeys(banners)]
    return coding_tables(coding, banner_variables, survey_weight, confidence=confidence,
                         lower_confidence=lower_confidence, intervals=intervals)


def coding_tables(coding: coded_data.QuestionCoding, banners: list[BannerVariable], weight: SurveyWeight | None,
                  *, confidence: float = 0.95, lower_confidence: float | None = None,
                  intervals: bool = False) -> QuestionTables:
    """The tables of one loaded coding (shared by `oecode tables`, the demo and the report)."""
    coded = coded_data.table_question(coding)
    frequencies = code_frequencies(coded, weight, confidence=confidence)
    frequencies.show_intervals = intervals
    warnings = list(coding.notes)
    if frequencies.small_base:
        warnings.append(f"{coding.question}: base {frequencies.base.n:,} is under {frequencies.min_base}; "
                        "percentages flagged (!)")
    table = None
    if banners:
        table = banner_table(coded, banners, weight, confidence=confidence, lower_confidence=lower_confidence)
        table.show_intervals = intervals
        small = [c.label for c, flag in zip(table.columns, table.small_base & (table.base_n > 0)) if flag]
        if small:
            warnings.append(f"{coding.question}: banner columns with bases under {table.min_base} flagged (!); "
                            f"compared by Fisher's exact test, left out of the row test: {', '.join(small)}")
    return QuestionTables(frequencies, table, warnings)


def write_tables(made: list, out: str | Path) -> Path:
    """The last table as CSV, every table as XLSX sheets, or every table on one HTML page."""
    out = Path(out)
    suffix = out.suffix.lower()
    if suffix not in TABLE_SUFFIXES:
        raise OpenCodeError(f"{out}: tables are written as {', '.join(TABLE_SUFFIXES)}")
    if suffix == ".csv":
        return write_csv(made[-1], out)
    if suffix == ".xlsx":
        return write_xlsx(made, out)
    with atomic_open(out, "w") as handle:
        handle.write(f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8"><title>'
                     f"{html.escape(made[0].question_label)}</title><style>{TABLE_CSS}</style></head><body>\n"
                     + "".join(to_html(t) for t in made) + "</body></html>\n")
    return out
