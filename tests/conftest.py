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


@pytest.fixture(autouse=True)
def _no_inherited_columns(monkeypatch):
    """Output width as in a pipe (80, prose unwrapped) unless a test sets COLUMNS itself: a COLUMNS left in the
    environment (a shell, or a terminal library run by an earlier test in the same worker) must not change
    what a test reads."""
    monkeypatch.delenv("COLUMNS", raising=False)


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


@pytest.fixture
def locked_folder(tmp_path: Path, monkeypatch) -> Path:
    """A folder nobody may write in (mode 0555). Root ignores the mode, so under root (CI) the refusals the
    kernel gives an ordinary user are simulated at the system-call level: os.access says no, and creating,
    renaming or opening a file for writing inside the folder raises PermissionError (EACCES)."""
    import builtins
    import errno
    import os

    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(0o555)
    if os.geteuid() == 0:
        inside = str(folder.resolve())

        def within(path) -> bool:
            try:
                text = os.path.realpath(os.fspath(path))
            except TypeError:
                return False
            return text == inside or text.startswith(inside + os.sep)

        def refuse(path):
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), os.fspath(path))

        real_access, real_open, real_mkdir = os.access, os.open, os.mkdir
        real_replace, real_rename, real_builtin_open = os.replace, os.rename, builtins.open

        def access(path, mode, *args, **kwargs):
            if mode & os.W_OK and within(path):
                return False
            return real_access(path, mode, *args, **kwargs)

        def os_open(path, flags, *args, **kwargs):
            if flags & (os.O_CREAT | os.O_WRONLY | os.O_RDWR) and within(path):
                refuse(path)
            return real_open(path, flags, *args, **kwargs)

        def mkdir(path, *args, **kwargs):
            if within(os.path.dirname(os.path.abspath(path))):
                refuse(path)
            return real_mkdir(path, *args, **kwargs)

        def replace(src, dst, *args, **kwargs):
            if within(dst):
                refuse(dst)
            return real_replace(src, dst, *args, **kwargs)

        def rename(src, dst, *args, **kwargs):
            if within(dst):
                refuse(dst)
            return real_rename(src, dst, *args, **kwargs)

        def builtin_open(file, mode="r", *args, **kwargs):
            if isinstance(file, (str, bytes, os.PathLike)) and any(m in mode for m in "wax+") and within(file):
                refuse(file)
            return real_builtin_open(file, mode, *args, **kwargs)

        monkeypatch.setattr(os, "access", access)
        monkeypatch.setattr(os, "open", os_open)
        monkeypatch.setattr(os, "mkdir", mkdir)
        monkeypatch.setattr(os, "replace", replace)
        monkeypatch.setattr(os, "rename", rename)
        monkeypatch.setattr(builtins, "open", builtin_open)
    yield folder
    folder.chmod(0o755)


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
