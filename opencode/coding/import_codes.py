"""Bring existing codes into a study: from the survey file (or a variable already in the study).

Layouts: `delimited` (one column, cells like "3;7" or "Theft, Loss"), `flags` (one 0/1 column per
code), `mentions` (columns 1..k each holding one code) and `long` (one row per respondent and coder,
with a coder column and optionally a question column; the demo's double-coded file). Cells hold code
numbers or labels; labels match case- and space-insensitively. Unknown labels are an error naming the row
and label unless `create` adds them as new codes. Imported codes are hand codes and the verbatims they
cover are marked done for their coder; each coder's import is one undoable change.

Codes read from a variable already in the study come as its value labels (a single-choice "Loss, Theft"
is split into Loss and Theft at the delimiter), skipping its missing codes; a created code takes the
variable's number for that label when it is free. A blank code cell on an answered verbatim means "not
coded yet" (`blank_means="uncoded"`, the default for one row per respondent) or "coded, no code applies"
(`"no-code"`: the verbatim is marked done and enters the base with no code; the default for the long layout,
whose every row is a coder's statement).
"""

from __future__ import annotations

import fnmatch
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from opencode.coding.frames import frame_id, label_key
from opencode.coding.history import Change
from opencode.errors import OpenCodeError
from opencode.ingest.readers import read_survey_file
from opencode.study import assignments_store as astore
from opencode.study import frames_store as fstore
from opencode.study import survey_data
from opencode.study.store import Study, now
from opencode.coding.choices import BLANK_MEANINGS, DEFAULT_DELIMITERS, LAYOUTS  # noqa: F401  (re-exported)

_SPLIT = re.compile(r"\s*[;,|]\s*")
_TRAILING_NUMBER = re.compile(r"(\d+)$")
_BLANK = {"", "nan", "none", "null", "\\n", "."}


@dataclass
class CodesImportReport:
    """What an import of codes did."""

    layout: str
    added: dict[str, int] = field(default_factory=dict)       # coder -> assignments added
    verbatims: dict[str, int] = field(default_factory=dict)   # coder -> verbatims covered (marked done)
    already: int = 0                                          # codes the coder already held by hand
    created: list[tuple[int, str]] = field(default_factory=list)
    unmatched_respondents: list[str] = field(default_factory=list)
    blank_means: str = "uncoded"
    blank_answered: dict[str, int] = field(default_factory=dict)  # coder -> answered verbatims with a blank cell


@dataclass
class _Source:
    frame: pd.DataFrame
    row_name: callable
    variable_labels: dict[str, str]
    origin: str
    numbers: dict[str, dict[str, int]] = field(default_factory=dict)  # column -> label key -> its value code
    raw: pd.DataFrame | None = None  # study variables as stored (numbers), for 0/1 flag columns


def _read_source(study: Study, path: str | Path | None, id_column: str) -> _Source:
    if path is not None:
        table = read_survey_file(path)
        frame = table.frame
        frame.columns = [str(c) for c in frame.columns]
        return _Source(frame, table.row_name, dict(table.variable_labels), str(table.path))
    data = {id_column: survey_data.respondent_keys(study)}
    raw = dict(data)
    numbers: dict[str, dict[str, int]] = {}
    for variable in survey_data.list_variables(study):
        if variable.role not in ("id", "question"):
            data[variable.name], numbers[variable.name] = _labelled_values(study, variable)
            raw[variable.name] = list(survey_data.raw_values(study, variable.name))
    keys = data[id_column]
    return _Source(pd.DataFrame(data), lambda i: f"respondent {keys[i]}",
                   {v.name: v.label for v in survey_data.list_variables(study)}, str(study.path), numbers,
                   pd.DataFrame(raw))


def _labelled_values(study: Study, variable: survey_data.Variable) -> tuple[list, dict[str, int]]:
    """A study variable's cells as their value labels (lists stay lists), missing codes left out, and the
    value code of each label (the number a code created from that label takes when it is free)."""
    labels, missing = variable.value_labels, set(variable.missing_codes)

    def shown(value):
        if value is None or (isinstance(value, float) and np.isnan(value)) or value in missing:
            return None
        label = labels.get(value)
        return label if label else _cell_text(value)

    cells = [[t for t in map(shown, x) if t] if isinstance(x, list) else shown(x)
             for x in survey_data.raw_values(study, variable.name)]
    numbers = {label_key(label): int(code) for code, label in labels.items()
               if float(code).is_integer() and code not in missing and code > 0}
    return cells, numbers


def _id_column_name(study: Study, id_column: str | None) -> str:
    if id_column:
        return id_column
    ids = survey_data.list_variables(study, role="id")
    return ids[0].name if ids else "respondent_id"


def _pick_columns(source: _Source, patterns: list[str]) -> list[str]:
    chosen: list[str] = []
    for pattern in patterns:
        found = [c for c in source.frame.columns if fnmatch.fnmatchcase(c, pattern)]
        if not found:
            raise OpenCodeError(f"{source.origin}: no column named {pattern!r} "
                                f"(columns: {', '.join(map(str, source.frame.columns[:30]))})")
        chosen += [c for c in found if c not in chosen]
    return chosen


def _cell_text(value) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return ""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    text = str(value).strip()
    return "" if text.lower() in _BLANK else text


def _is_flags(frame: pd.DataFrame, columns: list[str]) -> bool:
    values = {_cell_text(v) for c in columns for v in frame[c].tolist()} - {""}
    return bool(values) and values <= {"0", "1", "1.0", "0.0"}


def _key(value) -> str:
    text = _cell_text(value)
    return text[:-2] if text.endswith(".0") and text[:-2].isdigit() else text


class _CodeMatcher:
    """Turns numbers and labels into code ids, creating codes on request, naming the row when it cannot."""

    def __init__(self, study: Study, fid: int, create: bool, change: Change, report: CodesImportReport,
                 delimiter: str | None = None, numbers: dict[str, int] | None = None):
        self.study, self.fid, self.create, self.change, self.report = study, fid, create, change, report
        self.rows = fstore.code_rows(study, fid)
        self.by_number = {r["number"]: r for r in self.rows}
        self.by_label = {label_key(r["label"]): r for r in self.rows}
        self.split = _SPLIT if delimiter is None else re.compile(r"\s*" + re.escape(delimiter) + r"\s*")
        self.numbers = numbers or {}

    def _new(self, number: int | None, label: str) -> dict:
        if number is None:
            hinted = self.numbers.get(label_key(label))
            number = hinted if hinted is not None and hinted not in self.by_number else max([0, *self.by_number]) + 1
        code_id = self.change.put_code({"frame_id": self.fid, "number": number, "label": label, "kind": "code",
                                        "active": True})
        row = fstore.code_row(self.study, code_id)
        self.by_number[number] = row
        self.by_label[label_key(label)] = row
        self.report.created.append((number, label))
        return row

    def one(self, token: str, where: str) -> int:
        """The code id of one number or label."""
        if re.fullmatch(r"\d+(\.0)?", token):
            number = int(float(token))
            row = self.by_number.get(number)
            if row is None:
                if not self.create:
                    raise OpenCodeError(f"{where}: code {number} is not in the frame (use --create to add it)")
                row = self._new(number, f"code {number}")
        else:
            row = self.by_label.get(label_key(token))
            if row is None:
                if not self.create:
                    raise OpenCodeError(f"{where}: label {token!r} matches no code in the frame "
                                        "(use --create to add it)")
                row = self._new(None, token)
        if row["kind"] == "net":
            raise OpenCodeError(f"{where}: {token!r} is net {row['number']}; codes, not nets, are assigned")
        return int(row["id"])

    def cell(self, value, where: str) -> list[int]:
        """The code ids in one cell: a list's items, else the whole cell as a label first, else its parts."""
        if isinstance(value, (list, tuple)):
            return [self.one(str(token), where) for token in value if str(token).strip()]
        text = _cell_text(value)
        if not text:
            return []
        if label_key(text) in self.by_label and not re.fullmatch(r"[\d\s;,|.]+", text):
            return [self.one(text, where)]
        return [self.one(token, where) for token in self.split.split(text) if token]


def import_codes(study: Study, question: str, columns: list[str], coder: str | None = None,
                 source_path: str | Path | None = None, *, id_column: str | None = None,
                 coder_column: str | None = None, question_column: str | None = None, layout: str = "auto",
                 create: bool = False, actor: str = "oecode", delimiter: str | None = None,
                 blank_means: str | None = None) -> CodesImportReport:
    """Import codes for a question from `columns` of a file (or of the study's own variables).

    `delimiter` splits a cell of several codes (default: any of , ; |); `blank_means` says what a blank cell
    on an answered verbatim means (see the module's docstring).
    """
    if layout not in LAYOUTS:
        raise OpenCodeError(f"layout {layout!r} is not one of {', '.join(LAYOUTS)}")
    if blank_means is not None and blank_means not in BLANK_MEANINGS:
        raise OpenCodeError(f"blank cells: {blank_means!r} is not one of {', '.join(BLANK_MEANINGS)}")
    if delimiter is not None and (not delimiter or delimiter.isspace() or delimiter.isalnum()):
        raise OpenCodeError(f"delimiter {delimiter!r}: give a punctuation character or string such as ; or /")
    if coder_column is None and not coder:
        raise OpenCodeError("name the coder the codes belong to (--coder), or the file's coder column")
    id_name = _id_column_name(study, id_column)
    source = _read_source(study, source_path, id_name)
    if id_name not in source.frame.columns:
        raise OpenCodeError(f"{source.origin}: no respondent id column {id_name!r} (name it with --id)")
    names = _pick_columns(source, columns)
    frame = source.frame
    flag_frame = source.raw if source.raw is not None else frame
    rows = np.arange(len(frame))
    if question_column:
        _pick_columns(source, [question_column])
        rows = rows[frame[question_column].astype(str).str.strip().to_numpy() == question]
    if coder_column:
        _pick_columns(source, [coder_column])
        coders = frame[coder_column].map(_cell_text).to_numpy()
        if coder:
            rows = rows[coders[rows] == coder]
        layout = "long" if layout == "auto" else layout
    else:
        coders = np.full(len(frame), coder, dtype=object)
    if layout == "auto":
        layout = "delimited" if len(names) == 1 else ("flags" if _is_flags(flag_frame, names) else "mentions")
    if layout in ("delimited", "long") and len(names) != 1:
        raise OpenCodeError(f"{source.origin}: the {layout} layout reads one column; got {', '.join(names)}")
    blank_means = blank_means or ("no-code" if layout == "long" else "uncoded")
    report = CodesImportReport(layout, blank_means=blank_means)
    question_id = survey_data.get_question(study, question).id
    fid = frame_id(study, question, create=True)
    verbatim_of = astore.verbatim_ids_by_respondent(study, question_id)
    texts = survey_data.verbatims(study, question)
    non_answers = set(texts.loc[texts["nonanswer"], "verbatim_id"].tolist())
    keys = frame[id_name].map(_key).to_numpy()
    numbers = {k: v for name in names for k, v in source.numbers.get(name, {}).items()}
    with study.transaction():
        created = Change(study)
        matcher = _CodeMatcher(study, fid, create, created, report, delimiter, numbers)
        found: dict[str, dict[int, set[int]]] = {}
        for i in rows.tolist():
            where = f"{source.origin}: {source.row_name(i)}"
            who = coders[i]
            if not who:
                raise OpenCodeError(f"{where}, column {coder_column}: the coder is empty")
            codes = _row_codes(matcher, flag_frame if layout == "flags" else frame, names, i, layout, where,
                               source.variable_labels)
            verbatim_id = verbatim_of.get(keys[i])
            if not codes and verbatim_id is not None and verbatim_id not in non_answers:
                report.blank_answered[who] = report.blank_answered.get(who, 0) + 1
            if not codes and blank_means == "uncoded":
                continue
            if verbatim_id is None:
                if codes:
                    report.unmatched_respondents.append(keys[i])
                continue
            found.setdefault(who, {}).setdefault(verbatim_id, set()).update(codes)
        created.commit(actor, "add-code", "frame", fid, question=question, created=len(report.created))
        stamp = now()
        for who, coded in found.items():
            change = Change(study)
            added = 0
            for verbatim_id, codes in coded.items():
                for code_id in sorted(codes):
                    held = astore.get_assignment(study, verbatim_id, code_id, who)
                    if held is not None and held["source"] == "hand":
                        report.already += 1
                        continue
                    change.put_assignment({"verbatim_id": verbatim_id, "code_id": code_id, "coder": who,
                                           "source": "hand", "confidence": None, "created_at": stamp})
                    added += 1
                change.set_mark(verbatim_id, who, stamp)
            change.commit(who, "import-codes", "question", question_id, question=question, source=source.origin)
            report.added[who] = added
            report.verbatims[who] = len(coded)
    return report


def _row_codes(matcher: _CodeMatcher, frame: pd.DataFrame, names: list[str], i: int, layout: str, where: str,
               labels: dict[str, str]) -> list[int]:
    if layout in ("delimited", "long"):
        return matcher.cell(frame[names[0]].iat[i], f"{where}, column {names[0]}")
    if layout == "mentions":
        return [code for name in names for code in matcher.cell(frame[name].iat[i], f"{where}, column {name}")]
    codes = []
    for name in names:
        value = _cell_text(frame[name].iat[i])
        if value in ("", "0", "0.0"):
            continue
        if value not in ("1", "1.0"):
            raise OpenCodeError(f"{where}, column {name}: {value!r} is not 0 or 1")
        label = labels.get(name) or ""
        number = _TRAILING_NUMBER.search(name)
        token = label if label else (number.group(1) if number else name)
        codes.append(matcher.one(token, f"{where}, column {name}"))
    return codes
