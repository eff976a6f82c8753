"""The HTML report: one self-contained file (styles and charts inside) with the study, its codes and tables.

Sections: cautions, the study at a glance, then per question the code frame with example verbatims (masked
by default), the code frequencies with a bar chart, banner tables, coder agreement when given, and any
sections the caller adds (e.g. drivers or themes). Nothing refers to outside resources, so the file opens
offline and prints cleanly.
"""

from __future__ import annotations

import datetime as dt
import html
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

from opencode.version import __version__
from opencode.analysis.tables import coded_data
from opencode.analysis.agreement.core import AgreementResult
from opencode.analysis.agreement.report import format_agreement_html
from opencode.analysis.sentiment.study import sentiment_report_section
from opencode.analysis.tables.output import TABLE_CSS, to_html
from opencode.analysis.tables.study import coding_tables
from opencode.analysis.tables.crosstab import MIN_BASE
from opencode.analysis.tables.examples import example_verbatims as typical_verbatims
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.files.html_embed import png_img
from opencode.files.masking import mask_identifiers
from opencode.export.report_charts import frequency_chart_png
from opencode.files.safe_write import atomic_open, check_writable_target
from opencode.files.palette import OKABE_ITO
from opencode.study.store import Study
from opencode.study.summary import summarise

CAUTIONS = (
    "Verbatims can identify respondents. Quoted verbatims here have e-mail addresses, phone numbers and web "
    "addresses masked, but names and other details may remain: read before sharing.",
    "Machine and rule codes are suggestions until a person accepts them; unless stated, tables count confirmed "
    "(hand) codes only.",
    f"Percentages on bases under {MIN_BASE} are flagged (!): read them with caution; such banner columns are "
    "compared by Fisher's exact test only.",
    "The organisation's data-protection rules and the research codes of conduct it follows come first: "
    "they decide who may see this report and its verbatims.",
)

REPORT_CSS = f"""\
:root {{ --ink: #1d1d1d; --muted: #5a5a5a; --rule: #d8d8d8; --accent: {OKABE_ITO['blue']}; --warm: {OKABE_ITO['orange']}; }}
* {{ box-sizing: border-box; }}
body {{ font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
       color: var(--ink); background: #fbfbf9; margin: 0; line-height: 1.45; }}
main {{ max-width: 72rem; margin: 0 auto; padding: 1.5rem 2rem 3rem; background: #fff; }}
header.oc-head {{ border-bottom: 3px solid var(--accent); margin-bottom: 1rem; }}
header.oc-head h1 {{ margin: 0 0 0.2rem; font-size: 1.7rem; }}
header.oc-head p {{ margin: 0 0 0.8rem; color: var(--muted); font-size: 0.9rem; }}
h2 {{ font-size: 1.3rem; border-left: 5px solid var(--accent); padding-left: 0.5rem; margin-top: 2.2rem; }}
h3 {{ font-size: 1.05rem; margin-top: 1.4rem; }}
nav.oc-contents ol {{ columns: 2; font-size: 0.9rem; }}
nav.oc-contents a, a {{ color: var(--accent); }}
aside.oc-caution {{ border: 1px solid var(--warm); border-left: 6px solid var(--warm); background: #fff8ec;
                   padding: 0.6rem 1rem; margin: 1rem 0; font-size: 0.9rem; }}
aside.oc-caution h2 {{ border: 0; padding: 0; margin: 0 0 0.3rem; font-size: 1rem; }}
aside.oc-caution ul {{ margin: 0.2rem 0; padding-left: 1.2rem; }}
p.oc-note {{ font-size: 0.9rem; color: #7a3c00; background: #fff3e0; padding: 0.3rem 0.6rem; }}
figure.oc-chart {{ margin: 1rem 0; }}
figure.oc-chart img {{ max-width: 100%; height: auto; }}
figure.oc-chart figcaption {{ font-size: 0.8rem; color: var(--muted); }}
table.oc-frame td.oc-quote {{ font-size: 0.85em; color: var(--muted); font-style: italic; }}
table.oc-plain {{ border-collapse: collapse; font-size: 0.9em; }}
table.oc-plain th, table.oc-plain td {{ padding: 0.2em 0.5em; border-bottom: 1px solid var(--rule); text-align: left;
                                       vertical-align: top; }}
.oc-scroll {{ overflow-x: auto; }}
td.oc-undefined {{ color: var(--muted); font-style: italic; }}
footer.oc-foot {{ margin-top: 3rem; font-size: 0.8rem; color: var(--muted); border-top: 1px solid var(--rule); }}
@media print {{
  body {{ background: #fff; font-size: 10pt; }}
  main {{ max-width: none; padding: 0; }}
  nav.oc-contents {{ display: none; }}
  section.oc-question {{ break-before: page; }}
  table, figure, aside {{ break-inside: avoid; }}
  .oc-scroll {{ overflow: visible; }}
  a {{ color: inherit; text-decoration: none; }}
  @page {{ margin: 15mm 12mm; }}
}}
"""

_OUTSIDE = re.compile(r"""(?:\bsrc\s*=\s*["']?|<link\b[^>]*\bhref\s*=\s*["']?|url\(\s*["']?|@import\s+["']?)(?:https?:)?//""",
                      re.IGNORECASE)


@dataclass(frozen=True)
class ReportSection:
    """A section the caller adds: a title and an HTML fragment (trusted, must not load outside resources)."""

    title: str
    html: str


def build_report(
    study: Study,
    path: str | os.PathLike,
    *,
    questions: Sequence[str] | None = None,
    banner: Sequence[str] = (),
    coder: str = FINAL,
    include_suggestions: bool = False,
    weight: str | None = None,
    unweighted: bool = False,
    agreement: Mapping[str, AgreementResult] | None = None,
    extra_sections: Sequence[ReportSection] = (),
    quotes_per_code: int = 2,
    mask_verbatims: bool = True,
    title: str | None = None,
    notes: list[str] | None = None,
) -> Path:
    """Write the report for `questions` (default: every question with a code frame) and return its path.

    `agreement` maps a question to its coder-agreement result; `notes` (if given) collects the warnings the
    report states (suggestions included, verbatims not yet coded, small bases) for the caller to show.
    """
    target = check_writable_target(path)
    for section in extra_sections:
        if _OUTSIDE.search(section.html):
            raise OpenCodeError(f"report section {section.title!r} loads an outside resource; embed it instead")
    survey_weight = None if unweighted else coded_data.survey_weight(study, weight)
    banners = [coded_data.banner_variable(study, name) for name in dict.fromkeys(banner)]
    said: list[str] = []
    sections: list[tuple[str, str, str]] = []  # (anchor, title, html)
    for index, question in enumerate(coded_data.coded_questions(study, questions)):
        coding = coded_data.load_coding(study, question, coder, include_suggestions=include_suggestions)
        quotes = example_verbatims(study, coding, quotes_per_code, mask_verbatims)
        body, question_notes = _question_section(coding, banners, survey_weight, agreement, quotes, mask_verbatims)
        said += question_notes
        body += sentiment_report_section(study, question, coder=coder, include_suggestions=include_suggestions,
                                         weight=weight, unweighted=unweighted)
        sections.append((f"q{index + 1}", f"{question}: {coding.label}", body))
    for index, section in enumerate(extra_sections):
        sections.append((f"extra{index + 1}", section.title, section.html))
    summary = _summary_section(study, survey_weight.name if survey_weight else None)
    page = _page(title or f"Coded results: {study.path.stem}", coder, include_suggestions, summary, sections, said)
    with atomic_open(target, "w") as handle:
        handle.write(page)
    if notes is not None:
        notes.extend(said)
    return target


def _question_section(coding: coded_data.QuestionCoding, banners, weight, agreement, quotes: dict[int, list[str]],
                      mask: bool) -> tuple[str, list[str]]:
    """One question: notes, frame with example verbatims, frequencies and chart, banner table, agreement."""
    made = coding_tables(coding, banners, weight)
    frequencies, notes = made.frequencies, made.warnings
    parts = [f'<p class="oc-lead">Coder: <strong>{html.escape(coding.coder)}</strong>; base: '
             f"{frequencies.base.n:,} coded verbatims that are not non-answers; "
             f"{frequencies.non_answer.n:,} non-answers shown apart.</p>"]
    parts += [f'<p class="oc-note">{html.escape(n)}</p>' for n in notes]
    parts.append('<div class="oc-scroll">' + to_html(frequencies) + "</div>")
    img = png_img(frequency_chart_png(frequencies), f"Bar chart: % of respondents per code and net of {coding.question}",
                  css_class="oc-chart-image")
    parts.append(f'<figure class="oc-chart">{img}'
                 "<figcaption>% of respondents in the base per code; nets count a respondent once.</figcaption></figure>")
    parts.append("<h3>Code frame with example verbatims</h3>" + _frame_table(coding, quotes, mask))
    if made.banner is not None:
        parts.append('<div class="oc-scroll">' + to_html(made.banner) + "</div>")
    if agreement and coding.question in agreement:
        parts.append('<div class="oc-scroll">' + format_agreement_html(
            agreement[coding.question], title=f"Coder agreement on {coding.question}") + "</div>")
    return "\n".join(parts), notes


def example_verbatims(study: Study, coding: coded_data.QuestionCoding, per_code: int,
                      mask: bool = True) -> dict[int, list[str]]:
    """Up to `per_code` typical verbatims per code, from codes a person gave (see analysis.tables.examples)."""
    picked = typical_verbatims(study, coding, per_code)
    return {number: [mask_identifiers(e.text) if mask else e.text for e in found] for number, found in picked.items()}


def _frame_table(coding: coded_data.QuestionCoding, quotes: dict[int, list[str]], mask: bool) -> str:
    """The frame: number, label, kind, parent net, description and example verbatims."""
    rows = []
    for code in sorted(coding.codes + coding.nets, key=lambda c: c.number):
        state = "" if code.active else " (retired)"
        said = "".join(f"<div>\u201c{html.escape(q)}\u201d</div>" for q in quotes.get(code.number, []))
        rows.append(
            f"<tr><td>{code.number}</td><td>{html.escape(code.label)}{state}</td>"
            f"<td>{'net' if code.is_net else (code.special or 'code')}</td><td>{code.net or ''}</td>"
            f"<td>{html.escape(code.description)}</td><td class=\"oc-quote\">{said}</td></tr>")
    caption = "masked" if mask else "as given (not masked)"
    return ('<div class="oc-scroll"><table class="oc-plain oc-frame"><thead><tr><th>Code</th><th>Label</th>'
            "<th>Kind</th><th>Net</th><th>Description</th>"
            f"<th>Example verbatims ({caption})</th></tr></thead><tbody>" + "".join(rows) + "</tbody></table></div>")


def _summary_section(study: Study, weight_name: str | None) -> str:
    """The study at a glance: respondents, open questions and closed-ended variables."""
    summary = summarise(study)
    questions = "".join(
        f"<tr><td>{html.escape(q.name)}</td><td>{html.escape(q.label)}</td><td>{q.verbatims:,}</td>"
        f"<td>{q.nonanswers:,}</td><td>{q.coded:,}</td></tr>" for q in summary.questions)
    variables = "".join(
        f"<tr><td>{html.escape(v.name)}</td><td>{html.escape(v.label)}</td><td>{v.kind}</td><td>{v.role}</td>"
        f"<td>{html.escape('; '.join(v.value_labels.values()))}</td></tr>" for v in summary.variables)
    weighting = f"weighted by <strong>{html.escape(weight_name)}</strong>" if weight_name else "unweighted"
    return (f"<p>{summary.respondents:,} respondents; tables {weighting}.</p>"
            '<h3>Open questions</h3><div class="oc-scroll"><table class="oc-plain"><thead><tr><th>Question</th>'
            "<th>Text</th><th>Verbatims</th><th>Non-answers</th><th>Coded by anyone</th></tr></thead><tbody>"
            f"{questions}</tbody></table></div>"
            '<h3>Closed-ended variables</h3><div class="oc-scroll"><table class="oc-plain"><thead><tr><th>Variable</th>'
            "<th>Label</th><th>Kind</th><th>Role</th><th>Values</th></tr></thead><tbody>"
            f"{variables}</tbody></table></div>")


def _page(title: str, coder: str, include_suggestions: bool, summary: str, sections, notes: list[str]) -> str:
    """The whole HTML document."""
    stamp = dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    counted = "confirmed codes and machine/rule suggestions" if include_suggestions else "confirmed (hand) codes only"
    contents = "".join(f'<li><a href="#{a}">{html.escape(t)}</a></li>' for a, t, _ in sections)
    cautions = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    body = "".join(
        f'<section class="oc-question" id="{a}"><h2>{html.escape(t)}</h2>\n{b}\n</section>\n' for a, t, b in sections)
    warnings = "".join(f"<li>{html.escape(n)}</li>" for n in notes)
    warning_block = f'<aside class="oc-caution"><h2>Read first</h2><ul>{warnings}</ul></aside>' if notes else ""
    return f"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{html.escape(title)}</title>
<style>
{REPORT_CSS}
{TABLE_CSS}
</style>
</head>
<body>
<main>
<header class="oc-head"><h1>{html.escape(title)}</h1>
<p>Coder {html.escape(coder)}; counting {counted}. Made {stamp} by opencode {html.escape(__version__)}.</p></header>
<aside class="oc-caution"><h2>Cautions</h2><ul>{cautions}</ul></aside>
{warning_block}
<nav class="oc-contents"><h2>Contents</h2><ol><li><a href="#study">The study</a></li>{contents}</ol></nav>
<section id="study"><h2>The study</h2>
{summary}
</section>
{body}
<footer class="oc-foot"><p>Significance letters and bases as explained under each table.
Percentages of respondents can add past 100 because a verbatim can have several codes. Made with oecode.</p></footer>
</main>
</body>
</html>
"""
