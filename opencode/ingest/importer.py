"""Import a survey export into a study: a new study file, or a later wave merged by respondent id.

A new study is built in a temporary file and renamed into place only when complete; a merge runs in one
transaction. Either way a bad file leaves the study exactly as it was.
"""

from __future__ import annotations

import difflib
import json
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import pandas as pd

from opencode.errors import OpenCodeError, WriteFailed
from opencode.files.safe_write import describe_os_error, make_temporary, normal_file_mode, remove_own_temporaries
from opencode.ingest.columns import ColumnPlan, clean_text, combine_dichotomies, convert, infer_kind
from opencode.ingest.labels_file import apply_labels_file
from opencode.ingest.nonanswers import flag_nonanswers
from opencode.ingest.readers import RawTable, read_survey_file
from opencode.ingest.text_cells import respondent_keys
from opencode.study import survey_data
from opencode.study.address import ServerAddress
from opencode.study.store import Study, as_study_target, study_exists

#: The largest single answer accepted (characters); a bigger cell is almost always a broken export.
MAX_CELL_CHARS = 1_000_000


@dataclass
class ImportOptions:
    """How to read the file and what each column is."""

    id_column: str
    questions: list[str]
    sheet: str | int | None = None
    encoding: str | None = None
    delimiter: str | None = None
    labels_file: str | Path | None = None
    kinds: dict[str, str] = field(default_factory=dict)
    roles: dict[str, str] = field(default_factory=dict)
    weight: str | None = None
    multi: dict[str, list[str]] = field(default_factory=dict)
    missing: dict[str, list[float]] = field(default_factory=dict)
    max_cell_chars: int = MAX_CELL_CHARS


@dataclass
class ChangedVerbatim:
    """A verbatim whose text differs in the new file: reported and kept as it was."""

    question: str
    respondent: str
    old_text: str
    new_text: str


@dataclass
class ImportReport:
    """What an import did."""

    study_path: Path | ServerAddress
    source: Path
    created: bool
    respondents_added: int = 0
    respondents_updated: int = 0
    variables_added: list[str] = field(default_factory=list)
    verbatims_added: int = 0
    nonanswers: int = 0
    changed_verbatims: list[ChangedVerbatim] = field(default_factory=list)
    encoding: str | None = None


def _unknown_column(table: RawTable, name: str, what: str) -> OpenCodeError:
    columns = [str(c) for c in table.frame.columns]
    close = difflib.get_close_matches(name, columns, n=3)
    hint = f" (did you mean {', '.join(close)}?)" if close else f" (columns: {', '.join(columns[:30])})"
    return OpenCodeError(f"{table.path}: no column named {name!r} for {what}{hint}")


def _check_columns(table: RawTable, options: ImportOptions) -> None:
    wanted = [(options.id_column, "--id")] + [(q, "--question") for q in options.questions]
    wanted += [(c, "--kind") for c in options.kinds] + [(c, "--role") for c in options.roles]
    wanted += [(c, "--missing") for c in options.missing]
    if options.weight:
        wanted.append((options.weight, "--weight"))
    for members in options.multi.values():
        wanted += [(c, "--multi") for c in members]
    for name, what in wanted:
        if name not in table.frame.columns:
            raise _unknown_column(table, name, what)
    if options.id_column in options.questions:
        raise OpenCodeError(f"{table.path}: column {options.id_column!r} cannot be both the id and a question")


def _respondent_keys(table: RawTable, id_column: str) -> list[str]:
    raw = table.frame[id_column]
    keys = respondent_keys(raw)
    blank = keys.isin(["", "\\N", "NULL", "nan"]).to_numpy(dtype=bool)
    if blank.any():
        rows = [table.row_name(i) for i in np.flatnonzero(blank)[:5]]
        raise OpenCodeError(f"{table.path}: column {id_column}: missing respondent id in {', '.join(rows)}")
    listed = keys.tolist()
    if len(set(listed)) < len(listed):
        duplicated = keys.duplicated(keep=False)
        first = keys[duplicated].iloc[0]
        where = np.flatnonzero((keys == first).to_numpy())[:5]
        rows = [table.row_name(i) for i in where]
        written = [str(v).strip() for v in raw.iloc[where]]
        same = f" (written {', '.join(repr(w) for w in dict.fromkeys(written))}: one number)" \
            if len(set(written)) > 1 else ""
        raise OpenCodeError(f"{table.path}: column {id_column}: respondent id {first!r} appears more than once "
                            f"({', '.join(rows)}){same}")
    return listed


def _check_cell_sizes(table: RawTable, options: ImportOptions) -> None:
    for name in table.frame.columns:
        series = table.frame[name]
        if pd.api.types.is_numeric_dtype(series):
            continue
        lengths = series.astype(str).str.len().to_numpy()
        if len(lengths) and lengths.max() > options.max_cell_chars:
            row = int(lengths.argmax())
            megabytes = lengths[row] / 1_000_000
            raise OpenCodeError(f"{table.path}: {table.row_name(row)}, column {name}: a cell of {megabytes:.1f} million "
                                f"characters is over the limit of {options.max_cell_chars:,} for one answer "
                                "(a broken export?)")


def plan_columns(table: RawTable, options: ImportOptions) -> list[ColumnPlan]:
    """Decide every variable the file brings: questions, closed-ended items, weight, multiple response."""
    for name, codes in options.missing.items():
        table.missing_codes.setdefault(name, [])
        table.missing_codes[name] += [c for c in codes if c not in table.missing_codes[name]]
    consumed = {c for members in options.multi.values() for c in members}
    plans = [ColumnPlan(options.id_column, "text", "id", table.variable_labels.get(options.id_column, ""))]
    for name in table.frame.columns:
        if name == options.id_column or name in consumed:
            continue
        if name in options.questions:
            plan = ColumnPlan(name, "text", "question", table.variable_labels.get(name, ""))
            plan.values = clean_text(table.frame[name])
            plan.values_json = json.dumps(plan.values.tolist())  # serialised here, off the writing thread
        else:
            kind = options.kinds.get(name) or ("numeric" if name == options.weight else infer_kind(table, name))
            plan = convert(table, name, kind)
            plan.role = "weight" if name == options.weight else ("banner" if kind in ("single", "multiple") else "other")
        plan.role = options.roles.get(name, plan.role)
        plans.append(plan)
    for name, members in options.multi.items():
        plans.append(combine_dichotomies(table, name, members))
    return plans


def import_survey(study_path: str | Path, source: str | Path, options: ImportOptions,
                  progress: Callable[[str], None] | None = None) -> ImportReport:
    """Import `source` into the study at `study_path` (created if missing, else merged by respondent id)."""
    say = progress or (lambda message: None)
    study_path = as_study_target(study_path)
    say(f"reading {source}")
    table = read_survey_file(source, sheet=options.sheet, encoding=options.encoding, delimiter=options.delimiter,
                             text_columns=(options.id_column, *options.questions), defer_checks=True)
    if options.labels_file:
        apply_labels_file(table, options.labels_file)
    if not options.questions:
        raise OpenCodeError(f"{table.path}: name at least one open question column (--question)")
    _check_columns(table, options)
    _check_cell_sizes(table, options)
    report = ImportReport(study_path, Path(source), created=not study_exists(study_path), encoding=table.encoding)
    say("writing the study")
    # Columns are converted on the second core while this thread checks the ids and SQLite writes the
    # respondents (SQLite and the Arrow string kernels release the GIL).
    with ThreadPoolExecutor(max_workers=1) as pool:
        plans = pool.submit(plan_columns, table, options)
        keys = _respondent_keys(table, options.id_column)
        if report.created and isinstance(study_path, ServerAddress):  # created and filled in one transaction
            Study.create(study_path, fill=lambda study: _write(study, keys, plans.result, report, table)).close()
        elif report.created:
            _create_then_rename(study_path, lambda study: _write(study, keys, plans.result, report, table))
        else:
            with Study.open(study_path) as study, study.transaction():
                _write(study, keys, plans.result, report, table)
    return report


def _create_then_rename(target: Path, fill: Callable[[Study], None]) -> None:
    if target.suffix != ".study":
        raise OpenCodeError(f"{target}: a study file name must end in .study")
    if not target.parent.exists():
        raise OpenCodeError(f"{target}: the folder {target.parent} does not exist")
    temp = None
    try:
        temp = make_temporary(target, ".study")  # a killed run's leftover is removed by the next run here
        os.chmod(temp, normal_file_mode())
        study = Study.create(temp, overwrite=True)
        try:
            with study.private_bulk_load(), study.transaction():
                fill(study)
        finally:
            study.close()
        os.replace(temp, target)
    except WriteFailed as error:  # name the study the user asked for, not the temporary file
        raise WriteFailed(str(error).replace(str(temp), str(target)) if temp else str(error)) from None
    except OSError as error:
        raise WriteFailed(describe_os_error(error, target)) from None
    finally:  # by name, so that a Ctrl+C between the file's creation and `temp` being set leaves nothing either
        remove_own_temporaries(target)


def _write(study: Study, keys: list[str], plans: Callable[[], list[ColumnPlan]], report: ImportReport,
           table: RawTable) -> None:
    existing = survey_data.respondent_ids_by_key(study)
    next_id = len(existing) + 1
    new_keys = [k for k in keys if k not in existing] if existing else keys
    survey_data.add_respondents(study, next_id, new_keys)
    report.respondents_added = len(new_keys)
    report.respondents_updated = len(keys) - len(new_keys)
    if existing:
        existing.update((key, next_id + i) for i, key in enumerate(new_keys))
        respondent_ids = np.fromiter((existing[k] for k in keys), dtype=np.int64, count=len(keys))
    else:  # a first import: respondents are numbered in file order
        respondent_ids = np.arange(next_id, next_id + len(keys), dtype=np.int64)
    total = next_id - 1 + len(new_keys)
    for plan in plans():
        variable_id = _upsert_variable(study, plan, report)
        if plan.role == "id":
            continue
        if plan.role == "question":
            _write_verbatims(study, variable_id, plan, respondent_ids, report)
        else:
            _write_values(study, variable_id, plan, respondent_ids, total)
    table.verify()  # the row check ran on the other core while SQLite wrote; a bad row undoes all of it
    study.audit("import", "import", "study", None, {
        "source": str(report.source), "source_path": os.path.abspath(report.source),
        "respondents_added": report.respondents_added,
        "respondents_updated": report.respondents_updated, "variables_added": report.variables_added,
        "verbatims_added": report.verbatims_added, "changed_verbatims": len(report.changed_verbatims)})


def _upsert_variable(study: Study, plan: ColumnPlan, report: ImportReport) -> int:
    row = survey_data.variable_identity(study, plan.name)
    if row is None:
        report.variables_added.append(plan.name)
        return survey_data.add_variable(study, plan.name, label=plan.label, kind=plan.kind, role=plan.role,
                                        value_labels=plan.value_labels, missing_codes=plan.missing_codes)
    variable_id, kind, role = row
    if kind != plan.kind and not (role == "question" and plan.role == "question"):
        raise OpenCodeError(f"{report.source}: column {plan.name} is {plan.kind} here but {kind} in the study "
                            f"{study.path.name}; use --kind {plan.name}={kind}")
    if plan.label:
        survey_data.set_variable_label(study, variable_id, plan.label)
    labels = survey_data.get_variable(study, plan.name).value_labels
    for code, label in plan.value_labels.items():
        labels.setdefault(code, label)
    survey_data.set_value_labels(study, variable_id, labels)
    survey_data.add_missing_codes(study, variable_id, plan.missing_codes)
    return variable_id


def _write_values(study: Study, variable_id: int, plan: ColumnPlan, respondent_ids: np.ndarray, total: int) -> None:
    old = survey_data.stored_values(study, variable_id)
    positions = respondent_ids - 1
    if isinstance(plan.values, np.ndarray):
        values = np.full(total, np.nan)
        if old is not None:
            values[: len(old)] = old
        values[positions] = plan.values
    else:
        values = [None] * total
        if old is not None:
            values[: len(old)] = old
        for position, value in zip(positions.tolist(), plan.values):
            values[position] = value
    survey_data.write_values(study, variable_id, values)


def _write_verbatims(study: Study, question_id: int, plan: ColumnPlan, respondent_ids: np.ndarray,
                     report: ImportReport) -> None:
    texts: pd.Series = plan.values
    has_any = survey_data.question_has_verbatims(study, question_id)
    consecutive = len(respondent_ids) > 0 and bool(np.all(np.diff(respondent_ids) == 1))
    if not has_any and consecutive:  # a new question over a block of respondents: one bulk statement
        # Flag non-answers on the second core while SQLite writes (both release the GIL), then mark them.
        with ThreadPoolExecutor(max_workers=1) as pool:
            pending = pool.submit(flag_nonanswers, texts)
            survey_data.add_verbatim_block(study, question_id, int(respondent_ids[0]),
                                           plan.values_json or json.dumps(texts.tolist()))
            flags = pending.result()
        survey_data.flag_nonanswer_rows(study, question_id, respondent_ids[flags])
        report.verbatims_added += len(texts)
        report.nonanswers += int(flags.sum())
        return
    flags = flag_nonanswers(texts)
    known = survey_data.verbatims_by_respondent(study, question_id)
    rows = []
    for rid, text, flag in zip(respondent_ids.tolist(), texts.tolist(), flags.tolist()):
        if rid in known:
            old_text, key = known[rid]
            if old_text != text:
                report.changed_verbatims.append(ChangedVerbatim(plan.name, key, old_text, text))
            continue
        rows.append((question_id, rid, text, flag))
    survey_data.add_verbatims(study, rows)
    report.verbatims_added += len(rows)
    report.nonanswers += sum(row[3] for row in rows)
