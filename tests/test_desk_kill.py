"""A killed terminal loses nothing: run `python -m opencode code` in a pseudo-terminal, code by keys, SIGKILL it,
then reopen the study: every code the screen acknowledged is on disk and the file is intact."""

from __future__ import annotations

import os
import pty
import select
import signal
import sqlite3
import subprocess
import sys
import time

import pytest

from helpers import make_desk_study, on_disk

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")

ENTER = b"\r"  # done, then the next uncoded verbatim


def _drain(fd: int, seconds: float) -> bytes:
    """Read whatever the app drew (a full pty buffer would block it)."""
    end = time.monotonic() + seconds
    drawn = b""
    while time.monotonic() < end:
        ready, _, _ = select.select([fd], [], [], 0.05)
        if ready:
            try:
                drawn += os.read(fd, 65536)
            except OSError:
                break
    return drawn


def _wait_for(fd: int, check, timeout: float = 30.0) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if check():
            return True
        _drain(fd, 0.1)
    return False


def test_sigkill_mid_session_loses_no_assignment(tmp_path):
    path = make_desk_study(tmp_path)
    def state() -> tuple[int, int]:
        return (on_disk(path, "SELECT COUNT(*) FROM assignments WHERE coder = 'ash' AND source = 'hand'")[0][0],
                on_disk(path, "SELECT COUNT(*) FROM coded_marks WHERE coder = 'ash'")[0][0])
    env = {**os.environ, "TERM": "xterm-256color", "COLUMNS": "100", "LINES": "30", "NO_COLOR": "1"}
    pid, fd = pty.fork()
    if pid == 0:  # the child: the real command, as a coder would start it
        os.execve(sys.executable, [sys.executable, "-m", "opencode", "code", str(path), "--question", "why",
                                   "--coder", "ash", "--refresh", "0"], env)
    try:
        drawn, end = b"", time.monotonic() + 60
        while b"respondent" not in drawn and time.monotonic() < end:
            drawn += _drain(fd, 0.2)
        assert b"respondent" in drawn, "the desk did not start"
        codes = marks = 0
        for key in (b"s", ENTER, b"j", b"h", ENTER, b"s"):
            os.write(fd, key)
            codes, marks = (codes, marks + 1) if key == ENTER else (codes + 1, marks)
            assert _wait_for(fd, lambda: state() == (codes, marks)), f"key {key!r} was not saved"
    finally:
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        os.close(fd)
    assert state() == (4, 2)
    assert on_disk(path, "PRAGMA integrity_check") == [("ok",)]
    assert on_disk(path, "SELECT c.number FROM assignments a JOIN codes c ON c.id = a.code_id "
                         "WHERE a.coder = 'ash' ORDER BY a.verbatim_id, c.number") == [(1,), (2,), (3,), (1,)]
    # the audit trail survived too: the next session can undo the last key press
    connection = sqlite3.connect(path)
    try:
        assert connection.execute("SELECT COUNT(*) FROM audit WHERE actor = 'ash' AND action = 'assign'"
                                  ).fetchone()[0] == 4
    finally:
        connection.close()


_CHILD = '''
import json, sys, time
from opencode.tui.background import exit_with_parent
how = exit_with_parent(use_prctl=sys.argv[1] == "prctl", every=0.2)
print(json.dumps({"how": how}), flush=True)
time.sleep(120)
'''

_PARENT = '''
import os, sys, threading, time
from opencode.tui.background import ProcessJob

class App:  # what ProcessJob asks of the desk
    is_running = True
    def __init__(self):
        self.jobs = set()
    def call_from_thread(self, callback, *args):
        callback(*args)

job = ProcessJob(App(), "slow_child", [sys.argv[1]], line=lambda m: print(job.process.pid, m["how"], flush=True))
job.start()
time.sleep(120)
'''


def _gone(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as stat:
            return stat.read().rsplit(")", 1)[1].split()[0] in ("Z", "X")  # a zombie has stopped running
    except FileNotFoundError:
        return True
    except OSError:
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            return True
        return False


@pytest.mark.parametrize("how", ["prctl", "poll"])
def test_a_child_job_ends_when_the_desk_is_killed(tmp_path, how):
    # the terms screen's drivers fit runs as a ProcessJob child; SIGKILL on the desk must not leave it running
    if how == "prctl" and not sys.platform.startswith("linux"):
        pytest.skip("prctl is Linux only")
    (tmp_path / "slow_child.py").write_text(_CHILD)
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(tmp_path), os.environ.get("PYTHONPATH", "")])}
    parent = subprocess.Popen([sys.executable, "-c", _PARENT, how], stdout=subprocess.PIPE, text=True, env=env)
    child = 0
    try:
        line = parent.stdout.readline().split()
        assert len(line) == 2 and line[1] == how, f"the child did not start as expected: {line}"
        child = int(line[0])
        assert not _gone(child)
    finally:
        parent.kill()
        parent.wait()
    try:
        end = time.monotonic() + 5
        while not _gone(child) and time.monotonic() < end:
            time.sleep(0.05)
        assert _gone(child), f"the child {child} outlived its killed parent"
    finally:
        if child and not _gone(child):
            os.kill(child, signal.SIGKILL)


def test_the_drivers_job_watches_its_parent_before_any_work(monkeypatch):
    from opencode.tui import background, drivers_job

    class Watched(Exception):
        pass

    def watch(*args, **kwargs):
        raise Watched

    monkeypatch.setattr(background, "exit_with_parent", watch)
    with pytest.raises(Watched):
        drivers_job.main(["absent.study", "why"])
