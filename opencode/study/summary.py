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


def summary_records(summary: StudySummary) -> list[dict]:
    """The summary as one table for scripts: a row per open question, then a row per closed-ended variable
    (`what` says which), with every field."""
    rows = [{"what": "open question", "name": q.name, "label": q.label, "verbatims": q.verbatims,
             "nonanswers": q.nonanswers, "coded": q.coded} for q in summary.questions]
    for v in summary.variables:
        rows.append({"what": "closed-ended variable", "name": v.name, "label": v.label, "kind": v.kind,
                     "role": v.role, "missing_codes": "; ".join(_plain(c) for c in sorted(v.missing_codes)),
                     "values": "; ".join(f"{_plain(code)}={text}" for code, text in v.value_labels.items())})
    return rows


def format_summary(summary: StudySummary, width: int | None = None) -> str:
    """The summary as plain text for the terminal: two tables fitted to `width` (labels and value lists wrap)."""
    from opencode.files.textout import format_table

    questions = [[q.name, f"{q.verbatims:,}", f"{q.nonanswers:,}",
                  f"{100 * q.nonanswers / q.verbatims if q.verbatims else 0:.1f}%", f"{q.coded:,}", q.label]
                 for q in summary.questions]
    variables = []
    for v in summary.variables:
        missing = ", ".join(_plain(c) for c in sorted(v.missing_codes))
        head = " ".join(part for part in (v.label, f"[missing: {missing}]" if missing else "") if part)
        parts = [head] if head else []
        if v.value_labels:
            parts.append("values: " + "; ".join(f"{_plain(code)}={text}" for code, text in v.value_labels.items()))
        variables.append([v.name, v.kind, v.role, "; ".join(parts)])
    return "\n".join([
        f"study {summary.path}: {summary.respondents:,} respondents", "",
        format_table(["open question", "verbatims", "non-answers", "%", "coded", "label"], questions,
                     align="lrrrrl", wrap=[5], width=width, stub=1),
        "",
        format_table(["closed-ended variable", "kind", "role", "label"], variables, align="llll", wrap=[3],
                     width=width, stub=1),
    ])


def _plain(code: float) -> str:
    return str(int(code)) if float(code).is_integer() else str(code)
