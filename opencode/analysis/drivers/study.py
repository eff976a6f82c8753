"""Drivers of a study question: which of its terms predict a closed-ended outcome, with the outcome, survey
weights and verbatims lined up by respondent, plus the chart, the report fragment and term indicator variables.

Rows analysed are the respondents whose verbatim is an answer (not a non-answer) with at least one term left
after the lexicon, and whose outcome falls on a side of the split. Everything left out is counted in the notes.
"""

from __future__ import annotations

import html
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd
from sklearn.model_selection import train_test_split

from opencode.analysis.tables import coded_data
from opencode.analysis.drivers.chart import write_driver_chart
from opencode.analysis.drivers.ranker import DriverRanker, format_ranking_table, term_indicators
from opencode.analysis.drivers.outcome import Outcome, make_outcome, one_vs_rest as outcome_per_category
from opencode.errors import OpenCodeError
from opencode.files.html_embed import png_img
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.text.matrix import TermMatrix
from opencode.text.study_text import term_matrix

#: Study setting holding the outcome and split last used for a question's drivers ("drivers:<question>").
SETTING_PREFIX = "drivers:"
#: Terms per side in the report fragment and the chart.
TOP_PER_SIDE = 10


@dataclass
class DriverComparison:
    """One outcome comparison (a split, or one category against the rest) and the ranker fitted to it."""

    outcome: Outcome
    ranker: DriverRanker
    table: pd.DataFrame
    notes: list[str] = field(default_factory=list)

    @property
    def title(self) -> str:
        return f"{self.outcome.labels[1]} vs {self.outcome.labels[0]}"


@dataclass
class StudyDrivers:
    """Drivers of one question against one outcome variable: the comparisons, the matrix and what was left out."""

    question: str
    outcome_variable: str
    comparisons: list[DriverComparison]
    tm: TermMatrix
    n_verbatims: int
    n_nonanswers: int
    n_no_terms: int
    weight: str | None
    notes: list[str] = field(default_factory=list)

    @property
    def first(self) -> DriverComparison:
        return self.comparisons[0]

    @property
    def ranker(self) -> DriverRanker:
        """The ranker of the (first) comparison."""
        return self.first.ranker

    @property
    def outcome(self) -> Outcome:
        return self.first.outcome

    @property
    def table(self) -> pd.DataFrame:
        return self.first.table

    def to_frame(self) -> pd.DataFrame:
        """Every comparison's ranked terms in one table, with a `comparison` column naming the comparison."""
        return pd.concat([c.table.assign(comparison=c.title) for c in self.comparisons], ignore_index=True)


# -- the outcome and weights lined up with the matrix ---------------------------------------------------------------
def _outcome_variable(study: Study, name: str) -> survey_data.Variable:
    """The outcome variable; it must be a single-choice or numeric closed-ended item."""
    variable = survey_data.get_variable(study, name)
    if variable.kind not in ("single", "numeric"):
        raise OpenCodeError(f"{study.path}: outcome {name!r} is a {variable.kind} variable; drivers need a "
                            "closed-ended single-choice or numeric outcome")
    return variable


def _rows_of(study: Study, keys: list[Any]) -> np.ndarray:
    """Positions in the study's respondent order of the given respondent keys."""
    return pd.Index(survey_data.respondent_keys(study)).get_indexer(pd.Index(keys))


def _weights(study: Study, rows: np.ndarray, weighted: bool) -> tuple[np.ndarray | None, str | None]:
    weight = coded_data.survey_weight(study) if weighted else None
    if weight is None:
        return None, None
    return np.asarray(weight.values, dtype=float)[rows], weight.name


def _fit(X, y, w, terms, labels, ranker: DriverRanker, holdout: float, random_state: int) -> DriverRanker:
    """Fit on all rows, or on a stratified share and score the rest as held-out verbatims."""
    if not holdout:
        return ranker.fit(X, y, w, terms=terms, labels=labels)
    if not 0.0 < holdout < 1.0:
        raise OpenCodeError(f"holdout {holdout}: give a share between 0 and 1, e.g. 0.2")
    rows = np.arange(len(y))
    try:
        train, test = train_test_split(rows, test_size=holdout, stratify=y, random_state=random_state)
    except ValueError as error:
        raise OpenCodeError(f"cannot hold out {holdout:.0%} of {len(y)} verbatims on both sides ({error})") from None
    ranker.fit(X[train], y[train], None if w is None else w[train], terms=terms, labels=labels)
    ranker.score_holdout(X[test], y[test], None if w is None else w[test])
    return ranker


def _exclusion_notes(outcome: Outcome, variable: survey_data.Variable) -> list[str]:
    notes = []
    if outcome.n_missing_code:
        codes = ", ".join(variable.display(c) for c in sorted(variable.missing_codes))
        notes.append(f"{outcome.n_missing_code} left out: outcome {variable.name!r} is a missing code ({codes})")
    if outcome.n_empty:
        notes.append(f"{outcome.n_empty} left out: no answer to {variable.name!r}")
    if outcome.n_outside_split:
        notes.append(f"{outcome.n_outside_split} left out: answer on neither side of the split")
    return notes


def question_drivers(study: Study, question: str, outcome: str, *, split: str | None = None,
                     one_vs_rest: bool = False, penalty: str = "l2", scoring: str = "auc",
                     class_weight: str | None = None, weighted: bool = True, min_df: int = 5,
                     holdout: float = 0.0, n_subsamples: int = 50, random_state: int = 0,
                     progress: Callable[[int, int], None] | None = None) -> StudyDrivers:
    """Rank a question's terms by how they predict an outcome (a split of it, or each category against the rest).

    progress(done, total) counts steps: the term matrix, then one per comparison fitted.
    """
    if one_vs_rest and split:
        raise OpenCodeError("give a split or one-vs-rest, not both")
    variable = _outcome_variable(study, outcome)
    outcome_args = dict(variable=outcome, value_labels=variable.value_labels, missing_codes=variable.missing_codes)

    def sides(codes: np.ndarray) -> list:
        if one_vs_rest:
            return list(outcome_per_category(codes, **outcome_args).values())
        return [make_outcome(codes, split=split, **outcome_args)]

    all_codes = np.array(survey_data.raw_values(study, outcome), dtype=float)
    sides(all_codes)  # a bad split is refused before the term matrix is built or cached: the study stays as it was
    tm, frame = term_matrix(study, question, min_df=min_df)
    has_terms = np.diff(tm.counts.indptr) > 0
    X_all = tm.counts[has_terms]
    rows = _rows_of(study, [d for d, keep in zip(tm.doc_ids, has_terms) if keep])
    weights, weight_name = _weights(study, rows, weighted)
    outcomes = sides(all_codes[rows])
    total = 1 + len(outcomes)
    if progress:
        progress(1, total)
    n_nonanswers = int(frame["nonanswer"].sum())
    notes = []
    if n_nonanswers:
        notes.append(f"{n_nonanswers} of {len(frame)} verbatims are non-answers and were left out")
    if (~has_terms).sum():
        notes.append(f"{int((~has_terms).sum())} verbatims have no term left after the lexicon (min_df={min_df}) "
                     "and were left out")
    comparisons = []
    for step, side in enumerate(outcomes, start=2):
        X, y = X_all[side.mask], side.y
        w = None if weights is None else weights[side.mask]
        comparison_notes = _exclusion_notes(side, variable)
        if w is not None and not np.isfinite(w).all():
            keep = np.isfinite(w)
            comparison_notes.append(f"{int((~keep).sum())} left out: no survey weight ({weight_name!r})")
            X, y, w = X[keep], y[keep], w[keep]
        ranker = DriverRanker(penalty, scoring=scoring, class_weight=class_weight, n_subsamples=n_subsamples,
                              random_state=random_state)
        try:
            _fit(X, y, w, tm.terms, side.labels, ranker, holdout, random_state)
        except OpenCodeError as error:
            raise OpenCodeError(f"question {question!r}, outcome {outcome!r} ({side.labels[1]} vs "
                                f"{side.labels[0]}): {error}") from None
        comparison_notes += list(dict.fromkeys(list(side.warnings) + ranker.warnings_))
        if ranker.quality_note_:
            comparison_notes.append(ranker.quality_note_)
        comparisons.append(DriverComparison(side, ranker, _with_labels(ranker.ranking_, tm), comparison_notes))
        if progress:
            progress(step, total)
    if weight_name:
        notes.append(f"weighted by {weight_name!r} in the model (2x2 tests use unweighted counts)")
    return StudyDrivers(question, outcome, comparisons, tm, len(frame), n_nonanswers, int((~has_terms).sum()),
                        weight_name, notes)


def _with_labels(table: pd.DataFrame, tm: TermMatrix) -> pd.DataFrame:
    """A ranking table with each term's most frequent word form beside it."""
    label = table["term"].map(dict(zip(tm.terms, tm.labels)))
    return table.assign(label=label)[["term", "label"] + [c for c in table.columns if c != "term"]]


#: Columns where a smaller value is the stronger result, so they sort smallest first unless told otherwise.
SMALL_FIRST = ("p", "q", "term", "label", "direction")


def sorted_table(result: StudyDrivers, comparison: DriverComparison, sort_by: str = "stability",
                 ascending: bool | None = None) -> pd.DataFrame:
    """A comparison's table sorted by any column (ties broken by the strength of evidence, as in the ranker).

    ascending None: smallest first for p, q and names, largest first for everything else.
    """
    if ascending is None:
        ascending = sort_by in SMALL_FIRST
    if sort_by == "label":
        return comparison.table.sort_values("label", ascending=ascending, kind="stable").reset_index(drop=True)
    return _with_labels(comparison.ranker.ranking(sort_by, ascending=ascending), result.tm)


def quality_lines(comparison: DriverComparison) -> list[str]:
    """How well the text predicts the outcome: cross-validated AUC with its CI, log-loss, held-out scores."""
    ranker, (zero, one) = comparison.ranker, comparison.outcome.labels
    low, high = ranker.cv_auc_ci_
    lines = [f"{one} (n={ranker.class_counts_[1]}) vs {zero} (n={ranker.class_counts_[0]}): penalty "
             f"{ranker.penalty} C={ranker.C_:.3g}; cross-validated AUC {ranker.cv_auc_:.3f} (95% CI {low:.3f} to "
             f"{high:.3f}), log-loss {ranker.cv_log_loss_:.3f}"]
    held = getattr(ranker, "holdout_", None)
    if held:
        lines.append(f"held-out verbatims (n={held['n']}): AUC {held['auc']:.3f} (95% CI {held['auc_ci'][0]:.3f} "
                     f"to {held['auc_ci'][1]:.3f}), log-loss {held['log_loss']:.3f}")
    return lines


def format_drivers(result: StudyDrivers, *, sort_by: str = "stability", ascending: bool | None = None,
                   n: int = 20, force: bool = False, wide: bool = False, width: int | None = None) -> str:
    """Plain-text drivers for the terminal: notes, then per comparison its quality, notes and top n rows.

    When the text barely predicts the outcome the table is left out (force=True prints it anyway).
    """
    lines = [f"drivers of {result.outcome_variable} in {result.question}: {result.n_verbatims} verbatims"]
    lines += [f"note: {note}" for note in result.notes]
    for comparison in result.comparisons:
        lines += [""] + quality_lines(comparison) + [f"note: {note}" for note in comparison.notes]
        if comparison.ranker.quality_note_ and not force:
            continue
        order = ascending if ascending is not None else sort_by in SMALL_FIRST
        shown = min(n, len(comparison.table))
        note = (f"top {shown} of {len(comparison.table):,} terms, sorted by {sort_by} "
                f"({'smallest' if order else 'largest'} first)")
        lines.append(format_ranking_table(sorted_table(result, comparison, sort_by, ascending).head(n), "label",
                                          sides=list(comparison.outcome.labels), wide=wide, note=note,
                                          width=width))
    lines.append("side: the outcome the term leans to in the penalized model; OR [95% CI]: odds ratio of the "
                 "term's 2x2 table (verbatims mentioning it on side 1 against side 0) with its 95% interval; "
                 "q: that table's test, Benjamini-Hochberg adjusted; n1/n0: verbatims with the term on each side; "
                 "stab: share of half-sample fits selecting the term"
                 + ("; coef/model OR: penalized model; z: Monroe et al. log-odds z" if wide else
                    " (--wide adds the model's coefficient and odds ratio and the Monroe et al. z)"))
    return "\n".join(lines)


# -- the question's remembered choice ------------------------------------------------------------------------------
def remember_choice(study: Study, question: str, outcome: str, *, split: str | None = None,
                    one_vs_rest: bool = False, actor: str = "oecode") -> None:
    """Store the outcome and split used for a question's drivers, so the desk shows the same ranking."""
    survey_data.get_question(study, question)
    study.set_setting(SETTING_PREFIX + question, {"outcome": outcome, "split": split, "one_vs_rest": one_vs_rest},
                      actor=actor)


def drivers_choice(study: Study, question: str) -> dict | None:
    """The stored choice for a question, else the first variable with role outcome (split 'top2' on a scale)."""
    stored = study.get_setting(SETTING_PREFIX + question)
    if stored:
        return dict(stored)
    outcomes = survey_data.list_variables(study, role="outcome")
    if not outcomes:
        return None
    variable = outcomes[0]
    valid = [c for c in variable.value_labels if c not in variable.missing_codes]
    if not valid:
        values = survey_data.analysis_values(study, variable.name)
        valid = np.unique(values[np.isfinite(values)]).tolist()
    return {"outcome": variable.name, "split": None if len(valid) <= 2 else "top2", "one_vs_rest": False}


# -- outputs -------------------------------------------------------------------------------------------------------
def _chart_title(result: StudyDrivers, comparison: DriverComparison) -> str:
    return f"{result.question}: drivers of {result.outcome_variable} ({comparison.outcome.labels[1]})"


def drivers_chart(result: StudyDrivers, path: str | os.PathLike, *, n: int = TOP_PER_SIDE) -> list[Path]:
    """PNG chart(s) of the top terms per side; one file per comparison (one-vs-rest adds '-<code>' to the name)."""
    target = Path(path)
    if len(result.comparisons) == 1:
        targets = [target]
    else:
        targets = [target.with_name(f"{target.stem}-{_code_text(c.outcome.codes[1])}{target.suffix}")
                   for c in result.comparisons]
    for comparison, out in zip(result.comparisons, targets):
        write_driver_chart(comparison.table.assign(term=comparison.table["label"]), out, comparison.outcome.labels,
                           n=n, title=_chart_title(result, comparison))
    return targets


def _code_text(codes: tuple[float, ...]) -> str:
    return "_".join(str(int(c)) if float(c).is_integer() else str(c) for c in codes)


def indicator_name(question: str, term: str) -> str:
    """The variable name for 'verbatim mentions term': <question>_t_<term>, letters, digits and _ only."""
    return f"{question}_t_" + re.sub(r"[^0-9a-zA-Z]+", "_", term).strip("_").lower()


def write_indicators(study: Study, question: str, result: StudyDrivers | None, terms: list[str],
                     actor: str = "oecode") -> list[str]:
    """Store 0/1 variables '<question>_t_<term>' (1 = the respondent's verbatim contains the term); their names.

    Terms are found by their stem, label or any word form. With no drivers result the question's full term
    matrix is used. Respondents with an answer lacking the term (or a non-answer) get 0, those without a
    verbatim get no value.
    """
    if not terms:
        raise OpenCodeError("name at least one term for the indicator variables")
    tm, frame = (result.tm, None) if result is not None else term_matrix(study, question)
    chosen = [tm.terms[tm.column(term)] for term in terms]
    flags = term_indicators(tm.counts, tm.terms, chosen).to_numpy(dtype=float)
    if frame is None:
        frame = survey_data.verbatims(study, question)
    n = survey_data.respondent_count(study)
    answered = _rows_of(study, frame["respondent"].tolist())
    matrix_rows = _rows_of(study, list(tm.doc_ids))
    names = []
    for j, term in enumerate(chosen):
        values = np.full(n, np.nan)
        values[answered] = 0.0
        values[matrix_rows] = flags[:, j]
        name = indicator_name(question, term)
        label = f"{question}: verbatim mentions {tm.labels[tm.terms.index(term)]!r}"
        survey_data.add_indicator_variable(study, name, label, values, actor=actor)
        names.append(name)
    return names


def _cell(value: Any, fmt: str) -> str:
    if fmt == "p":
        from opencode.files.textout import format_p

        return html.escape(format_p(value))
    return html.escape(fmt.format(value) if isinstance(value, (int, float, np.integer, np.floating)) else str(value))


_HTML_COLUMNS = [("label", "term", "{}"), ("odds_ratio", "odds ratio", "{:.2f}"), ("stability", "stability", "{:.2f}"),
                 ("docs_1", "verbatims, {one}", "{}"), ("docs_0", "verbatims, {zero}", "{}"), ("q", "q (BH)", "p")]


def _side_rows(comparison: DriverComparison, side: int, n: int) -> str:
    top = comparison.ranker.top_terms(side, n)
    label_of = dict(zip(comparison.table["term"], comparison.table["label"]))
    top = top.assign(label=top["term"].map(label_of))
    css = "oc-side-b" if side == 1 else "oc-side-a"
    return "".join(
        f'<tr class="{css}">' + "".join(f"<td>{_cell(row[col], fmt)}</td>" for col, _, fmt in _HTML_COLUMNS)
        + "</tr>" for _, row in top.iterrows())


def _comparison_html(comparison: DriverComparison, n: int) -> str:
    ranker, (zero, one) = comparison.ranker, comparison.outcome.labels
    low, high = ranker.cv_auc_ci_
    parts = [f"<h3>{html.escape(comparison.title)}</h3>",
             f'<p class="oc-quality">{ranker.class_counts_[1]} {html.escape(one)} and {ranker.class_counts_[0]} '
             f"{html.escape(zero)} verbatims; cross-validated AUC {ranker.cv_auc_:.3f} (95% CI {low:.3f} to "
             f"{high:.3f}), log-loss {ranker.cv_log_loss_:.3f}"
             + (f"; held-out AUC {ranker.holdout_['auc']:.3f}" if getattr(ranker, "holdout_", None) else "")
             + "</p>"]
    parts += [f'<p class="oc-note">{html.escape(note)}</p>' for note in comparison.notes]
    if ranker.quality_note_:
        return "".join(parts)
    heads = "".join(f"<th>{html.escape(h.format(one=one, zero=zero))}</th>" for _, h, _ in _HTML_COLUMNS)
    parts.append(f'<table class="oc-drivers"><thead><tr>{heads}</tr></thead><tbody>'
                 f'<tr><th colspan="{len(_HTML_COLUMNS)}">leaning to {html.escape(one)}</th></tr>'
                 f"{_side_rows(comparison, 1, n)}"
                 f'<tr><th colspan="{len(_HTML_COLUMNS)}">leaning to {html.escape(zero)}</th></tr>'
                 f"{_side_rows(comparison, 0, n)}</tbody></table>")
    return "".join(parts)


def drivers_html(result: StudyDrivers, chart: str | os.PathLike | bytes | None = None, *,
                 n: int = TOP_PER_SIDE, heading: bool = True) -> str:
    """An HTML <section> for the report: the top terms per side, the notes, and the chart embedded as base64 PNG.

    `heading=False` leaves out the section's own title (for a report that titles its sections itself).
    """
    parts = ['<section class="oc-drivers-section">']
    if heading:
        parts.append(f"<h2>Drivers of {html.escape(result.outcome_variable)} in {html.escape(result.question)}</h2>")
    parts += [f'<p class="oc-note">{html.escape(note)}</p>' for note in result.notes]
    parts += [_comparison_html(c, n) for c in result.comparisons]
    if chart is not None:
        parts.append(png_img(chart, "chart of the driver terms"))
    parts.append('<p class="oc-caption">Odds ratio from the penalized model (verbatims mentioning the term); '
                 "stability: share of half-sample fits selecting the term; q: Benjamini-Hochberg adjusted p of "
                 "the term's 2x2 table.</p></section>")
    return "".join(parts)
