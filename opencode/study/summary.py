"""What a study holds: questions with verbatim and non-answer counts; closed-ended variables with labels."""

from __future__ import annotations

from dataclasses import dataclass

from opencode.study import survey_data
from opencode.study.store import Study


@dataclass
class QuestionSummary:
    """One open question at a glance."""

    name: str
    label: str
    verbatims: int
    nonanswers: int
    coded: int


@dataclass
class StudySummary:
    """The whole study at a glance (what `oecode info` prints)."""

    path: str
    respondents: int
    questions: list[QuestionSummary]
    variables: list[survey_data.Variable]


def summarise(study: Study) -> StudySummary:
    """Counts per question and the closed-ended variables with kinds, labels and missing codes."""
    questions = []
    for question in survey_data.list_questions(study):
        total, nonanswers = study._db.execute(
            "SELECT COUNT(*), COALESCE(SUM(nonanswer), 0) FROM verbatims WHERE question_id = ?",
            (question.id,)).fetchone()
        coded = study._db.execute(
            "SELECT COUNT(DISTINCT a.verbatim_id) FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
            "WHERE v.question_id = ?", (question.id,)).fetchone()[0]
        questions.append(QuestionSummary(question.name, question.label, total, nonanswers, coded))
    closed = [v for v in survey_data.list_variables(study) if v.role not in ("question", "id")]
    return StudySummary(str(study.path), survey_data.respondent_count(study), questions, closed)


def format_summary(summary: StudySummary) -> str:
    """The summary as plain text for the terminal."""
    lines = [f"study {summary.path}: {summary.respondents:,} respondents", "", "open questions"]
    for q in summary.questions:
        share = 100 * q.nonanswers / q.verbatims if q.verbatims else 0
        lines.append(f"  {q.name:<16} {q.verbatims:>7,} verbatims  {q.nonanswers:>6,} non-answers ({share:4.1f}%)  "
                     f"{q.coded:>6,} coded   {q.label}")
    lines += ["", "closed-ended variables"]
    for v in summary.variables:
        missing = ", ".join(_plain(c) for c in sorted(v.missing_codes))
        lines.append(f"  {v.name:<16} {v.kind:<9} {v.role:<8} {v.label}" + (f"  [missing: {missing}]" if missing else ""))
        if v.value_labels:
            labels = "; ".join(f"{_plain(code)}={label}" for code, label in v.value_labels.items())
            lines.append(f"  {'':<16} values: {labels}")
    return "\n".join(lines)


def _plain(code: float) -> str:
    return str(int(code)) if float(code).is_integer() else str(code)
