"""Sentiment of a study question's verbatims, stored as two closed variables the rest of oecode already uses.

`<question>_sentiment` (single: 1 negative, 2 neutral, 3 positive; 9 not scored, a missing code) works as
a banner, a drivers outcome, a desk search (`<question>_sentiment=negative`) and an export column;
`<question>_sentiment_score` (numeric, the compound score -1..1) as an outcome or an export column.
Respondents without a verbatim, and non-answers, get no value.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import metadata

import numpy as np

from opencode.analysis.sentiment.scorer import CATEGORY_LABELS, DEFAULT_CUT, NOT_SCORED, SentimentScorer
from opencode.analysis.tables import coded_data
from opencode.analysis.tables.crosstab import BannerVariable, SurveyWeight
from opencode.analysis.tables.mix import MixTable, row_mix
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.text.study_text import get_lexicon

SETTING_PREFIX = "sentiment:"


def category_name(question: str) -> str:
    """The name of the stored negative / neutral / positive variable."""
    return f"{question}_sentiment"


def score_name(question: str) -> str:
    """The name of the stored compound-score variable."""
    return f"{question}_sentiment_score"


@dataclass(frozen=True)
class SentimentRun:
    """What one scoring run stored, and the counts to show the user."""

    question: str
    language: str
    cut: float
    by_sentence: bool
    n_verbatims: int
    n_nonanswers: int
    counts: dict[str, int]
    not_scored: dict[str, int]
    mean_compound: float
    variables: tuple[str, str]


def score_question(study: Study, question: str, *, cut: float = DEFAULT_CUT, by_sentence: bool = True,
                   language: str | None = None, actor: str = "oecode") -> SentimentRun:
    """Score every answered verbatim of a question and store the two variables (replacing earlier ones).

    The language is the question's lexicon language unless given; a language without a sentiment lexicon is
    refused with a clear message before anything is written.
    """
    language = language or get_lexicon(study, question).language
    scorer = SentimentScorer(language=language, cut=cut, by_sentence=by_sentence)
    frame = survey_data.verbatims(study, question)
    answered = frame[~frame["nonanswer"]]
    scores = scorer.score(answered["text"].tolist())
    keys = survey_data.respondent_keys(study)
    rows = {key: i for i, key in enumerate(keys)}
    at = np.array([rows[k] for k in answered["respondent"]], dtype=int)
    category = np.full(len(keys), np.nan)
    compound = np.full(len(keys), np.nan)
    category[at] = scores.category
    compound[at] = scores.compound
    version = metadata.version("vaderSentiment")
    settings = {"cut": cut, "by_sentence": by_sentence, "language": language, "method": f"vaderSentiment {version}"}
    q_label = survey_data.get_question(study, question).label or question
    with study.transaction():
        survey_data.add_derived_variable(
            study, category_name(question), f"{q_label}: sentiment (VADER compound, cut +-{cut:g})", category,
            value_labels=dict(CATEGORY_LABELS), missing_codes=[NOT_SCORED], action="add-sentiment",
            details=settings, actor=actor)
        survey_data.add_derived_variable(
            study, score_name(question), f"{q_label}: sentiment score (VADER compound, -1 to 1)", compound,
            kind="numeric", role="other", action="add-sentiment", details=settings, actor=actor)
        study.set_setting(SETTING_PREFIX + question, settings, actor=actor)
    counts = {CATEGORY_LABELS[code]: int((scores.category == code).sum()) for code in CATEGORY_LABELS}
    reasons: dict[str, int] = {}
    for reason in scores.reason:
        if reason:
            reasons[reason] = reasons.get(reason, 0) + 1
    finite = scores.compound[np.isfinite(scores.compound)]
    return SentimentRun(question, language, cut, by_sentence, len(answered), int(frame["nonanswer"].sum()), counts,
                        reasons, float(finite.mean()) if finite.size else float("nan"),
                        (category_name(question), score_name(question)))


def format_run(run: SentimentRun) -> str:
    """A few lines saying what was scored and stored."""
    total = max(run.n_verbatims, 1)
    mix = ", ".join(f"{label} {n:,} ({100 * n / total:.1f}%)" for label, n in run.counts.items())
    lines = [f"Sentiment of {run.question}: {run.n_verbatims:,} verbatims scored with VADER (Hutto & Gilbert 2014)"
             f"{' sentence by sentence' if run.by_sentence else ''}; {run.n_nonanswers:,} non-answers left out",
             f"  {mix}",
             f"  cut points: positive at compound >= +{run.cut:g}, negative at <= -{run.cut:g} (the package's "
             "documented threshold at 0.05)",
             f"  mean compound score {run.mean_compound:+.3f}"]
    for reason, n in run.not_scored.items():
        lines.append(f"  not scored: {n:,} ({reason})")
    lines.append(f"stored: {run.variables[0]} (negative / neutral / positive; use as a banner, a drivers outcome, a "
                 f"desk search such as {run.variables[0]}=negative, an export column) and {run.variables[1]}")
    lines.append("note: a lexicon score misses sarcasm, domain words and mixed verbatims; read some verbatims of "
                 "each category before reporting it")
    return "\n".join(lines)


def sentiment_settings(study: Study, question: str) -> dict | None:
    """The settings of the question's stored scores, or None if it has not been scored."""
    stored = study.get_setting(SETTING_PREFIX + question)
    return dict(stored) if stored else None


def sentiment_banner(study: Study, question: str) -> BannerVariable:
    """The stored category variable as a BannerVariable; a clear error when the question was not scored."""
    if sentiment_settings(study, question) is None:
        raise OpenCodeError(f"question {question!r} has no sentiment scores yet; run: oecode sentiment score STUDY "
                            f"--question {question}")
    return coded_data.banner_variable(study, category_name(question))


def question_mix(study: Study, question: str, *, coder: str = FINAL, include_suggestions: bool = False,
                 weight: str | None = None, unweighted: bool = False) -> MixTable:
    """The sentiment mix per code and net of a question (row % negative / neutral / positive, mean score)."""
    variable = sentiment_banner(study, question)
    coding = coded_data.load_coding(study, question, coder, include_suggestions=include_suggestions)
    survey_weight: SurveyWeight | None = None if unweighted else coded_data.survey_weight(study, weight)
    score = survey_data.analysis_values(study, score_name(question))
    return row_mix(coded_data.table_question(coding), variable, survey_weight, score=score, score_label="mean score")


def sentiment_report_section(study: Study, question: str, *, coder: str = FINAL, include_suggestions: bool = False,
                             weight: str | None = None, unweighted: bool = False) -> str:
    """The report's sentiment section for a question ('' when the question has not been scored)."""
    from opencode.analysis.sentiment.report import mix_section_html

    settings = sentiment_settings(study, question)
    if settings is None:
        return ""
    table = question_mix(study, question, coder=coder, include_suggestions=include_suggestions, weight=weight,
                         unweighted=unweighted)
    return mix_section_html(table, settings)
