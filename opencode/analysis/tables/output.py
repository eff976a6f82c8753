"""Render frequency and banner tables: aligned terminal text, CSV, XLSX and an HTML fragment.

Each table becomes one Layout (a grid of typed cells); every renderer reads the same Layout, so the four
outputs always agree. Text cells from the data are guarded against formula injection in CSV and XLSX.
"""

from __future__ import annotations

import csv
import html
import math
import numbers
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence, Union

from opencode.analysis.tables.crosstab import BannerTable, FrequencyTable
from opencode.analysis.tables.mix import MixTable
from opencode.errors import OpenCodeError
from opencode.files.cell_guard import guard_cell
from opencode.files.safe_write import atomic_open, atomic_path

Table = Union[FrequencyTable, BannerTable, MixTable]
EMPTY = "-"
SMALL_MARK = "!"
TABLE_CSS = """\
section.oc-table-block { margin: 1.5em 0; }
table.oc-table { border-collapse: collapse; font-size: 0.9em; }
table.oc-table th, table.oc-table td { padding: 0.2em 0.5em; border-bottom: 1px solid #ddd; }
table.oc-table td.oc-num { text-align: right; font-variant-numeric: tabular-nums; }
table.oc-table td.oc-mark { color: #0072B2; font-weight: bold; text-align: left; }
table.oc-table tr.oc-base td { font-style: italic; }
table.oc-table tr.oc-net td { font-weight: bold; }
table.oc-table td.oc-level-1 { padding-left: 1.5em; }
table.oc-table td.oc-level-2 { padding-left: 3em; }
table.oc-table td.oc-small { color: #D55E00; }
p.oc-notes { font-size: 0.8em; color: #555; }
"""


@dataclass(frozen=True)
class Cell:
    """One grid cell. kind: head, text, count, amount (weighted count), share (0-1), mark, p; span for headers."""

    value: Any
    kind: str = "text"
    span: int = 1
    level: int = 0


@dataclass
class Layout:
    """A table as a grid: header rows first, `row_kinds` per row (head, base, net, code, other), notes below."""

    title: str
    label_columns: int
    header_rows: int
    rows: list[list[Cell]] = field(default_factory=list)
    row_kinds: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def add(self, kind: str, cells: list[Cell]) -> None:
        """Append one row."""
        self.rows.append(cells)
        self.row_kinds.append(kind)


def layout_table(table: Table) -> Layout:
    """The grid of a frequency or banner table."""
    if isinstance(table, FrequencyTable):
        return _layout_frequencies(table)
    if isinstance(table, BannerTable):
        return _layout_banner(table)
    if isinstance(table, MixTable):
        return _layout_mix(table)
    raise TypeError(f"expected a FrequencyTable, BannerTable or MixTable, got {type(table).__name__}")


def format_table(table: Table, width: int | None = None) -> str:
    """Plain text fitted to the terminal (files/textout.format_table): letters beside percentages, base rows,
    small-base marks. A banner too wide for the width is printed in successive blocks of banner columns, each
    repeating the code and label; banner titles are printed whole above their block, never cut."""
    from opencode.files import textout

    layout = layout_table(table)
    body = layout.rows[layout.header_rows:]
    headers = [_text(cell) for cell in layout.rows[layout.header_rows - 1]]
    rows = [["  " * cell.level + _text(cell) for cell in cells] for cells in body]
    numeric = ("count", "amount", "share", "p", "score", "interval")
    kinds = [next((cells[i].kind for cells in body if cells[i].kind in numeric), body[0][i].kind if body else "text")
             for i in range(len(headers))]
    align = "".join("r" if kind in numeric else "l" for kind in kinds)
    stub = layout.label_columns
    wrap = [stub - 1]
    if layout.header_rows == 1:
        groups = [("", [[i] for i in range(stub, len(headers))])]
    else:  # a banner: the top header row names each banner variable over its columns
        groups, column = [], stub
        for cell in layout.rows[0][stub:]:
            members = list(range(column, column + cell.span))
            units, unit = [], []
            for i in members:
                unit.append(i)
                if kinds[i] == "mark" or i == members[-1]:
                    units.append(unit)
                    unit = []
            if len(units) > 1 and kinds[units[-1][0]] == "p":  # the row test q stays with the last column
                units[-2:] = [units[-2] + units[-1]]
            title = _text(cell)
            groups.append((f"Banner: {title}" if title else "", units))
            column += cell.span
    text = textout.format_table(headers, rows, align=align, width=width, wrap=wrap, title=layout.title,
                                note=["rows in code-frame order, each net above its codes", *layout.notes], stub=stub,
                                groups=groups)
    return text + "\n"


def table_records(table: Table) -> list[dict]:
    """The table's body rows as records for scripts: one key per column (a mark column named after the column it
    marks, banner columns prefixed by their variable's label), numbers as numbers (shares 0-1), NaN as None,
    plus the row's kind (base, code, net, ...)."""
    layout = layout_table(table)
    names: list[str] = []
    prefixes: list[str] = []
    if layout.header_rows > 1:
        for cell in layout.rows[0]:
            prefixes += [str(cell.value or "")] * cell.span
    for i, cell in enumerate(layout.rows[layout.header_rows - 1]):
        name = str(cell.value or "")
        if not name and names:
            name = f"{names[-1]} mark"
        if prefixes and prefixes[i]:
            name = f"{prefixes[i]}: {name}"
        while name in names:
            name += " (2)"
        names.append(name)
    records = []
    for cells, kind in zip(layout.rows[layout.header_rows:], layout.row_kinds[layout.header_rows:]):
        record: dict[str, Any] = {"row kind": kind}
        for name, cell in zip(names, cells):
            value = cell.value
            if isinstance(value, numbers.Real) and not isinstance(value, bool):
                value = float(value) if math.isfinite(float(value)) else None
                if value is not None and cell.kind == "count":
                    value = int(value)
            record[name] = value
        records.append(record)
    return records


def write_csv(table: Table, path: str | os.PathLike) -> Path:
    """Write one table as CSV (percentages 0-100, one decimal); text cells guarded against formulas."""
    layout = layout_table(table)
    with atomic_open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow([guard_cell(layout.title)])
        for cells in layout.rows:
            row: list[Any] = []
            for cell in cells:
                row.append(_csv_value(cell))
                row.extend([""] * (cell.span - 1))
            writer.writerow(row)
        for note in layout.notes:
            writer.writerow([guard_cell(note)])
    return Path(path)


def write_xlsx(tables: Sequence[Table] | Table, path: str | os.PathLike) -> Path:
    """Write tables to an XLSX workbook, one formatted sheet each (bold headers, % format, frozen panes)."""
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    if isinstance(tables, (FrequencyTable, BannerTable, MixTable)):
        tables = [tables]
    if not tables:
        raise OpenCodeError(f"{path}: no tables to write")
    workbook = Workbook()
    workbook.remove(workbook.active)
    used: set[str] = set()
    bold = Font(bold=True)
    for table in tables:
        layout = layout_table(table)
        kind = "banner" if isinstance(table, BannerTable) else "mix" if isinstance(table, MixTable) else "codes"
        sheet = workbook.create_sheet(_sheet_name(f"{table.question} {kind}", used))
        sheet.cell(row=1, column=1, value=_xlsx_text(layout.title)).font = bold
        widths: dict[int, int] = {}
        for r, (cells, kind) in enumerate(zip(layout.rows, layout.row_kinds), start=2):
            c = 1
            for cell in cells:
                target = sheet.cell(row=r, column=c, value=_xlsx_value(cell))
                if cell.kind == "share" and _is_number(cell.value):
                    target.number_format = "0.0%"
                elif cell.kind == "amount" and _is_number(cell.value):
                    target.number_format = "0.0"
                elif cell.kind == "p" and _is_number(cell.value):
                    target.number_format = "0.000"
                if kind in ("head", "net"):
                    target.font = bold
                if cell.level:
                    target.alignment = Alignment(indent=2 * cell.level)
                if cell.span > 1:
                    sheet.merge_cells(start_row=r, start_column=c, end_row=r, end_column=c + cell.span - 1)
                else:
                    widths[c] = max(widths.get(c, 0), len(_text(cell)) + 2 * cell.level)
                c += cell.span
        for c, width in widths.items():
            sheet.column_dimensions[get_column_letter(c)].width = min(max(width + 2, 4), 60)
        sheet.freeze_panes = sheet.cell(row=layout.header_rows + 2, column=layout.label_columns + 1)
        for offset, note in enumerate(layout.notes, start=len(layout.rows) + 3):
            sheet.cell(row=offset, column=1, value=_xlsx_text(note))
    with atomic_path(path, suffix=".xlsx") as tmp:
        workbook.save(tmp)
    return Path(path)


def to_html(table: Table) -> str:
    """An HTML <section> fragment with one <table> (classes styled by TABLE_CSS) for the report."""
    layout = layout_table(table)
    out = ['<section class="oc-table-block">', f"<h3>{html.escape(layout.title)}</h3>", '<table class="oc-table">', "<thead>"]
    for r, (cells, kind) in enumerate(zip(layout.rows, layout.row_kinds)):
        if r == layout.header_rows:
            out.append("</thead><tbody>")
        tag = "th" if kind == "head" else "td"
        row_html = []
        for cell in cells:
            classes = []
            if cell.kind in ("count", "amount", "share", "p", "score"):
                classes.append("oc-num")
            if cell.kind == "mark":
                classes.append("oc-small" if cell.value == SMALL_MARK else "oc-mark")
            if cell.level:
                classes.append(f"oc-level-{cell.level}")
            attrs = f' colspan="{cell.span}"' if cell.span > 1 else ""
            attrs += f' class="{" ".join(classes)}"' if classes else ""
            row_html.append(f"<{tag}{attrs}>{html.escape(_text(cell, percent_sign=True))}</{tag}>")
        out.append(f'<tr class="oc-{kind}">' + "".join(row_html) + "</tr>")
    out += ["</tbody>", "</table>"]
    if layout.notes:
        out.append('<p class="oc-notes">' + "<br>".join(html.escape(n) for n in layout.notes) + "</p>")
    out.append("</section>")
    return "\n".join(out) + "\n"


def _layout_frequencies(t: FrequencyTable) -> Layout:
    """Grid of a frequency table: bases on top, codes and nets, non-answers apart at the bottom."""
    layout = Layout(title=f"{t.question_label}: code frequencies", label_columns=2, header_rows=1)
    amount = "amount" if t.weighted else "count"
    weighted = t.weighted
    head = ["Code", "Label", "Respondents"] + (["Weighted"] if weighted else []) + ["% of respondents", "", "Mentions", "% of mentions"]
    layout.add("head", [Cell(h, "head") for h in head])
    small = SMALL_MARK if t.small_base else ""

    intervals = t.show_intervals and t.ci_low is not None
    if intervals:
        head[head.index("% of respondents") + 2:head.index("% of respondents") + 2] = ["low", "high"]
        layout.rows[0] = [Cell(h, "head") for h in head]

    def row(number, label, count, weight, share, mark, mentions, mention_share, level=0, ci=(None, None)) -> list[Cell]:
        cells = [Cell(number), Cell(label, level=level), Cell(count, "count")]
        if weighted:
            cells.append(Cell(weight, "amount"))
        cells += [Cell(share, "share"), Cell(mark, "mark")]
        if intervals:
            cells += [Cell(ci[0], "share"), Cell(ci[1], "share")]
        return cells + [Cell(mentions, amount), Cell(mention_share, "share")]

    layout.add("base", row("", "Base: answered", t.base.n, t.base.weighted, None, small, t.total_mentions,
                           1.0 if t.total_mentions > 0 else math.nan))
    if weighted:
        layout.add("base", row("", "Effective base (Kish)", None, t.base.effective, None, "", None, None))
    for i, r in enumerate(t.rows):
        ci = (t.ci_low[i], t.ci_high[i]) if intervals else (None, None)
        layout.add(r.kind, row(r.number, r.label, t.count[i], t.weighted_count[i], t.respondent_share[i], small,
                               t.mentions[i], t.mention_share[i], level=r.level, ci=ci))
    layout.add("other", row("", "Non-answers (share of all verbatims)", t.non_answer.n, t.non_answer.weighted,
                            t.non_answer_share, "", None, None))
    if intervals:
        layout.notes.append(_interval_note(t.confidence, t.weighted).replace("each percentage", "% of respondents")
                            + " low / high: its limits.")
    layout.notes += _common_notes(t.weighted, t.weight_name, t.min_base, tested=False)
    layout.notes.append("% of respondents can add past 100 (several codes per verbatim); % of mentions adds to 100 over codes."
                        " A net counts a respondent once; its mentions are the sum of its codes' mentions.")
    return layout


def _layout_banner(t: BannerTable) -> Layout:
    """Grid of a banner table: a share and a letters cell per column, a row-test q column per variable."""
    layout = Layout(title=f"{t.question_label}: column % by banner", label_columns=2, header_rows=2)
    blocks = [(None, [0])] + [(name, [i for i, c in enumerate(t.columns) if c.variable == name]) for name, _ in t.variables]
    labels = dict(t.variables)
    top, second = [Cell("", "head"), Cell("", "head")], [Cell("Code", "head"), Cell("Label", "head")]
    for name, cols in blocks:
        top.append(Cell("" if name is None else labels[name], "head", span=2 * len(cols) + (name is not None)))
        for c in cols:
            second += [Cell(t.columns[c].label, "head"), Cell(t.columns[c].letter, "head")]
        if name is not None:
            second.append(Cell("Row test q", "head"))
    layout.add("head", top)
    layout.add("head", second)

    small = t.small_base & (t.base_n > 0)

    def base_row(label: str, values, kind: str, marks: bool) -> list[Cell]:
        cells = [Cell(""), Cell(label)]
        for name, cols in blocks:
            for c in cols:
                cells += [Cell(values[c], kind), Cell(SMALL_MARK if marks and small[c] else "", "mark")]
            if name is not None:
                cells.append(Cell(None, "p"))
        return cells

    layout.add("base", base_row("Base: answered", t.base_n, "count", True))
    if t.weighted:
        layout.add("base", base_row("Weighted base", t.base_weighted, "amount", False))
        layout.add("base", base_row("Effective base (Kish)", t.base_effective, "amount", False))
    letters = t.letters()
    for r, row in enumerate(t.rows):
        cells = [Cell(row.number), Cell(row.label, level=row.level)]
        for v, (name, cols) in enumerate(blocks):
            for c in cols:
                mark = (SMALL_MARK if small[c] else "") + letters[r, c]
                cells += [Cell(t.column_share[r, c], "share"), Cell(mark, "mark")]
            if name is not None:
                cells.append(Cell(t.row_q[r, v - 1], "p"))
        layout.add(row.kind, cells)
        if t.show_intervals and t.ci_low is not None:
            cells = [Cell(""), Cell("", level=row.level)]
            for v, (name, cols) in enumerate(blocks):
                for c in cols:
                    cells += [Cell(_interval_text(t.ci_low[r, c], t.ci_high[r, c]), "interval"), Cell("", "mark")]
                if name is not None:
                    cells.append(Cell(None, "p"))
            layout.add("interval", cells)

    level = f"{round(100 * t.confidence)}%"
    lower = f"; lower case at {round(100 * t.lower_confidence)}%" if t.lower_confidence is not None else ""
    adjusted = ", Benjamini-Hochberg adjusted across the table" if t.adjust_pairs else ""
    layout.notes.append(
        f"Letters: the column % is significantly higher than the column with that letter (pooled two-proportion z-test,"
        f" upper case at {level}{lower}{adjusted}); only columns of the same banner variable are compared."
    )
    if t.pair_exact.any():
        counts = "effective counts (share x Kish base, rounded)" if t.weighted else "counts"
        layout.notes.append(f"Columns with bases under {t.min_base} ({SMALL_MARK}) are compared by Fisher's exact "
                            f"test (two-sided, 2 x 2 {counts}) instead of the z-test.")
    if t.weighted:
        layout.notes.append(
            "Row test q: Pearson chi-square of code present / absent by the banner variable's columns with the "
            "first-order Rao-Scott correction for the weights (Rao & Scott 1981, 1984), one test per row,"
            " Benjamini-Hochberg adjusted across the table.")
    else:
        layout.notes.append(
            "Row test q: chi-square of code present / absent by the banner variable's columns, one test per row,"
            " Benjamini-Hochberg adjusted across the table."
        )
    if t.show_intervals:
        layout.notes.append(_interval_note(t.confidence, t.weighted))
    layout.notes += _common_notes(t.weighted, t.weight_name, t.min_base, tested=True,
                                  exact=bool(t.pair_exact.any()))
    return layout


def _interval_text(low: float, high: float) -> str:
    """A Wilson interval as '(12.3-18.9)' in percent, '' where undefined."""
    if not (_is_number(low) and _is_number(high)):
        return ""
    return f"({100 * low:.1f}-{100 * high:.1f})"


def _interval_note(confidence: float, weighted: bool) -> str:
    base = "the Kish effective base" if weighted else "the base"
    return (f"Intervals: {round(100 * confidence)}% Wilson (1927) score interval of each percentage, on {base}.")


def _layout_mix(t: MixTable) -> Layout:
    """Grid of a mix table: base, row % per category, mean score, row-test q."""
    layout = Layout(title=f"{t.question_label}: {t.variable} within each code (row %)", label_columns=2,
                    header_rows=1)
    head = ["Code", "Label", "Base"] + (["Weighted base"] if t.weighted else []) + [label for _, label in t.categories]
    head += ([t.score_label] if t.mean_score is not None else []) + ["", "Row test q"]
    layout.add("head", [Cell(h, "head") for h in head])
    small = t.small_base & (t.base_n > 0)
    for r, row in enumerate(t.rows):
        cells = [Cell("" if row.kind == "total" else row.number), Cell(row.label, level=row.level),
                 Cell(t.base_n[r], "count")]
        if t.weighted:
            cells.append(Cell(t.base_weighted[r], "amount"))
        cells += [Cell(t.share[r, k], "share") for k in range(len(t.categories))]
        if t.mean_score is not None:
            cells.append(Cell(t.mean_score[r], "score"))
        cells += [Cell(SMALL_MARK if small[r] else "", "mark"), Cell(None if r == 0 else t.row_q[r], "p")]
        layout.add("base" if row.kind == "total" else row.kind, cells)
    layout.notes.append(f"Row %: of the respondents with the code who have a value on {t.variable!r}; each row adds "
                        "to 100. A respondent with several codes counts in each of their rows.")
    layout.notes.append("Row test q: chi-square of the category mix with the code against without it, one test per "
                        "row, Benjamini-Hochberg adjusted across the table.")
    layout.notes += _common_notes(t.weighted, t.weight_name, t.min_base, tested=True)
    return layout


def _common_notes(weighted: bool, weight_name: str | None, min_base: int, tested: bool,
                  exact: bool = False) -> list[str]:
    """Footnotes on weighting and small bases."""
    notes = []
    if weighted:
        notes.append(f"Weighted by {weight_name!r}; " + ("tests use Kish effective bases." if tested else "bases shown weighted and unweighted."))
    untested = "; exact test only, left out of the row test." if exact else "; not tested."
    small = f"{SMALL_MARK} base under {min_base}: read with caution" + (untested if tested else ".")
    notes.append(small + f" {EMPTY} no base.")
    return notes


def _is_number(value: Any) -> bool:
    """A finite int or float (not bool)."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        return False
    return math.isfinite(float(value))


def _is_missing_number(cell: Cell) -> bool:
    """A numeric cell whose value is NaN (no base)."""
    return cell.kind in ("count", "amount", "share", "p", "score") and cell.value is not None and not _is_number(cell.value)


def _text(cell: Cell, percent_sign: bool = False) -> str:
    """A cell as display text."""
    if cell.value is None:
        return ""
    if _is_missing_number(cell):
        return EMPTY
    if cell.kind == "count":
        return f"{int(cell.value)}"
    if cell.kind == "amount":
        return f"{float(cell.value):.1f}"
    if cell.kind == "share":
        return f"{100 * float(cell.value):.1f}" + ("%" if percent_sign else "")
    if cell.kind == "score":
        return f"{float(cell.value):+.3f}"
    if cell.kind == "p":
        from opencode.files.textout import format_p

        return format_p(cell.value)
    return str(cell.value)


def _align(text: str, width: int, cell: Cell) -> str:
    """Numbers right-aligned, labels and marks left-aligned, indented by level."""
    if cell.kind in ("count", "amount", "share", "p", "score"):
        return text.rjust(width)
    return text.ljust(width)


def _csv_value(cell: Cell) -> Any:
    """A cell for CSV: numbers as numbers (percent 0-100), text guarded, NaN as the no-base mark."""
    if cell.value is None:
        return ""
    if _is_missing_number(cell):
        return EMPTY
    if cell.kind == "count":
        return int(cell.value)
    if cell.kind == "amount":
        return round(float(cell.value), 2)
    if cell.kind == "share":
        return round(100 * float(cell.value), 1)
    if cell.kind in ("p", "score"):
        return round(float(cell.value), 4)
    return guard_cell(str(cell.value))


_ILLEGAL_XLSX = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")


def _xlsx_text(value: Any) -> Any:
    """Text for a worksheet: control characters dropped, formula triggers guarded."""
    return guard_cell(_ILLEGAL_XLSX.sub("", value)) if isinstance(value, str) else value


def _xlsx_value(cell: Cell) -> Any:
    """A cell for XLSX: numbers native (shares 0-1 with % format), text guarded, NaN as the no-base mark."""
    if cell.value is None:
        return None
    if _is_missing_number(cell):
        return EMPTY
    if cell.kind == "count":
        return int(cell.value)
    if cell.kind in ("amount", "share", "p", "score"):
        return float(cell.value)
    if isinstance(cell.value, str):
        return _xlsx_text(cell.value)
    return cell.value


_SHEET_BAD = re.compile(r"[\[\]:*?/\\]")


def _sheet_name(name: str, used: set[str]) -> str:
    """A valid, unique worksheet name (31 characters, no []:*?/\\)."""
    base = _SHEET_BAD.sub("_", str(name)).strip("'") or "table"
    candidate, k = base[:31], 2
    while candidate.lower() in used:
        suffix = f" ({k})"
        candidate, k = base[:31 - len(suffix)] + suffix, k + 1
    used.add(candidate.lower())
    return candidate
