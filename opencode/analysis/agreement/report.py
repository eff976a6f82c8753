"""Agreement results as terminal text, a CSV file and an HTML section; undefined values are always in words."""

from __future__ import annotations

import csv
import html
import os
from collections.abc import Sequence
from pathlib import Path

from opencode.analysis.agreement.core import ANALYTIC_SOURCES as CODE_ANALYTIC_SOURCES
from opencode.analysis.agreement.core import STATISTIC_LABELS, AgreementResult, Estimate
from opencode.analysis.agreement.scale import ANALYTIC_SOURCES, SCALE_LABELS, ScaleAgreementResult
from opencode.files.cell_guard import guard_cell
from opencode.files.safe_write import atomic_open
from opencode.files.textout import format_table

UNDEFINED = "undefined"
_PERCENT = {"percent"}


def _number(name: str, value: float | None) -> str:
    """A value as text: percentages for % agreement, three decimals otherwise, 'undefined' for None."""
    if value is None:
        return UNDEFINED
    return f"{100 * value:.1f}%" if name in _PERCENT else f"{value:.3f}"


def _with_interval(name: str, est: Estimate, analytic_interval: bool = False) -> str:
    """'0.748 [0.717, 0.778] se 0.016' (bootstrap interval, analytic standard error), or the bare value when
    there is neither; `analytic_interval` adds the analytic interval after the standard error."""
    text = _number(name, est.value)
    if est.value is not None and est.low is not None:
        text += f" [{_number(name, est.low)}, {_number(name, est.high)}]"
    if est.value is not None and est.se is not None:
        text += f" se {est.se:.3f}"
        if analytic_interval and est.se_low is not None:
            text += f" ({_number(name, est.se_low)} to {_number(name, est.se_high)})"
    return text


def _codes(codes: tuple | None) -> str:
    """A coder's code set as text: 'not coded', 'no code' or the codes."""
    if codes is None:
        return "not coded"
    return " ".join(map(str, codes)) if codes else "no code"


def _kappa_name(result: AgreementResult) -> str:
    return "cohen_kappa" if "cohen_kappa" in result.statistic_names else "fleiss_kappa"


def _summary_lines(result: AgreementResult) -> list[str]:
    per_coder = ", ".join(f"{coder} {n:,}" for coder, n in result.units_per_coder.items())
    lines = [
        f"Coders: {', '.join(result.coders)} (verbatims coded: {per_coder})",
        f"Verbatims: {result.n_units:,} coded; {result.n_pairable:,} by two or more coders (compared); "
        f"{result.n_single:,} by one coder only",
    ]
    if result.n_resamples:
        lines.append(
            f"Intervals: {100 * result.confidence:.0f}% bootstrap percentile, {result.n_resamples:,} resamples "
            f"of verbatims (seed {result.random_state})"
        )
    shown = [name for name in result.statistic_names if name in CODE_ANALYTIC_SOURCES]
    lines.append("se: analytic standard error (" + "; ".join(
        f"{STATISTIC_LABELS[name]} {CODE_ANALYTIC_SOURCES[name]}" for name in shown) + "); the CSV and HTML "
        f"give its {100 * result.confidence:.0f}% interval")
    return lines + [f"Note: {note}" for note in result.warnings]


def _standing_state(standing) -> str:
    """A code's state in the ranking, in words."""
    if standing.rank is None:
        return standing.why or UNDEFINED
    state = "under the bar" if standing.flagged else "clears the bars"
    return state + ("" if standing.in_headline else "; special code, not in the headline")


def _ranking_rows(result: AgreementResult) -> list[list[str]]:
    kappa = result.kappa_name
    return [["" if s.rank is None else str(s.rank), str(s.code), s.label, f"{s.n_mentions:,}",
             _with_interval(kappa, s.kappa), "" if s.alpha is None else _with_interval("krippendorff_alpha", s.alpha),
             _standing_state(s), s.why if s.flagged else ""] for s in result.standings]


def _ranking_headers(result: AgreementResult) -> list[str]:
    return ["rank", "code", "label", "mentions", STATISTIC_LABELS[result.kappa_name], "Krippendorff's alpha",
            "judged", "why"]


def _ranking_title(result: AgreementResult) -> str:
    basis = "the low end of each interval" if result.n_resamples else "the values themselves, without intervals"
    return (f"Codes from least to most reliable (judged on {basis}; bars: kappa {result.kappa_bar:.3f}, "
            f"alpha {result.alpha_bar:.3f})")


def _headline_lines(result: AgreementResult, special_hint: str = "") -> list[str]:
    lines = list(result.headline.lines) if result.headline else []
    if special_hint and result.special_codes:
        lines.append(special_hint)
    return lines


def _frame_rows(result: AgreementResult) -> list[list[str]]:
    return [[STATISTIC_LABELS[name], _with_interval(name, est), est.words] for name, est in result.frame.items()]


def _code_rows(result: AgreementResult, statistics: Sequence[str], analytic_interval: bool = False) -> list[list[str]]:
    kappa = _kappa_name(result)
    return [
        [str(c.code), c.label, f"{c.n_mentions:,}"]
        + [_with_interval(name, c.statistics[name], analytic_interval) for name in statistics]
        + [c.statistics[kappa].words]
        for c in _ranked_codes(result)
    ]


def _ranked_codes(result: AgreementResult) -> list:
    """The per-code results in ranking order (least reliable first), or frame order for an unranked result."""
    by_code = {c.code: c for c in result.per_code}
    ranked = [by_code[s.code] for s in result.standings if s.code in by_code]
    return ranked if len(ranked) == len(result.per_code) else list(result.per_code)


def _pair_kappa(table, kappa: float) -> str:
    """Cohen's kappa of one coder pair's 2 x 2 table as text, or why it is undefined."""
    if kappa == kappa:
        return f"{kappa:.3f}"
    if table.sum() == 0:
        return "undefined: no verbatim coded by both"
    if table[0, 0] + table[0, 1] + table[1, 0] == 0:
        return "undefined: neither coder used this code"
    return "undefined: both coders used this code on every verbatim"


def _pair_blocks(result: AgreementResult) -> list[tuple[str, list[str], list[list[str]]]]:
    """One table per coder pair: per code both / first only / second only / neither and Cohen's kappa."""
    pt = result.pair_tables
    blocks = []
    for p, (a, b) in enumerate(pt.pairs):
        rows = []
        for c, code in enumerate(pt.codes):
            t = pt.tables[p, c]
            rows.append(
                [str(code), result.label(code), str(t[0, 0]), str(t[0, 1]), str(t[1, 0]), str(t[1, 1]),
                 _pair_kappa(t, pt.kappa[p, c])]
            )
        headers = ["code", "label", "both", f"{a} only", f"{b} only", "neither", "Cohen's kappa"]
        blocks.append((f"{a} and {b}", headers, rows))
    return blocks


def _disputed_rows(result: AgreementResult) -> list[list[str]]:
    return [
        [str(u.unit), str(u.n_disputed_codes)] + [_codes(u.sets[coder]) for coder in result.coders]
        for u in result.disputed_units
    ]


def _confused_rows(result: AgreementResult) -> list[list[str]]:
    return [
        [f"{p.code_a} {result.label(p.code_a)}", f"{p.code_b} {result.label(p.code_b)}", str(p.count)]
        for p in result.confused_pairs
    ]


def format_agreement_text(result: AgreementResult, statistics: Sequence[str] | None = None,
                          special_hint: str = "") -> str:
    """The whole result as plain-text tables for the terminal (choose per-code statistics with `statistics`):
    the headline and what to do first, then the ranking, then the detail. `special_hint` is a line saying how
    to put the special codes back in the headline (the command names its option)."""
    stats = tuple(statistics or result.statistic_names)
    parts = ["\n".join(_summary_lines(result)), "\n".join(_headline_lines(result, special_hint))]
    if result.advice:
        parts += ["What to do\n" + "\n".join(f"- {line}" for line in result.advice)]
    parts += [_ranking_title(result), format_table(_ranking_headers(result), _ranking_rows(result)),
              "Across the code frame",
             format_table(["statistic", "value [interval]", "reading"], _frame_rows(result)),
             "Per code (present / absent), least reliable first",
             format_table(["code", "label", "mentions"] + [STATISTIC_LABELS[s] for s in stats]
                          + [f"reading of {STATISTIC_LABELS[_kappa_name(result)]}"], _code_rows(result, stats))]
    for title, headers, rows in _pair_blocks(result):
        parts += [f"Coder pair {title}", format_table(headers, rows)]
    if result.disputed_units:
        parts += ["Verbatims with most disputed codes",
                  format_table(["respondent", "disputed codes", *result.coders], _disputed_rows(result))]
    if result.confused_pairs:
        parts += ["Codes most often swapped between coders",
                  format_table(["one coder", "another coder", "times"], _confused_rows(result))]
    return "\n\n".join(parts) + "\n"


def _csv_number(value) -> str:
    return "" if value is None else repr(float(value))


CSV_HEADER = ["section", "code", "label", "other_code", "coders", "statistic", "value", "low", "high", "reading",
              "se", "se_low", "se_high"]
_CSV_NUMERIC = {6, 7, 8, 10, 11, 12}


def agreement_csv_rows(result: AgreementResult) -> list[list[str]]:
    """The result as long rows under CSV_HEADER; empty value cells always have their reason in 'reading'."""
    coders = "|".join(result.coders)
    rows = [["frame", "", "", "", coders, STATISTIC_LABELS[n], _csv_number(e.value), _csv_number(e.low),
             _csv_number(e.high), e.words] for n, e in result.frame.items()]
    for c in result.per_code:
        rows.append(["code", str(c.code), c.label, "", coders, "mentions", str(c.n_mentions), "", "", ""])
        rows += [["code", str(c.code), c.label, "", coders, STATISTIC_LABELS[n], _csv_number(e.value),
                  _csv_number(e.low), _csv_number(e.high), e.words, _csv_number(e.se), _csv_number(e.se_low),
                  _csv_number(e.se_high)] for n, e in c.statistics.items()]
    pt = result.pair_tables
    for p, (a, b) in enumerate(pt.pairs):
        for c, code in enumerate(pt.codes):
            t, k = pt.tables[p, c], pt.kappa[p, c]
            cells = {"both": t[0, 0], f"{a} only": t[0, 1], f"{b} only": t[1, 0], "neither": t[1, 1]}
            base = ["pair", str(code), result.label(code), "", f"{a}|{b}"]
            rows += [base + [name, str(n), "", "", ""] for name, n in cells.items()]
            words = _pair_kappa(t, k)
            rows.append(base + ["Cohen's kappa", "" if k != k else repr(float(k)), "", "",
                                words if words.startswith(UNDEFINED) else ""])
    if result.headline is not None:
        rows.append(["headline", "", "", "", coders, result.headline.verdict, "", "", "", result.headline.text])
    for s in result.standings:
        rows.append(["ranking", str(s.code), s.label, "", coders, "rank", "" if s.rank is None else str(s.rank),
                     "", "", _standing_state(s) + (f": {s.why}" if s.flagged else "")])
    for q in result.swapped:
        rows.append(["advice", str(q.code_a), q.label_a, str(q.code_b), coders, "verbatims to recode",
                     str(q.n_verbatims), "", "", q.advice + ": " + " ".join(map(str, q.verbatims))])
    for u in result.disputed_units:
        sets = "; ".join(f"{coder}: {_codes(u.sets[coder])}" for coder in result.coders)
        rows.append(["disputed_unit", "", "", "", coders, f"respondent {u.unit}", str(u.n_disputed_codes), "", "", sets])
    for q in result.confused_pairs:
        rows.append(["confused_pair", str(q.code_a), result.label(q.code_a), str(q.code_b), coders, "times",
                     str(q.count), "", "", result.label(q.code_b)])
    return [[str(x) if i in _CSV_NUMERIC else guard_cell(str(x)) for i, x in enumerate(row)] for row in rows]


def write_agreement_csv(result: AgreementResult, path: str | os.PathLike) -> Path:
    """Write the long CSV atomically (temporary file + rename) and return its path."""
    with atomic_open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_HEADER)
        writer.writerows(agreement_csv_rows(result))
    return Path(path)


def _html_table(css: str, headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: range) -> str:
    """An HTML table; `numeric` columns get class oc-num, undefined cells class oc-undefined."""

    def cell(i: int, text: str) -> str:
        classes = []
        if i in numeric:
            classes.append("oc-num")
        if text == UNDEFINED or text.startswith("undefined"):
            classes.append("oc-undefined")
        attr = f' class="{" ".join(classes)}"' if classes else ""
        return f"<td{attr}>{html.escape(text)}</td>"

    head = "".join(f"<th>{html.escape(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(cell(i, str(x)) for i, x in enumerate(r)) + "</tr>" for r in rows)
    return f'<table class="oc-table {css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def format_agreement_html(result: AgreementResult | ScaleAgreementResult, title: str = "Coder agreement") -> str:
    """The result as an HTML fragment (<section class="oc-agreement">) for the report; a scale result gets the
    statistics of its level."""
    if isinstance(result, ScaleAgreementResult):
        return format_scale_agreement_html(result, title)
    kappa = _kappa_name(result)
    stats = result.statistic_names
    out = [f'<section class="oc-agreement"><h2>{html.escape(title)}</h2>']
    out.append('<ul class="oc-summary">' + "".join(f"<li>{html.escape(x)}</li>" for x in _summary_lines(result)) + "</ul>")
    out.append("".join(f'<p class="oc-headline">{html.escape(x)}</p>' for x in _headline_lines(result)))
    if result.advice:
        out.append('<h3>What to do</h3><ul class="oc-advice">'
                   + "".join(f"<li>{html.escape(x)}</li>" for x in result.advice) + "</ul>")
    out.append(f"<h3>{html.escape(_ranking_title(result))}</h3>")
    out.append(_html_table("oc-agreement-ranking", _ranking_headers(result), _ranking_rows(result), range(3, 6)))
    out.append("<h3>Across the code frame</h3>")
    out.append(_html_table("oc-agreement-frame", ["statistic", "value [interval]", "reading"], _frame_rows(result), range(1, 2)))
    out.append("<h3>Per code (present / absent), least reliable first</h3>")
    code_headers = ["code", "label", "mentions"] + [STATISTIC_LABELS[s] for s in stats] + [f"reading of {STATISTIC_LABELS[kappa]}"]
    out.append(_html_table("oc-agreement-codes", code_headers, _code_rows(result, stats, True),
                           range(2, 3 + len(stats))))
    for title_pair, headers, rows in _pair_blocks(result):
        out.append(f"<h3>Coder pair {html.escape(title_pair)}</h3>")
        out.append(_html_table("oc-agreement-pair", headers, rows, range(2, 7)))
    if result.disputed_units:
        out.append("<h3>Verbatims with most disputed codes</h3>")
        out.append(_html_table("oc-agreement-disputed", ["respondent", "disputed codes", *result.coders], _disputed_rows(result), range(1, 2)))
    if result.confused_pairs:
        out.append("<h3>Codes most often swapped between coders</h3>")
        out.append(_html_table("oc-agreement-confused", ["one coder", "another coder", "times"], _confused_rows(result), range(2, 3)))
    out.append("</section>")
    return "\n".join(out)


# -- agreement on a scale (ordinal, interval, ratio) ------------------------------------------------------------
def _scale_number(name: str, value: float | None) -> str:
    if value is None:
        return UNDEFINED
    return f"{100 * value:.1f}%" if name in ("percent", "weighted_percent") else f"{value:.3f}"


def _scale_pair(name: str, low: float | None, high: float | None) -> str:
    return "" if low is None else f"[{_scale_number(name, low)}, {_scale_number(name, high)}]"


def _scale_summary(result: ScaleAgreementResult) -> list[str]:
    per_coder = ", ".join(f"{coder} {n:,}" for coder, n in result.units_per_coder.items())
    scale = ", ".join(f"{code} {result.label(code)}" for code in result.codes)
    values = "positions 1.." + str(len(result.codes)) if result.level == "ordinal" else "the code numbers"
    lines = [
        f"Scale ({result.level} level, values: {values}): {scale}",
        f"Weights: {result.weights} (credit for near misses: 1 - |a - b| / range"
        + ("^2" if result.weights == "quadratic" else "") + ")",
        f"Coders: {', '.join(result.coders)} (verbatims rated: {per_coder})",
        f"Verbatims: {result.n_units:,} rated; {result.n_pairable:,} by two or more coders (compared); "
        f"{result.n_single:,} by one coder only",
    ]
    if result.n_resamples:
        lines.append(f"Bootstrap: {100 * result.confidence:.0f}% percentile intervals, {result.n_resamples:,} "
                     f"resamples of verbatims (seed {result.random_state})")
    lines.append("Analytic: standard error and interval from " + "; ".join(
        f"{SCALE_LABELS[name]} {source}" for name, source in ANALYTIC_SOURCES.items()
        if name in result.statistics) + "; Krippendorff's alpha has none (bootstrap only)")
    return lines + [f"Note: {note}" for note in result.warnings]


def _scale_rows(result: ScaleAgreementResult) -> list[list[str]]:
    rows = []
    for name, est in result.statistics.items():
        label = SCALE_LABELS[name] + (f" ({result.level})" if name == "krippendorff_alpha" else "")
        se = "" if est.se is None else f"{est.se:.3f}"
        rows.append([label, _scale_number(name, est.value), _scale_pair(name, est.low, est.high), se,
                     _scale_pair(name, est.se_low, est.se_high), est.words])
    return rows


_SCALE_HEADERS = ["statistic", "value", "bootstrap interval", "analytic se", "analytic interval", "reading"]


def _distribution_rows(result: ScaleAgreementResult) -> tuple[list[str], list[list[str]]]:
    headers = ["coder"] + [f"{code} {result.label(code)}" for code in result.codes]
    return headers, [[coder] + [str(int(n)) for n in row] for coder, row in zip(result.coders, result.distribution)]


def format_scale_agreement_text(result: ScaleAgreementResult) -> str:
    """Agreement on a scale as plain-text tables for the terminal."""
    headers, rows = _distribution_rows(result)
    parts = ["\n".join(_scale_summary(result)), "Agreement on the scale", format_table(_SCALE_HEADERS, _scale_rows(result)),
             "Each coder's use of the scale (verbatims)", format_table(headers, rows)]
    return "\n\n".join(parts) + "\n"


def scale_agreement_csv_rows(result: ScaleAgreementResult) -> list[list[str]]:
    """Long rows under SCALE_CSV_HEADER."""
    coders = "|".join(result.coders)
    rows = []
    for name, e in result.statistics.items():
        rows.append(["scale", result.level, result.weights, coders, SCALE_LABELS[name], _csv_number(e.value),
                     _csv_number(e.low), _csv_number(e.high), _csv_number(e.se), _csv_number(e.se_low),
                     _csv_number(e.se_high), e.words])
    for coder, row in zip(result.coders, result.distribution):
        for code, n in zip(result.codes, row):
            rows.append(["distribution", result.level, result.weights, coder, f"{code} {result.label(code)}",
                         str(int(n)), "", "", "", "", "", ""])
    numeric = {5, 6, 7, 8, 9, 10}
    return [[str(x) if i in numeric else guard_cell(str(x)) for i, x in enumerate(row)] for row in rows]


SCALE_CSV_HEADER = ["section", "level", "weights", "coders", "statistic", "value", "low", "high", "se", "se_low",
                    "se_high", "reading"]


def write_scale_agreement_csv(result: ScaleAgreementResult, path: str | os.PathLike) -> Path:
    """Write the scale result as a long CSV atomically and return its path."""
    with atomic_open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(SCALE_CSV_HEADER)
        writer.writerows(scale_agreement_csv_rows(result))
    return Path(path)


def format_scale_agreement_html(result: ScaleAgreementResult, title: str = "Coder agreement") -> str:
    """The scale result as an HTML fragment (<section class="oc-agreement">) for the report."""
    headers, rows = _distribution_rows(result)
    return "\n".join([
        f'<section class="oc-agreement oc-agreement-scale"><h2>{html.escape(title)}</h2>',
        '<ul class="oc-summary">' + "".join(f"<li>{html.escape(x)}</li>" for x in _scale_summary(result)) + "</ul>",
        "<h3>Agreement on the scale</h3>",
        _html_table("oc-agreement-frame", _SCALE_HEADERS, _scale_rows(result), range(1, 5)),
        "<h3>Each coder's use of the scale (verbatims)</h3>",
        _html_table("oc-agreement-distribution", headers, rows, range(1, len(headers))),
        "</section>"])
