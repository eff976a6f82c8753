"""Output paths that would destroy something are refused by every verb that writes a file: the study (also
through a symbolic link, ./ or ..), its -wal / -shm side files, any other study, a .study name, the survey
file the study came from, devices, FIFOs, sockets, /proc, folders; an existing file is replaced only with
--overwrite (or a yes at a terminal prompt), companions included, and every file written is listed.
Each refusal: one line, exit 1, the study byte-identical, the target untouched."""

from __future__ import annotations

import os
import socket
import stat
from pathlib import Path

import pytest

from opencode.cli import main
from opencode.errors import BadInput, UnsafeTarget
from opencode.files import targets
from opencode.files.safe_write import atomic_open
from opencode.files.targets import check_target, output_policy
from helpers import file_digest


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


# verb -> the arguments that write OUT (a path placeholder), on the double-coded demo study (coders ash, bryn)
WRITERS = {
    "export csv": ["export", "{study}", "--format", "csv", "--coder", "ash", "--out", "{out}"],
    "export xlsx": ["export", "{study}", "--format", "xlsx", "--coder", "ash", "--out", "{out}"],
    "export sav": ["export", "{study}", "--format", "sav", "--coder", "ash", "--out", "{out}"],
    "export dta": ["export", "{study}", "--format", "dta", "--coder", "ash", "--out", "{out}"],
    "export sss": ["export", "{study}", "--format", "sss", "--coder", "ash", "--out", "{out}"],
    "report": ["report", "{study}", "--coder", "ash", "--out", "{out}"],
    "tables": ["tables", "{study}", "--question", "why", "--coder", "ash", "--out", "{out}"],
    "frame export": ["frame", "export", "{study}", "--question", "why", "--file", "{out}"],
    "frame codebook": ["frame", "codebook", "{study}", "--question", "why", "--file", "{out}"],
    "lexicon export": ["lexicon", "export", "{study}", "{out}", "--question", "why"],
    "themes chart": ["themes", "{study}", "--question", "why", "--k", "3", "--chart", "{out}"],
    "drivers chart": ["drivers", "{study}", "--question", "why", "--outcome", "support", "--chart", "{out}"],
    "drivers csv": ["drivers", "{study}", "--question", "why", "--outcome", "support", "--csv", "{out}"],
    "agree csv": ["agree", "{study}", "--question", "why", "--coders", "ash,bryn", "--csv", "{out}"],
}


#: the ending each writer accepts (the others refuse a wrong ending before any target check)
SUFFIX = {"tables": ".csv", "frame export": ".csv", "frame codebook": ".md", "drivers chart": ".png",
          "themes chart": ".png", "report": ".html", "export csv": ".csv", "export xlsx": ".xlsx",
          "export sav": ".sav", "export dta": ".dta", "export sss": ".sss", "lexicon export": ".txt",
          "drivers csv": ".csv", "agree csv": ".csv"}
#: what a writer with a fixed ending says about a study or side file name (refused before the target check)
ENDING = ("is written as", "the chart is a PNG file", "tables are written as")


def _argv(verb: str, study: Path, out) -> list[str]:
    return [str(study) if a == "{study}" else str(out) if a == "{out}" else a for a in WRITERS[verb]]


def _refused(capsys, verb, study: Path, out, message: str | tuple, protected: list[Path]) -> None:
    before = {p: file_digest(p) for p in [study, *protected]}
    code, _, err = run(capsys, *_argv(verb, study, out))
    assert code == 1, err
    assert any(m in err for m in ((message,) if isinstance(message, str) else message)), err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert {p: file_digest(p) for p in before} == before


@pytest.mark.parametrize("verb", sorted(WRITERS))
def test_every_writer_refuses_the_study_itself(demo_copy, capsys, verb):
    _refused(capsys, verb, demo_copy, demo_copy, ("is a study file", *ENDING), [])


@pytest.mark.parametrize("verb", sorted(WRITERS))
def test_every_writer_refuses_a_symlink_to_the_study(demo_copy, capsys, verb):
    link = demo_copy.parent / f"innocent{SUFFIX[verb]}"
    link.symlink_to(demo_copy)
    _refused(capsys, verb, demo_copy, link, "is a study file", [])
    assert link.is_symlink()


@pytest.mark.parametrize("verb", sorted(WRITERS))
def test_every_writer_refuses_the_study_wal_and_dev_null(demo_copy, capsys, verb):
    _refused(capsys, verb, demo_copy, Path(f"{demo_copy}-wal"), ("is a side file of the study", *ENDING), [])
    assert not Path(f"{demo_copy}-wal").exists()
    _refused(capsys, verb, demo_copy, "/dev/null", ("is a system or device path", *ENDING), [])
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)  # the device node is still a device


@pytest.mark.parametrize("verb", sorted(WRITERS))
def test_every_writer_refuses_to_replace_an_existing_file(demo_copy, capsys, verb):
    out = demo_copy.parent / f"taken{SUFFIX[verb]}"
    out.write_bytes(b"the user's own file")
    _refused(capsys, verb, demo_copy, out, "already exists; add --overwrite to replace it", [out])


@pytest.mark.parametrize("spelling", ["./{name}", "sub/../{name}", "{folder}/./{name}"])
def test_relative_and_dotted_spellings_of_the_study(demo_copy, capsys, monkeypatch, spelling):
    monkeypatch.chdir(demo_copy.parent)
    (demo_copy.parent / "sub").mkdir()
    out = spelling.format(name=demo_copy.name, folder=demo_copy.parent)
    _refused(capsys, "export csv", demo_copy, out, "is a study file", [])


def test_shm_journal_another_study_and_study_names(demo_copy, capsys, tmp_path):
    other = tmp_path / "other.study"
    other.write_bytes(demo_copy.read_bytes())
    for out, message in [(f"{demo_copy}-shm", "side file"), (f"{demo_copy}-journal", "side file"),
                         (other, "is a study file"), (tmp_path / "fresh.study", "kept for study files"),
                         (f"{other}-wal", "side file")]:
        _refused(capsys, "report", demo_copy, out, message, [other])


def test_fifo_socket_proc_and_folder(demo_copy, capsys, tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    sock_path = tmp_path / "s.csv"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(sock_path))
    try:
        _refused(capsys, "export csv", demo_copy, fifo, "is a FIFO (named pipe), not a regular file", [])
        _refused(capsys, "export csv", demo_copy, sock_path, "is a socket, not a regular file", [])
        _refused(capsys, "export csv", demo_copy, "/proc/self/comm", "is a system or device path", [])
        _refused(capsys, "export csv", demo_copy, tmp_path, "is a folder, expected a file path", [])
        assert stat.S_ISFIFO(os.stat(fifo).st_mode) and stat.S_ISSOCK(os.stat(sock_path).st_mode)
    finally:
        server.close()


def test_companion_never_replaces_the_users_survey(tmp_path, capsys):
    # The study is imported from survey.csv; a Triple-S export named survey.sss with CSV data would write
    # survey.csv beside it: refused even with --overwrite, because it is the study's own input.
    survey = tmp_path / "survey.csv"
    survey.write_text("rid,why,support\nA1,late hours help,1\nA2,not safe at night,5\nA3,fine,2\n", encoding="utf-8")
    study = tmp_path / "s.study"
    assert main(["new", str(study), "--from", str(survey), "--id", "rid", "--question", "why"]) == 0
    assert main(["frame", "add", str(study), "--question", "why", "--label", "Safety"]) == 0
    capsys.readouterr()
    before = file_digest(survey)
    for extra in ([], ["--overwrite"]):
        code, out, err = run(capsys, "export", study, "--format", "sss", "--sss-data", "csv", "--out",
                             tmp_path / "survey.sss", *extra)
        assert code == 1 and "survey.csv (written beside" in err, err
        assert file_digest(survey) == before and not (tmp_path / "survey.sss").exists()
    code, _, err = run(capsys, "report", study, "--out", survey, "--overwrite")
    assert code == 1 and "a survey file the study s.study was imported from" in err
    assert file_digest(survey) == before


def test_companion_frame_csv_is_not_replaced_without_overwrite_and_all_files_are_listed(demo_copy, capsys):
    folder = demo_copy.parent
    (folder / "x-frame.csv").write_bytes(b"mine")
    code, _, err = run(capsys, "export", demo_copy, "--format", "csv", "--coder", "ash", "--out", folder / "x.csv")
    assert code == 1 and "x-frame.csv (written beside" in err and "--overwrite" in err
    assert (folder / "x-frame.csv").read_bytes() == b"mine" and not (folder / "x.csv").exists()
    code, out, _ = run(capsys, "export", demo_copy, "--format", "csv", "--coder", "ash", "--out", folder / "x.csv",
                       "--overwrite")
    assert code == 0 and f"wrote {folder / 'x.csv'}" in out and f"wrote {folder / 'x-frame.csv'}" in out
    assert (folder / "x-frame.csv").read_bytes() != b"mine"


@pytest.mark.parametrize("fmt,names", [("csv", ["d.csv", "d-frame.csv"]), ("sav", ["d.sav", "d-frame.csv"]),
                                       ("dta", ["d.dta", "d-frame.csv"]), ("xlsx", ["d.xlsx"]),
                                       ("sss", ["d.sss", "d.asc"])])
def test_every_file_written_is_listed(demo_copy, capsys, tmp_path, fmt, names):
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    code, out, _ = run(capsys, "export", demo_copy, "--format", fmt, "--coder", "ash", "--out",
                       out_dir / f"d.{fmt}")
    assert code == 0
    assert sorted(p.name for p in out_dir.iterdir()) == sorted(names)
    for name in names:
        assert f"wrote {out_dir / name}" in out


def test_prompt_at_a_terminal(demo_copy, capsys, monkeypatch):
    out = demo_copy.parent / "r.csv"
    out.write_bytes(b"old")
    monkeypatch.setattr("sys.stdin.isatty", lambda: True, raising=False)
    monkeypatch.setattr("sys.stderr.isatty", lambda: True, raising=False)
    answers = iter(["n\n", "y\n"])
    monkeypatch.setattr("sys.stdin.readline", lambda: next(answers), raising=False)
    code, _, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--csv", out)
    assert code == 1 and "replace it? [y/N]" in err and out.read_bytes() == b"old"
    code, _, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--csv", out)
    assert code == 0 and out.read_bytes() != b"old"


def test_no_prompt_without_a_terminal(demo_copy, capsys):
    out = demo_copy.parent / "r.csv"
    out.write_bytes(b"old")
    code, _, err = run(capsys, "agree", demo_copy, "--question", "why", "--coders", "ash,bryn", "--csv", out)
    assert code == 1 and "replace it?" not in err and out.read_bytes() == b"old"


def test_library_check_is_the_one_every_writer_uses(tmp_path):
    # atomic_open (under every writer) refuses the same targets without any command around it.
    study = tmp_path / "a.study"
    study.write_bytes(b"SQLite format 3\x00" + b"\x00" * 100)
    for target, error in [(study, UnsafeTarget), (f"{study}-wal", UnsafeTarget), ("/dev/null", UnsafeTarget),
                          (tmp_path, BadInput), (tmp_path / "no" / "x.csv", BadInput)]:
        with pytest.raises(error):
            with atomic_open(target) as handle:
                handle.write("x")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.study"]
    existing = tmp_path / "e.txt"
    existing.write_text("keep")
    with output_policy(overwrite=False), pytest.raises(UnsafeTarget, match="already exists"):
        check_target(existing)
    with output_policy(overwrite=False, confirm=lambda path: True) as policy:
        with atomic_open(existing) as handle:
            handle.write("new")
    assert existing.read_text() == "new" and policy.written == [existing]


def test_a_symlink_to_an_ordinary_file_writes_through_and_keeps_the_link(tmp_path):
    real = tmp_path / "real.csv"
    real.write_text("old")
    link = tmp_path / "link.csv"
    link.symlink_to(real)
    with atomic_open(link) as handle:
        handle.write("new")
    assert link.is_symlink() and real.read_text() == "new"


def test_protected_inputs_registry(tmp_path):
    source = tmp_path / "input.csv"
    source.write_text("x")
    targets.protect([source], "a survey file under test")
    with pytest.raises(UnsafeTarget, match="a survey file under test"):
        check_target(tmp_path / "." / "input.csv")
