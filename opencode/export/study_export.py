"""Coded data of a study written in one of the export formats (the library under `oecode export`).

Each format's writer module is imported only when that format is written, so a CSV export loads neither
pyreadstat (SPSS, Stata) nor openpyxl and lxml (XLSX): tests/test_cli_imports.py checks it."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from opencode.analysis.tables import coded_data
from opencode.coding.assignments import FINAL
from opencode.errors import OpenCodeError
from opencode.export.dataset import sibling_path
from opencode.files.targets import check_targets
from opencode.study.store import Study
from opencode.export.choices import EXPORT_FORMATS  # noqa: F401  (re-exported)


@dataclass
class ExportResult:
    """What an export wrote, and the sentences its reader must see."""

    written: list[Path]
    n_respondents: int
    questions: list[str]
    notes: list[str] = field(default_factory=list)


def export_format(fmt: str | None, out: str | Path) -> str:
    """The export format named, or taken from the output file's suffix; unknown formats are refused."""
    chosen = (fmt or Path(out).suffix.lstrip(".")).lower()
    if chosen not in EXPORT_FORMATS:
        raise OpenCodeError(f"unknown format {chosen or '(none)'!r}; choose one of {', '.join(EXPORT_FORMATS)}")
    return chosen


def export_targets(out: str | Path, fmt: str | None = None, sss_data: str = "fixed") -> list[Path]:
    """Every file an export writes (the one named, then its companions), checked before any work is done."""
    chosen = export_format(fmt, out)
    if chosen == "sss":
        from opencode.export import triple_s

        companion = triple_s.data_path_for(out, sss_data)
    elif chosen == "xlsx":
        companion = None
    else:
        companion = sibling_path(out)
    return check_targets([(out, None)] + ([(companion, out)] if companion and companion != Path(out) else []))


def export_study(study: Study, out: str | Path, fmt: str | None = None, *, questions: list[str] | None = None,
                 coder: str = FINAL, include_suggestions: bool = False, closed: list[str] | None = (),
                 layout: str = "flags", verbatims: str = "omit", sss_data: str = "fixed",
                 sss_multiple: str = "bitstring") -> ExportResult:
    """Write the coded questions (and chosen closed-ended variables; None = all) to `out`, atomically."""
    chosen = export_format(fmt, out)
    target = export_targets(out, chosen, sss_data)[0]
    dataset, codings = coded_data.coded_dataset(study, questions, coder, include_suggestions=include_suggestions,
                                                closed=closed, with_text=verbatims != "omit")
    if chosen == "sss":
        from opencode.export import triple_s

        written = triple_s.write_triple_s(dataset, target, data_format=sss_data, multiple=sss_multiple,
                                          verbatims=verbatims)
    else:
        written = _writer(chosen)(dataset, target, mention_columns=layout == "mentions", verbatims=verbatims)
    return ExportResult(list(written), dataset.n_respondents, [c.question for c in codings],
                        [note for c in codings for note in c.notes])


def _writer(chosen: str):
    """The writer of a tabular or labelled format, importing only its own module (and file-format library)."""
    if chosen in ("sav", "dta"):
        from opencode.export import spss_stata

        return spss_stata.write_sav if chosen == "sav" else spss_stata.write_dta
    from opencode.export import tabular

    return tabular.write_csv if chosen == "csv" else tabular.write_xlsx
