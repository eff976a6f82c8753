"""Builders shared by several test modules: small invented studies and datasets, and the desk app on them.

tests/ has no __init__.py; pytest puts it on sys.path (the conftest.py there), so `from helpers import ...` works.
Fixtures shared between modules live in conftest.py instead.
"""

from __future__ import annotations

import csv
import hashlib
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pandas as pd

from opencode.coding import frame_io, frames, import_codes
from opencode.coding.assignments import assign, assignments, mark_done
from opencode.demo_job import build_demo_study
from opencode.export.dataset import ClosedVariable, CodedDataset, CodedQuestion, FrameCode
from opencode.ingest.importer import ImportOptions, import_survey
from opencode.resources import demo_dir
from opencode.study import survey_data
from opencode.study.store import Study
from opencode.tui.app import DeskApp
from opencode.tui.session import DeskSession


# -- an export dataset (test_export_*.py, test_triple_s.py) ---------------------------------------------------
WHY_FRAME = [
    FrameCode(1, "Staff make it feel safe", net=20),
    FrameCode(2, "Worried about evenings alone", net=20),
    FrameCode(3, "Longer hours suit shift workers", net=21),
    FrameCode(4, "Students need late study space", net=21),
    FrameCode(5, "=Waste of money"),
    FrameCode(20, "Safety", is_net=True),
    FrameCode(21, "Access", is_net=True),
]
WHY_CODES = [{1, 2}, {3}, set(), {2, 4, 5}, {5}, {1, 3}]
WHY_TEXTS = [
    "I'd feel unsafe, call me on 07700 900123",
    "=HYPERLINK(\"http://example.org\")",
    "",
    "@SUM(1+1) evenings are lonely",
    "-2+3 waste",
    None,
]


def small_dataset(ids=None, **kwargs) -> CodedDataset:
    """Six invented Wrenfield respondents, one coded question with two nets, two closed-ended variables."""
    ids = ids if ids is not None else [101, 102, 103, 104, 105, 106]
    why = CodedQuestion("why", "Why do you say that?", WHY_FRAME, WHY_CODES, WHY_TEXTS)
    change = CodedQuestion(
        "change", "What one change would most improve your library?",
        [FrameCode(1, "More books"), FrameCode(2, "Quiet rooms"), FrameCode(3, "Nothing")],
        {ids[0]: [1], ids[2]: [2, 1], ids[5]: [3]},
        ["more books", "", "quiet rooms and books", "", "", "nothing"],
    )
    support = ClosedVariable(
        "support", [1, 5, 9, 4, None, 2], "Support for late opening",
        {1: "strongly oppose", 2: "oppose", 3: "neither", 4: "support", 5: "strongly support", 9: "refused"}, [9],
    )
    weight = ClosedVariable("weight", [1.2, 0.8, 1.0, 1.5, 0.75, 0.9], "Survey weight")
    return CodedDataset(ids, [why, change], [support, weight], title="Wrenfield library hours", **kwargs)


# -- the coded demo study (test_coded_data.py, test_output_cli.py, test_report.py) ---------------------------
MACHINE_SUGGESTIONS = 40
RULE_SUGGESTIONS = 10


def build_fixture_study(folder: Path) -> Path:
    """The demo study with both frames, the double-coded file (ash, bryn), ash's 'why' codes copied as the
    confirmed 'final' codes, machine and rule suggestions for 'final', and an e-mail verbatim coded 97."""
    path = folder / "wrenfield.study"
    build_demo_study(path)
    double = demo_dir() / "double-coded.csv"
    final_file = folder / "final-why.csv"
    rows = pd.read_csv(double, dtype=str, keep_default_na=False)
    rows[(rows["coder"] == "ash") & (rows["question"] == "why")].assign(coder="final").to_csv(final_file, index=False)
    with Study.open(path) as study:
        for question in ("why", "improve"):
            frame_io.import_frame(study, question, demo_dir() / f"frame-{question}.csv")
        for source in (double, final_file):
            for question in ("why", "improve"):
                import_codes.import_codes(study, question, ["codes"], source_path=source, id_column="respondent_id",
                                          coder_column="coder", question_column="question")
        texts = survey_data.verbatims(study, "why")
        held = set(assignments(study, "why", ["final"])["verbatim_id"])
        free = texts[~texts["verbatim_id"].isin(held) & ~texts["nonanswer"]]
        email = free[free["text"].str.contains("@", regex=False)]["verbatim_id"].iloc[0]
        assign(study, int(email), 97, "final")
        mark_done(study, int(email), "final")
        spare = [v for v in free["verbatim_id"] if v != email]
        for verbatim_id in spare[:MACHINE_SUGGESTIONS]:
            assign(study, int(verbatim_id), 7, "final", source="machine", confidence=0.8)
        for verbatim_id in spare[MACHINE_SUGGESTIONS:MACHINE_SUGGESTIONS + RULE_SUGGESTIONS]:
            assign(study, int(verbatim_id), 1, "final", source="rule")
    return path


def copy_study(source: Path, folder: Path) -> Path:
    """A private copy of a closed study (WAL checkpointed on close), for tests that change it."""
    folder.mkdir(parents=True, exist_ok=True)
    target = folder / source.name
    shutil.copy(source, target)
    return target


def add_numeric(study: Study, name: str, values, kind: str = "numeric", labels=None) -> None:
    """Add a closed-ended variable with the given values to the study (one transaction)."""
    with study.transaction():
        variable_id = survey_data.add_variable(study, name, label=name, kind=kind, role="other", value_labels=labels)
        survey_data.write_values(study, variable_id, np.asarray(values, dtype=float))


# -- a one-question study of given texts (test_assignments.py, test_rules.py, test_import_codes.py, test_machine.py)
def make_text_study(folder: Path, texts: list[str]) -> Study:
    """An open study of one question 'why' holding the given verbatims (respondents R0, R1, ...)."""
    source = folder / "s.csv"
    with open(source, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["rid", "why"])
        writer.writerows([[f"R{i}", t] for i, t in enumerate(texts)])
    import_survey(folder / "t.study", source, ImportOptions(id_column="rid", questions=["why"]))
    return Study.open(folder / "t.study")


# -- the desk (test_desk*.py) ------------------------------------------------------------------------------
SURVEY = (
    "rid,why,support\n"
    "A1,Not safe without staff at night,1\n"
    "A2,Great for students after work,5\n"
    "A3,dont know,3\n"
    "A4,Staff jobs will be cut and nobody to help,1\n"
    "A5,Evening hours suit shift workers,4\n"
)


def make_desk_study(folder: Path) -> Path:
    """A five-respondent study with a small frame: net 90 holding codes 1 (s) and 2 (j), code 3 (h) alone."""
    csv = folder / "survey.csv"
    csv.write_text(SURVEY, encoding="utf-8")
    path = folder / "desk.study"
    import_survey(path, csv, ImportOptions("rid", ["why"]))
    with Study.open(path) as study:
        frames.add_code(study, "why", "Concerns", number=90, kind="net")
        frames.add_code(study, "why", "Not safe without staff", number=1, hotkey="s", net=90, rule="safe OR night")
        frames.add_code(study, "why", "Staff jobs", number=2, hotkey="j", net=90)
        frames.add_code(study, "why", "Convenient hours", number=3, hotkey="h")
    return path


def on_disk(path: Path, sql: str, params=()) -> list[tuple]:
    """Rows read through a fresh connection: what a crash right now would leave."""
    connection = sqlite3.connect(path)
    try:
        return connection.execute(sql, params).fetchall()
    finally:
        connection.close()


def make_app(path: Path, coder: str = "ash") -> DeskApp:
    """The desk on a study's question 'why' for one coder, with a fixed clock and no timers."""
    return DeskApp(DeskSession(path, "why", coder, clock=lambda: 0.0), refresh_seconds=0, show_pace=False)


def file_digest(path: Path) -> str:
    """A digest of a file's bytes (or 'absent'), to prove a failed command changed nothing."""
    return hashlib.sha256(path.read_bytes()).hexdigest() if path.exists() else "absent"


# -- real client programs (PSPP, Chromium, PostgreSQL, tmux) ------------------------------------------------
#: Install hints for the real programs some tests drive; .ci/run installs them all.
PROGRAM_HINTS = {
    "pspp": "apt-get install -y pspp",
    "chromium": "apt-get install -y chromium",
    "tmux": "apt-get install -y tmux",
    "pg_ctl": "apt-get install -y postgresql",
    "initdb": "apt-get install -y postgresql",
    "Rscript": "apt-get install -y r-cran-survey (R with the survey package: the Rao-Scott reference)",
}


def require_program(name: str, *candidates: str) -> str:
    """The path of a real program a test drives; skip with an install hint when it is absent.

    Under CI (`OECODE_CI=1`, set by .ci/run) a missing program is a failure, never a skip.
    """
    import os
    import pytest

    for candidate in (name, *candidates):
        found = shutil.which(candidate) or (candidate if Path(candidate).is_absolute() and Path(candidate).exists()
                                            else None)
        if found:
            return found
    message = f"{name} is not installed; install it with: {PROGRAM_HINTS.get(name, name)}"
    if os.environ.get("OECODE_CI") == "1":
        pytest.fail(message + " (OECODE_CI=1: CI must run this test)")
    pytest.skip(message)
