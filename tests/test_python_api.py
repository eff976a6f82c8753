"""The README's "Use from Python" section runs as written, and the public API returns what it promises."""

from __future__ import annotations

import re
import sqlite3
from pathlib import Path

import pandas as pd
import pytest

import opencode as oc

README = Path(__file__).resolve().parent.parent / "README.md"


def _readme_block() -> str:
    text = README.read_text(encoding="utf-8")
    return re.search(r"<!-- python-api -->\n```python\n(.*?)```\n<!-- /python-api -->", text, re.S).group(1)


def test_readme_python_section_runs_as_written(demo_folder, monkeypatch, capsys):
    monkeypatch.chdir(demo_folder.parent)
    exec(compile(_readme_block(), "README.md (Use from Python)", "exec"), {})
    printed = capsys.readouterr().out
    assert "share_of_respondents" in printed and "cohen_kappa" in printed


def test_codes_equal_the_study_rows(demo_folder):
    # Checked against the study file itself, read with the sqlite3 module (not through oecode).
    path = demo_folder / "wrenfield.study"
    with oc.open_study(path) as study:
        codes = study.codes("why", coder="ash")
    assert list(codes.columns) == ["respondent", "code", "label", "net", "source"]
    with sqlite3.connect(path) as db:
        expected = db.execute("SELECT count(*) FROM assignments a JOIN verbatims v ON v.id = a.verbatim_id "
                              "JOIN variables q ON q.id = v.question_id WHERE q.name = 'why' AND a.coder = 'ash'"
                              ).fetchone()[0]
        keys = {k for (k,) in db.execute("SELECT key FROM respondents")}
    assert len(codes) == expected > 0
    assert set(codes["respondent"].astype(str)) <= keys
    assert set(codes["source"]) <= {"hand", "rule", "machine"}


def test_unknown_question_is_one_clear_error(demo_folder):
    with oc.open_study(demo_folder / "wrenfield.study") as study:
        with pytest.raises(oc.OpenCodeError, match="no open question named 'nope'"):
            study.codes("nope")


def test_tables_frame_matches_the_frequency_table(demo_folder):
    with oc.open_study(demo_folder / "wrenfield.study") as study:
        result = oc.tables(study, "why")
    frame = result.to_frame()
    assert isinstance(frame, pd.DataFrame) and len(frame) == len(result.frequencies.rows)
    assert frame["count"].tolist() == list(result.frequencies.count)
