"""Writes that fail half-way (disk full, read-only file system, no permission, Ctrl+C, a kill) give one clear
line naming the file, exit non-zero and leave nothing half-written: no partial output, no temporary file,
no verbatim text in the shared temporary folder, the study byte-identical.

Disk full is simulated (ENOSPC raised by the write) everywhere, and real on a 2 MB tmpfs where the test can
mount one (root, as in CI). The read-only folder is real for an ordinary user (mode 0555) and simulated at
the system-call level under root (tests/conftest.py `locked_folder`); one test also runs the command as an
unprivileged user with setpriv, so the kernel itself refuses.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest

from opencode.cli import main
from opencode.errors import WriteFailed
from opencode.export.tabular import write_csv, write_xlsx
from opencode.files import safe_write
from opencode.files.safe_write import TEMP_PREFIX, atomic_open, clean_stale_temporaries
from helpers import file_digest, make_desk_study, small_dataset

OECODE = [sys.executable, "-c", "import sys; from opencode.cli import main; sys.exit(main())"]


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def desk_study(tmp_path) -> Path:
    return make_desk_study(tmp_path)


def _raise_on_write(monkeypatch, number: int, where: str = "io") -> None:
    """Make writing a file's content fail with OSError(number) (what a full or read-only disk does)."""
    real_open = open

    class Failing:
        def __init__(self, handle):
            self._handle = handle

        def write(self, *args):
            raise OSError(number, os.strerror(number))

        def __getattr__(self, name):
            return getattr(self._handle, name)

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self._handle.close()

    def failing_open(file, mode="r", *args, **kwargs):
        handle = real_open(file, mode, *args, **kwargs)
        if any(m in mode for m in "wa") and os.path.basename(str(file)).startswith(TEMP_PREFIX):
            return Failing(handle)
        return handle

    monkeypatch.setattr("builtins.open", failing_open)


@pytest.mark.parametrize("number,words", [(errno.ENOSPC, "the disk is full"), (errno.EROFS, "read-only"),
                                          (errno.EDQUOT, "quota"), (errno.EIO, "input/output error")])
def test_failed_write_is_one_line_and_leaves_the_old_file(tmp_path, demo_copy, capsys, monkeypatch, number, words):
    out = tmp_path / "old.csv"
    out.write_bytes(b"previous export")
    before = file_digest(demo_copy)
    _raise_on_write(monkeypatch, number)
    code, _, err = run(capsys, "export", demo_copy, "--format", "csv", "--coder", "ash", "--out", out, "--overwrite")
    assert code == 1 and "old.csv: could not write: " in err and words in err and "nothing was written" in err
    assert len(err.strip().splitlines()) == 1
    assert out.read_bytes() == b"previous export" and file_digest(demo_copy) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(TEMP_PREFIX)]


def test_failed_rename_is_one_line(tmp_path, monkeypatch):
    monkeypatch.setattr(os, "replace", lambda *a, **k: (_ for _ in ()).throw(OSError(errno.EROFS, "Read-only")))
    with pytest.raises(WriteFailed, match="x.csv: could not write: the file system is read-only"):
        write_csv(small_dataset(), tmp_path / "x.csv")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("verb", ["export", "report", "frame", "tables"])
def test_read_only_folder_for_each_writer(desk_study, locked_folder, capsys, verb):
    before = file_digest(desk_study)
    argv = {"export": ["export", desk_study, "--format", "xlsx", "--out", locked_folder / "x.xlsx"],
            "report": ["report", desk_study, "--out", locked_folder / "r.html"],
            "frame": ["frame", desk_study, "codebook", "--question", "why", "--file", locked_folder / "c.md"],
            "tables": ["tables", desk_study, "--question", "why", "--out", locked_folder / "t.csv"]}[verb]
    code, _, err = run(capsys, *argv)
    assert code == 1 and "no permission to write" in err and len(err.strip().splitlines()) == 1
    assert list(locked_folder.iterdir()) == [] and file_digest(desk_study) == before


def test_new_study_in_a_read_only_folder(tmp_path, locked_folder, capsys):
    source = tmp_path / "s.csv"
    source.write_text("rid,why\nA1,fine\n", encoding="utf-8")
    code, _, err = run(capsys, "new", locked_folder / "s.study", "--from", source, "--id", "rid", "--question", "why")
    assert code == 1 and "s.study: could not write: no permission" in err
    assert list(locked_folder.iterdir()) == []


def test_read_only_folder_refused_by_the_kernel_for_an_unprivileged_user(tmp_path, desk_study):
    """The real thing: the command runs as an ordinary user (setpriv under root; as itself otherwise) in a
    folder of mode 0555, so the operating system refuses, not a simulation."""
    shared = Path(tempfile.mkdtemp(prefix="oecode-ro-"))
    try:
        shared.chmod(0o755)
        study = shared / "desk.study"
        shutil.copy(desk_study, study)
        study.chmod(0o644)
        locked = shared / "locked"
        locked.mkdir()
        locked.chmod(0o555)
        command = [*OECODE, "export", str(study), "--format", "csv", "--out", str(locked / "x.csv")]
        if os.geteuid() == 0:
            setpriv = shutil.which("setpriv")
            if setpriv is None:
                pytest.fail("setpriv (util-linux) is needed to run the command as an unprivileged user")
            command = [setpriv, "--reuid=65534", "--regid=65534", "--clear-groups", *command]
        result = subprocess.run(command, capture_output=True, text=True, timeout=120, cwd=shared,
                                env={**os.environ, "HOME": str(shared)})
        assert result.returncode == 1, result.stderr
        assert "no permission to write" in result.stderr and "Traceback" not in result.stderr
        assert list(locked.iterdir()) == []
    finally:
        (shared / "locked").chmod(0o755)
        shutil.rmtree(shared, ignore_errors=True)


def test_disk_full_on_a_real_2mb_tmpfs(tmp_path, demo_copy, capsys):
    """A real full disk: a 2 MB tmpfs (needs root to mount; CI runs as root)."""
    if os.geteuid() != 0 or not shutil.which("mount"):
        if os.environ.get("OECODE_CI") == "1":
            pytest.fail("CI must mount the 2 MB tmpfs (run as root)")
        pytest.skip("mounting a tmpfs needs root; the simulated ENOSPC tests cover this as a user")
    disk = tmp_path / "small"
    disk.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=2m", "tmpfs", str(disk)]).returncode != 0:
        pytest.fail("could not mount a 2 MB tmpfs as root")
    try:
        source = tmp_path / "big.csv"
        rows = "".join(f"R{i},{'a long answer about late opening hours ' * 3}{i}\n" for i in range(40_000))
        source.write_text("rid,why\n" + rows, encoding="utf-8")
        code, _, err = run(capsys, "new", disk / "big.study", "--from", source, "--id", "rid", "--question", "why")
        assert code == 1 and "big.study: could not write: the disk is full" in err, err
        assert list(disk.iterdir()) == []  # no study, no temporary study
        (disk / "filler").write_bytes(b"\0" * (2 * 1024 * 1024 - 64 * 1024))
        before = file_digest(demo_copy)
        code, _, err = run(capsys, "export", demo_copy, "--format", "csv", "--coder", "ash", "--verbatims", "raw",
                           "--out", disk / "x.csv")
        assert file_digest(demo_copy) == before
        assert code == 1 and "could not write: the disk is full" in err, err
        assert sorted(p.name for p in disk.iterdir()) == ["filler"]
    finally:
        subprocess.run(["umount", str(disk)])


def test_study_disk_full_during_a_merge_is_one_line_and_rolled_back(tmp_path, desk_study, capsys, monkeypatch):
    """SQLite's own 'database or disk is full' (SQLITE_FULL), forced with a page limit on the connection."""
    import opencode.study.store as store

    real_connect = store._connect

    def tiny(path):
        connection = real_connect(path)
        pages = connection.execute("PRAGMA page_count").fetchone()[0]
        connection.execute(f"PRAGMA max_page_count = {pages}")
        return connection

    monkeypatch.setattr(store, "_connect", tiny)
    before = file_digest(desk_study)
    wave = tmp_path / "wave.csv"
    wave.write_text("rid,why\n" + "".join(f"B{i},{'new answer ' * 20}\n" for i in range(500)), encoding="utf-8")
    code, _, err = run(capsys, "new", desk_study, "--from", wave, "--id", "rid", "--question", "why")
    assert code == 1 and "desk.study: could not write: the disk is full; the change was not saved" in err
    monkeypatch.setattr(store, "_connect", real_connect)
    assert file_digest(desk_study) == before


# -- temporary files -------------------------------------------------------------------------------------------
def test_a_killed_runs_temporary_files_are_removed_by_the_next_run(tmp_path):
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    pid = int(dead.stdout)  # a process that has ended
    host = safe_write._host_tag()
    leftovers = [tmp_path / f"{TEMP_PREFIX}{pid}-{host}-x.csv.abc.csv",
                 tmp_path / f"{TEMP_PREFIX}{pid}-{host}-k.study.def.study",
                 tmp_path / f"{TEMP_PREFIX}{pid}-{host}-k.study.def.study-wal"]
    for path in leftovers:
        path.write_text("raw verbatims of a killed run")
    private = tmp_path / f"{TEMP_PREFIX}{pid}-{host}-x.xlsx.ghi.d"
    private.mkdir()
    (private / "openpyxl.sheet.xml").write_text("raw verbatims")
    alive = tmp_path / f"{TEMP_PREFIX}{os.getpid()}-{host}-mine.csv.jkl.csv"
    alive.write_text("in use")
    foreign = tmp_path / f"{TEMP_PREFIX}{pid}-ffffffff-x.csv.mno.csv"
    foreign.write_text("another computer's, recent")
    with atomic_open(tmp_path / "next.csv") as handle:
        handle.write("x")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([alive.name, foreign.name, "next.csv"])
    old = time.time() - safe_write.FOREIGN_TEMP_AGE - 60
    os.utime(foreign, (old, old))
    assert clean_stale_temporaries(tmp_path) == [foreign]


def test_xlsx_export_spills_nothing_into_the_shared_temp_folder(tmp_path, monkeypatch):
    shared = tmp_path / "shared-tmp"
    shared.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(shared))
    seen = []
    import openpyxl.worksheet._writer as writer

    real = writer.create_temporary_file

    def spy(suffix=""):
        path = real(suffix)
        seen.append(Path(path))
        return path

    monkeypatch.setattr(writer, "create_temporary_file", spy)
    out = tmp_path / "out"
    out.mkdir()
    write_xlsx(small_dataset(), out / "x.xlsx", verbatims="raw")
    assert seen and all(shared not in p.parents and p.parent.parent == out for p in seen)
    assert list(shared.iterdir()) == [] and sorted(p.name for p in out.iterdir()) == ["x.xlsx"]
    assert tempfile.tempdir == str(shared)  # restored


def test_ctrl_c_during_new_leaves_no_study_and_exits_non_zero(tmp_path):
    source = tmp_path / "big.csv"
    with open(source, "w", encoding="utf-8") as handle:
        handle.write("rid,why,support\n")
        for i in range(400_000):
            handle.write(f"R{i},some answer about the library number {i},{i % 5 + 1}\n")
    target = tmp_path / "out" / "big.study"
    target.parent.mkdir()
    process = subprocess.Popen([*OECODE, "new", str(target), "--from", str(source), "--id", "rid", "--question",
                                "why"], stderr=subprocess.PIPE, text=True)
    deadline = time.time() + 60
    while time.time() < deadline:  # wait until it is at work, then press Ctrl+C
        line = process.stderr.readline()
        if "reading" in line or "writing" in line:
            break
    time.sleep(0.3)
    process.send_signal(signal.SIGINT)
    _, err = process.communicate(timeout=120)
    assert process.returncode != 0, err
    assert "interrupted" in err and "Traceback" not in err
    assert list(target.parent.iterdir()) == []


@pytest.fixture
def interrupted_after_mkstemp(monkeypatch):
    """Ctrl+C lands right after a temporary file is created, before its name reaches the caller."""
    real = tempfile.mkstemp

    def created_then_interrupted(*args, **kwargs):
        fd, _ = real(*args, **kwargs)
        os.close(fd)
        raise KeyboardInterrupt

    monkeypatch.setattr(safe_write.tempfile, "mkstemp", created_then_interrupted)


def test_ctrl_c_between_the_temporary_files_creation_and_its_use_leaves_nothing(tmp_path, interrupted_after_mkstemp):
    """The subprocess test above lands its Ctrl+C at a random moment; this one lands it in the narrowest window:
    the temporary study exists on disk but its name has not reached the importer yet (seen once in CI)."""
    source = tmp_path / "s.csv"
    source.write_text("rid,why\n1,late opening\n2,none\n", encoding="utf-8")
    out = tmp_path / "out"
    out.mkdir()
    assert main(["new", str(out / "s.study"), "--from", str(source), "--id", "rid", "--question", "why"]) == 130
    assert list(out.iterdir()) == []


def test_ctrl_c_while_an_export_creates_its_temporary_file_leaves_nothing(tmp_path, interrupted_after_mkstemp):
    out = tmp_path / "out"
    out.mkdir()
    with pytest.raises(KeyboardInterrupt):
        write_csv(small_dataset(), out / "x.csv", verbatims="raw")
    assert list(out.iterdir()) == []
