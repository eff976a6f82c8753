"""Shared fixtures: small survey files written in the test's own folder, and the double-coded demo study."""

from __future__ import annotations

import contextlib
import io
import shutil
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import pytest

from opencode.coding import frame_io, import_codes
from opencode.demo_job import build_demo_study
from opencode.resources import demo_dir
from opencode.study.store import Study


@pytest.fixture
def small_csv(tmp_path: Path) -> Path:
    """A tiny survey export with an id, one open question and a few closed-ended columns."""
    path = tmp_path / "survey.csv"
    path.write_text(
        "rid,why,support,age,chosen\n"
        "A1,Not safe without staff,1,2,\"1,3\"\n"
        "A2,n/a,5,3,2\n"
        "A3,Great idea for students,9,1,\n"
        "A4,dont know,4,2,1\n",
        encoding="utf-8")
    return path


def build_double_coded(path: Path) -> Path:
    """The demo study with the 'why' frame and ash's and bryn's codes imported by the coding library."""
    build_demo_study(path)
    with Study.open(path) as study:
        frame_io.import_frame(study, "why", demo_dir() / "frame-why.csv")
        import_codes.import_codes(study, "why", ["codes"], source_path=demo_dir() / "double-coded.csv",
                                  id_column="respondent_id", coder_column="coder", question_column="question")
    return path


@pytest.fixture(scope="session")
def demo_base(tmp_path_factory) -> Path:
    return build_double_coded(tmp_path_factory.mktemp("demo") / "base.study")


@pytest.fixture
def demo_copy(demo_base: Path, tmp_path: Path) -> Path:
    """A fresh copy of the double-coded demo study for one test."""
    target = tmp_path / "wrenfield.study"
    shutil.copyfile(demo_base, target)
    return target


@pytest.fixture
def csv_sets() -> dict[str, dict[str, frozenset[int]]]:
    """coder -> respondent -> codes on 'why', read straight from demo/double-coded.csv."""
    table = pd.read_csv(demo_dir() / "double-coded.csv", dtype=str, keep_default_na=False)
    table = table[table["question"] == "why"]
    sets: dict[str, dict[str, frozenset[int]]] = {}
    for rid, coder, codes in table[["respondent_id", "coder", "codes"]].itertuples(index=False):
        sets.setdefault(coder, {})[rid] = frozenset(int(c) for c in codes.split(";") if c.strip())
    return sets


@dataclass(frozen=True)
class DemoRun:
    """What one `oecode demo` left behind: its output folder, its exit status and what it printed."""

    folder: Path
    status: int
    printed: str


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory) -> DemoRun:
    """`oecode demo` run once per test session (per worker): tests read it or copy its folder."""
    from opencode.cli import main

    folder = tmp_path_factory.mktemp("demo-run") / "oecode-demo"
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        status = main(["demo", "--out", str(folder)])
    return DemoRun(folder, status, printed.getvalue())


@pytest.fixture
def demo_folder(demo_run: DemoRun, tmp_path: Path) -> Path:
    """A private copy of the demo's output folder at tmp_path/oecode-demo (the README's paths work from tmp_path)."""
    target = tmp_path / "oecode-demo"
    shutil.copytree(demo_run.folder, target)
    return target


from team_server import pg_server  # noqa: E402,F401  (the session's PostgreSQL cluster, for tests/test_team_*.py)
