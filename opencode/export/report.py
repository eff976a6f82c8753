"""The HTML report: one self-contained file (styles and charts inside) a client can read in five minutes.

It opens on one screen of summary: respondents and bases, each question's top codes as a chart, coder
agreement per code with its interval as a chart (codes under the bar marked by shape and named in words),
and themes and drivers in one line each. Cautions follow; every long part (frequencies, the frame with
example verbatims masked by default, banner tables split so none is wider than the page, agreement detail,
sections the caller adds such as themes or drivers) sits in a collapsible <details>. Nothing refers to
outside resources, so the file opens offline and prints cleanly (collapsed parts print open).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import html
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

from opencode.version import __version__
from opencode.analysis.tables import coded_data
from opencode.analysis.agreement.core import STATISTIC_LABELS, AgreementResult
from opencode.analysis.agreement.report import format_agreement_html
from opencode.analysis.agreement.verdict import KAPPA_BAR
from opencode.analysis.agreement.scale import SCALE_LABELS, ScaleAgreementResult
from opencode.analysis.sentiment.study import sentiment_report_section
from opencode.analysis.tables.output import TABLE_CSS, to_html
from opencode.analysis.tables.study import coding_tables
from opencode.analysis.tables.crosstab import MIN_BASE
from opencode.analysis.tables.examples import example_verbatims as typical_verbatims
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.files.html_embed import png_img
from opencode.files.masking import mask_identifiers
from opencode.export.report_charts import agreement_chart_png, frequency_chart_png
from opencode.files.safe_write import atomic_open, check_writable_target
from opencode.files.palette import OKABE_ITO
from opencode.study import survey_data, theme_runs_store
from opencode.study.store import Study
from opencode.study.summary import summarise

#: The kappa bar of a scale result (a nominal result carries its own bars, see analysis.agreement.verdict): above
#: 0.60 Landis & Koch (1977), Biometrics 33, read "substantial".
AGREEMENT_BAR = KAPPA_BAR
#: Codes in the summary chart of each question.
TOP_CODES = 6
#: Banner columns (Total included) per table, so a banner table fits an 800-pixel page.
BANNER_COLUMNS = 5

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
main {{ max-width: 72rem; margin: 0 auto; padding: 1rem 1.5rem 3rem; background: #fff; }}
@media (max-width: 900px) {{ main {{ padding: 0.8rem 0.8rem 2rem; }} }}
header.oc-head {{ margin-bottom: 0.4rem; }}
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
section.oc-summary {{ border-bottom: 3px solid var(--accent); padding-bottom: 0.6rem; }}
section.oc-summary h2 {{ margin-top: 0.6rem; }}
ul.oc-facts {{ margin: 0.3rem 0; padding-left: 1.2rem; font-size: 0.95rem; }}
div.oc-pair {{ display: grid; grid-template-columns: repeat(2, minmax(0, 1fr)); gap: 0 1.2rem; align-items: start; }}
@media (max-width: 900px) {{ div.oc-pair {{ grid-template-columns: minmax(0, 1fr); }} }}
div.oc-pair figure {{ margin: 0.4rem 0; min-width: 0; }}
div.oc-pair img {{ width: 100%; }}
div.oc-pair h3 {{ grid-column: 1 / -1; margin: 0.8rem 0 0; }}
p.oc-flag {{ margin: 0.2rem 0; font-size: 0.9rem; }}
p.oc-flag strong {{ border-bottom: 2px dotted var(--warm); }}
ul.oc-lines {{ list-style: none; padding: 0; margin: 0.5rem 0; font-size: 0.92rem; }}
ul.oc-lines li {{ margin: 0.15rem 0; }}
details {{ margin: 0.6rem 0; border: 1px solid var(--rule); border-radius: 4px; padding: 0.2rem 0.8rem; }}
details > summary {{ cursor: pointer; font-weight: 600; padding: 0.3rem 0; }}
details[open] > summary {{ border-bottom: 1px solid var(--rule); margin-bottom: 0.4rem; }}
table {{ max-width: 100%; }}
img {{ max-width: 100%; height: auto; }}
table.oc-table td.oc-num, table.oc-table td.oc-mark {{ white-space: nowrap; }}
table.oc-table th {{ font-weight: 600; vertical-align: bottom; }}
table td, table th {{ overflow-wrap: anywhere; }}
section.oc-agreement table {{ font-size: 0.78em; }}
section.oc-agreement table td.oc-num {{ white-space: normal; }}
section.oc-agreement table th, section.oc-agreement table td {{ padding: 0.2em 0.3em; }}
td.oc-undefined {{ color: var(--muted); font-style: italic; }}
footer.oc-foot {{ margin-top: 3rem; font-size: 0.8rem; color: var(--muted); border-top: 1px solid var(--rule); }}
@media print {{
  body {{ background: #fff; font-size: 10pt; }}
  main {{ max-width: none; padding: 0; }}
  nav.oc-contents {{ display: none; }}
  section.oc-question {{ break-before: page; }}
  table, figure, aside {{ break-inside: avoid; }}
  .oc-scroll {{ overflow: visible; }}
  details {{ border: 0; padding: 0; }}
  details > summary {{ list-style: none; }}
  a {{ color: inherit; text-decoration: none; }}
  @page {{ margin: 15mm 12mm; }}
}}
"""

_OUTSIDE = re.compile(r"""(?:\bsrc\s*=\s*["']?|<link\b[^>]*\bhref\s*=\s*["']?|url\(\s*["']?|@import\s+["']?)(?:https?:)?//""",
                      re.IGNORECASE)


@dataclass(frozen=True)
class ReportSection:
    """A section the caller adds: a title, an HTML fragment (trusted, must not load outside resources) and
    optionally one line for the summary (e.g. "Themes in why: ...")."""

    title: str
    html: str
    summary: str = ""


@dataclass
class _Part:
    """One question's pieces: its summary figures and its collapsible detail."""

    anchor: str
    title: str
    facts: str
    charts: str
    flags: str
    body: str


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
    agreement: Mapping[str, AgreementResult | ScaleAgreementResult] | None = None,
    extra_sections: Sequence[ReportSection] = (),
    quotes_per_code: int = 2,
    mask_verbatims: bool = True,
    title: str | None = None,
    notes: list[str] | None = None,
    agreement_bar: float | None = None,
) -> Path:
    """Write the report for `questions` (default: every question with a code frame) and return its path.

    `agreement` maps a question to its coder-agreement result; the codes it flags (interval reaching under its
    bars) are flagged here too. `agreement_bar` judges the results against another kappa bar. `notes` (if given) collects the warnings the report states (suggestions included, verbatims not
    yet coded, small bases) for the caller to show.
    """
    target = check_writable_target(path)
    for section in extra_sections:
        if _OUTSIDE.search(section.html):
            raise OpenCodeError(f"report section {section.title!r} loads an outside resource; embed it instead")
    survey_weight = None if unweighted else coded_data.survey_weight(study, weight)
    banners = [coded_data.banner_variable(study, name) for name in dict.fromkeys(banner)]
    said: list[str] = []
    parts: list[_Part] = []
    for index, question in enumerate(coded_data.coded_questions(study, questions)):
        coding = coded_data.load_coding(study, question, coder, include_suggestions=include_suggestions)
        quotes = example_verbatims(study, coding, quotes_per_code, mask_verbatims) if quotes_per_code > 0 else {}
        measured = (agreement or {}).get(question)
        if agreement_bar is not None and isinstance(measured, AgreementResult):
            measured = measured.with_bars(kappa_bar=agreement_bar, alpha_bar=measured.alpha_bar)
        part, question_notes = _question_part(f"q{index + 1}", coding, banners, survey_weight, measured,
                                              AGREEMENT_BAR if agreement_bar is None else agreement_bar, quotes,
                                              mask_verbatims)
        sentiment = sentiment_report_section(study, question, coder=coder, include_suggestions=include_suggestions,
                                             weight=weight, unweighted=unweighted)
        if sentiment:
            part.body += "\n" + _details("Sentiment", sentiment)
        said += question_notes
        parts.append(part)
    lines = [section.summary for section in extra_sections if section.summary]
    lines += _theme_lines(study, [p.title.split(":")[0] for p in parts], extra_sections)
    extras = [(f"extra{i + 1}", section.title, section.html) for i, section in enumerate(extra_sections)]
    summary = summarise(study)
    page = _page(title or f"Coded results: {study.path.stem}", coder, include_suggestions, summary,
                 survey_weight.name if survey_weight else None, parts, lines, extras, said)
    with atomic_open(target, "w") as handle:
        handle.write(page)
    if notes is not None:
        notes.extend(said)
    return target


def _question_part(anchor: str, coding: coded_data.QuestionCoding, banners, weight,
                   agreement: AgreementResult | ScaleAgreementResult | None,
                   bar: float, quotes: dict[int, list[str]], mask: bool) -> tuple[_Part, list[str]]:
    """One question: its summary (facts, top codes chart, agreement chart, flagged codes) and its detail."""
    made = coding_tables(coding, banners, weight)
    frequencies, notes = made.frequencies, made.warnings
    answered, non_answers = frequencies.base.n, frequencies.non_answer.n
    share = frequencies.non_answer_share
    facts = (f"<strong>{html.escape(coding.question)}</strong> ({html.escape(coding.label)}): base {answered:,} "
             f"answered verbatims coded by {html.escape(coding.coder)}; {non_answers:,} non-answers "
             f"({'-' if share != share else f'{share:.0%}'}) shown apart")
    if frequencies.small_base:
        facts += f" <strong>(small base: under {MIN_BASE}, read with caution)</strong>"
    top = png_img(frequency_chart_png(frequencies, top=TOP_CODES),
                  f"Bar chart: the {TOP_CODES} codes of {coding.question} most respondents got, as % of the base",
                  css_class="oc-chart-image")
    charts = [f'<figure class="oc-chart">{top}<figcaption>Top codes of {html.escape(coding.question)}: % of '
              "respondents in the base.</figcaption></figure>"]
    flags = ""
    if agreement is not None and not isinstance(agreement, AgreementResult):  # codes on a scale: one figure
        charts.append(f'<p class="oc-note">{html.escape(_scale_line(agreement))}</p>')
        flags = _scale_flag(agreement, coding.question, bar)
    elif agreement is not None:
        chart, flagged, statistic = _agreement_chart(agreement)
        bars = f"kappa {agreement.kappa_bar:.3f}, alpha {agreement.alpha_bar:.3f}"
        charts.append(f'<figure class="oc-chart">{chart}<figcaption>{html.escape(statistic)} per code between '
                      f"{html.escape(', '.join(agreement.coders))}, with its interval, least reliable first; dashed "
                      f"line: the kappa bar {agreement.kappa_bar:.3f} (above 0.60 Landis &amp; Koch 1977 read "
                      "substantial); ▽: the interval reaches under a bar.</figcaption></figure>")
        verdict = _agreement_verdict(agreement)
        if flagged:
            flags = (f'<p class="oc-flag">▽ <strong>Under the bar ({bars})</strong> in {html.escape(coding.question)}, '
                     "least reliable first: " + "; ".join(html.escape(f) for f in flagged) + f". {verdict} Why each "
                     "is flagged: \"Coder agreement in detail\" below.</p>")
        else:
            flags = (f'<p class="oc-flag">Every code of {html.escape(coding.question)} clears the bars ({bars}). '
                     f"{verdict}</p>")
    else:
        charts.append('<p class="oc-note">No coder agreement measured for this question (oecode agree, or '
                      "--coders with oecode report).</p>")
    body = [f'<p class="oc-lead">Coder: <strong>{html.escape(coding.coder)}</strong>; base: '
            f"{answered:,} coded verbatims that are not non-answers; {non_answers:,} non-answers shown apart.</p>"]
    body += [f'<p class="oc-note">{html.escape(n)}</p>' for n in notes]
    freq_img = png_img(frequency_chart_png(frequencies), f"Bar chart: % of respondents per code and net of "
                       f"{coding.question}", css_class="oc-chart-image")
    body.append(_details("Code frequencies, every code and net", to_html(frequencies) +
                         f'<figure class="oc-chart">{freq_img}<figcaption>% of respondents in the base per code; '
                         "nets count a respondent once.</figcaption></figure>"))
    body.append(_details("Code frame with example verbatims", _frame_table(coding, quotes, mask)))
    if made.banner is not None:
        parts = _banner_parts(made.banner)
        body.append(_details(f"Banner tables ({len(parts)})", "".join(to_html(t) for t in parts)))
    if agreement is not None:
        body.append(_details("Coder agreement in detail", format_agreement_html(
            agreement, title=f"Coder agreement on {coding.question}")))
    part = _Part(anchor, f"{coding.question}: {coding.label}", facts, "".join(charts), flags, "\n".join(body))
    return part, notes


def _details(summary: str, inner: str, opened: bool = False) -> str:
    return f"<details{' open' if opened else ''}><summary>{html.escape(summary)}</summary>{inner}</details>"


def _agreement_verdict(result: AgreementResult) -> str:
    """The agreement headline in a sentence or two: the verdict on the frame, then what to do first."""
    if result.headline is None:
        return ""
    frame = {"reliable": "The frame as a whole clears both bars.",
             "review codes": "The frame as a whole clears both bars; review the codes under the bar.",
             "not reliable yet": "The frame as a whole does not clear the bars yet.",
             "undefined": "Agreement is undefined for every code in the headline."}[result.headline.verdict]
    first = f" First: {result.advice[0]}" if result.advice else ""
    return frame + first


def _agreement_chart(result: AgreementResult) -> tuple[str, list[str], str]:
    """The per-code agreement chart (least reliable first), the flagged codes of the headline in words, and the
    statistic's name; the flags are the agreement library's (the low end of the interval against the bars)."""
    name = result.kappa_name
    statistic = STATISTIC_LABELS.get(name, name)
    labels, values, lows, highs, marks, flagged = [], [], [], [], [], []
    for standing in result.standings:
        estimate = standing.kappa
        labels.append(f"{standing.code} {standing.label}")
        values.append(estimate.value)
        lows.append(estimate.low)
        highs.append(estimate.high)
        marks.append(standing.flagged)
        if standing.flagged and standing.in_headline:
            interval = f" [{estimate.low:.3f}, {estimate.high:.3f}]" if estimate.low is not None else ""
            flagged.append(f"{standing.code} {standing.label} ({estimate.value:.3f}{interval})")  # why: below
    under = ", ".join(f"{s.code} {s.label}" for s in result.flagged) or "none"
    img = png_img(agreement_chart_png(labels, values, lows, highs, result.kappa_bar, statistic, flagged=marks),
                  f"Chart: {statistic} per code with intervals, least reliable first; under the bar: {under}",
                  css_class="oc-chart-image")
    return img, flagged, statistic


def _scale_statistic(result) -> tuple[str, object]:
    """The kappa-like statistic a scale result leads with, and its estimate."""
    for name in ("cohen_kappa_w", "fleiss_kappa_w", "conger_kappa_w", "krippendorff_alpha", "gwet_ac2"):
        if name in result.statistics:
            return name, result.statistics[name]
    name = next(iter(result.statistics))
    return name, result.statistics[name]


def _scale_line(result) -> str:
    name, estimate = _scale_statistic(result)
    value = "undefined" if estimate.value is None else f"{estimate.value:.3f}"
    interval = (f" [{estimate.low:.3f}, {estimate.high:.3f}]" if estimate.value is not None and estimate.low is not None
                and estimate.high is not None else "")
    return (f"Coder agreement on the scale ({result.level} level, {', '.join(result.coders)}): "
            f"{SCALE_LABELS.get(name, name)} {value}{interval}.")


def _scale_flag(result, question: str, bar: float) -> str:
    _, estimate = _scale_statistic(result)
    if estimate.value is not None and estimate.value < bar:
        return (f'<p class="oc-flag">▽ <strong>Under the bar ({bar:.2f})</strong> in {html.escape(question)}: the '
                f"scale as a whole ({estimate.value:.3f}). Review the scale's definitions.</p>")
    return ""


def _banner_parts(table) -> list:
    """A banner table split into tables of at most BANNER_COLUMNS columns, one banner variable (or a slice of
    one) each with the Total column repeated, so no table is wider than the page. Letters keep their meaning:
    they name columns of the same variable, shown in the same or a neighbouring table."""
    total = [i for i, c in enumerate(table.columns) if c.variable is None]
    parts = []
    for v, (name, label) in enumerate(table.variables):
        columns = [i for i, c in enumerate(table.columns) if c.variable == name]
        step = max(BANNER_COLUMNS - len(total), 1)
        chunks = [columns[i:i + step] for i in range(0, len(columns), step)]
        for k, chunk in enumerate(chunks):
            keep = total + chunk
            named = f"{table.question_label} by {label}" + (f" ({k + 1} of {len(chunks)})" if len(chunks) > 1 else "")
            parts.append(dataclasses.replace(
                table, question_label=named, columns=tuple(table.columns[i] for i in keep),
                variables=((name, label),), count=table.count[:, keep], weighted_count=table.weighted_count[:, keep],
                column_share=table.column_share[:, keep], base_n=table.base_n[keep],
                base_weighted=table.base_weighted[keep], base_effective=table.base_effective[keep],
                higher=table.higher[:, keep][:, :, keep], row_stat=table.row_stat[:, [v]],
                row_df=table.row_df[:, [v]], row_p=table.row_p[:, [v]], row_q=table.row_q[:, [v]]))
    return parts


def _theme_lines(study: Study, questions: list[str], sections: Sequence[ReportSection]) -> list[str]:
    """One line per question from its newest saved theme run, unless a section already sums its themes up."""
    given = " ".join(s.summary for s in sections)
    lines = []
    for question in questions:
        if f"Themes in {question}" in given:
            continue
        try:
            runs = theme_runs_store.run_rows(study, survey_data.get_question(study, question).id)
        except OpenCodeError:
            continue
        for run in reversed(runs):
            themes = theme_runs_store.load_run(study, run["id"]).summary.get("themes", [])
            named = [str(t.get("label") or ", ".join(map(str, t.get("top_terms", [])[:3])))
                     for t in themes if isinstance(t, dict)]
            if named:
                lines.append(f"Themes in {question} ({run['method']}, k = {run['k']}): " + "; ".join(named))
                break
    return lines


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
    return ('<table class="oc-plain oc-frame"><thead><tr><th>Code</th><th>Label</th>'
            "<th>Kind</th><th>Net</th><th>Description</th>"
            f"<th>Example verbatims ({caption})</th></tr></thead><tbody>" + "".join(rows) + "</tbody></table>")


def _page(title: str, coder: str, include_suggestions: bool, summary, weight_name: str | None, parts: list[_Part],
          lines: list[str], extras, notes: list[str]) -> str:
    """The whole HTML document: the summary screen, cautions, then the collapsible detail."""
    stamp = dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    counted = "confirmed codes and machine/rule suggestions" if include_suggestions else "confirmed (hand) codes only"
    weighting = f"weighted by <strong>{html.escape(weight_name)}</strong>" if weight_name else "unweighted"
    facts = [f"<li><strong>{summary.respondents:,}</strong> respondents; tables {weighting}; counting {counted}.</li>"]
    facts += [f"<li>{p.facts}.</li>" for p in parts]
    charts = "".join(f'<div class="oc-pair"><h3>{html.escape(p.title)}</h3>{p.charts}</div>{p.flags}' for p in parts)
    if not lines:
        lines = ["Themes and drivers: none in this report (oecode themes, oecode drivers)."]
    said = "".join(f"<li>{html.escape(line)}</li>" for line in lines)
    cautions = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    warnings = "".join(f"<li>{html.escape(n)}</li>" for n in notes)
    warning_block = f'<aside class="oc-caution"><h2>Read first</h2><ul>{warnings}</ul></aside>' if notes else ""
    contents = "".join(f'<li><a href="#{p.anchor}">{html.escape(p.title)}</a></li>' for p in parts)
    contents += "".join(f'<li><a href="#{a}">{html.escape(t)}</a></li>' for a, t, _ in extras)
    body = "".join(f'<section class="oc-question" id="{p.anchor}"><h2>{html.escape(p.title)}</h2>\n{p.body}\n'
                   "</section>\n" for p in parts)
    body += "".join(f'<section class="oc-extra" id="{a}"><h2>{html.escape(t)}</h2>{_details(t, h)}</section>\n'
                    for a, t, h in extras)
    study_html = _details("Questions and closed-ended variables", _study_tables(summary))
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
<p>Coder {html.escape(coder)}; counting {counted}. Made {stamp} by oecode {html.escape(__version__)}.</p></header>
<section class="oc-summary" id="summary"><h2>Summary</h2>
<ul class="oc-facts">{"".join(facts)}</ul>
{charts}
<ul class="oc-lines">{said}</ul>
</section>
<aside class="oc-caution"><h2>Cautions</h2><ul>{cautions}</ul></aside>
{warning_block}
<nav class="oc-contents"><h2>Contents</h2><ol><li><a href="#summary">Summary</a></li><li><a href="#study">The study</a></li>{contents}</ol></nav>
<section id="study"><h2>The study</h2>
<p>{summary.respondents:,} respondents; tables {weighting}.</p>
{study_html}
</section>
{body}
<footer class="oc-foot"><p>Significance letters and bases as explained under each table.
Percentages of respondents can add past 100 because a verbatim can have several codes. Made with oecode.</p></footer>
</main>
</body>
</html>
"""


def _study_tables(summary) -> str:
    """The open questions and closed-ended variables of the study."""
    questions = "".join(
        f"<tr><td>{html.escape(q.name)}</td><td>{html.escape(q.label)}</td><td>{q.verbatims:,}</td>"
        f"<td>{q.nonanswers:,}</td><td>{q.coded:,}</td></tr>" for q in summary.questions)
    variables = "".join(
        f"<tr><td>{html.escape(v.name)}</td><td>{html.escape(v.label)}</td><td>{v.kind}</td><td>{v.role}</td>"
        f"<td>{html.escape('; '.join(v.value_labels.values()))}</td></tr>" for v in summary.variables)
    return ('<h3>Open questions</h3><table class="oc-plain"><thead><tr><th>Question</th>'
            "<th>Text</th><th>Verbatims</th><th>Non-answers</th><th>Coded by anyone</th></tr></thead><tbody>"
            f"{questions}</tbody></table>"
            '<h3>Closed-ended variables</h3><table class="oc-plain"><thead><tr><th>Variable</th>'
            "<th>Label</th><th>Kind</th><th>Role</th><th>Values</th></tr></thead><tbody>"
            f"{variables}</tbody></table>")
