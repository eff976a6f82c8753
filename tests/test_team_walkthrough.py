"""README "Working as a team" runs as written: a local server, push, grant, two coders at two real terminals,
a handout coded offline and merged, a pull, and the server stopped.

The demo study is the session's double-coded demo (the same file `oecode demo` leaves, with the 'why' frame
and two coders' codes). Each `oecode code` line runs as a real process in a pseudo-terminal, as a coder
would start it; a hotkey and Enter are typed there and the code is checked on the server. As root the
server is started as an unprivileged account (`--run-as`, added to the two `team server` lines only).
"""

from __future__ import annotations

import os
import pty
import re
import select
import shlex
import shutil
import signal
import sys
import tempfile
import time
from pathlib import Path

import pytest

from opencode.cli import main
from opencode.coding import assignments as coding
from opencode.study.store import Study
from team_server import ACCOUNT, _unprivileged_account, server_programs

README = Path(__file__).resolve().parent.parent / "README.md"
pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs a POSIX pseudo-terminal")


def team_commands() -> list[str]:
    text = README.read_text(encoding="utf-8")
    block = re.search(r"<!-- team-walkthrough -->\n(.*?)<!-- /team-walkthrough -->", text, re.S).group(1)
    return [line.strip() for line in block.splitlines() if line.strip()]


class Terminal:
    """`python -m opencode ARGS` in a pseudo-terminal: what a coder sees and types."""

    def __init__(self, arguments: list[str]):
        env = {**os.environ, "TERM": "xterm-256color", "COLUMNS": "100", "LINES": "30", "NO_COLOR": "1"}
        self.pid, self.fd = pty.fork()
        if self.pid == 0:
            os.execve(sys.executable, [sys.executable, "-m", "opencode", *arguments], env)
        self.drawn = b""

    def read(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            ready, _, _ = select.select([self.fd], [], [], 0.05)
            if ready:
                try:
                    self.drawn += os.read(self.fd, 65536)
                except OSError:
                    return

    def wait_for(self, check, timeout: float = 60.0) -> bool:
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            if check():
                return True
            self.read(0.1)
        return False

    def type(self, keys: bytes) -> None:
        os.write(self.fd, keys)

    def close(self) -> None:
        os.kill(self.pid, signal.SIGTERM)
        os.waitpid(self.pid, 0)
        os.close(self.fd)


def _coded(target: str, coder: str) -> int:
    with Study.open(target) as study:
        return len(coding.assignments(study, "why", [coder], ("hand",)))


def test_the_team_walkthrough_runs_as_written(demo_base, monkeypatch, capsys):
    server_programs()
    run_as = _unprivileged_account()
    # a folder the server's account may enter (pytest's own temporary folders are private to root)
    home = Path(tempfile.mkdtemp(prefix="oecode-walk-", dir="/tmp"))
    home.chmod(0o755)
    monkeypatch.chdir(home)
    (home / "oecode-demo").mkdir()
    shutil.copyfile(demo_base, home / "oecode-demo" / "wrenfield.study")
    commands = team_commands()
    assert len(commands) >= 10 and sum(c.startswith("oecode code ") for c in commands) == 3
    server_up = False
    terminals: list[Terminal] = []
    try:
        for line in commands:
            words = shlex.split(line)
            if words[0] == "export":
                name, value = words[1].split("=", 1)
                monkeypatch.setenv(name, value.replace("$PWD", str(home)))
                continue
            arguments = words[1:]
            if arguments[:2] == ["team", "server"] and run_as:
                arguments += ["--run-as", ACCOUNT]
            if arguments[0] == "code":
                target, coder = arguments[1], arguments[arguments.index("--coder") + 1]
                before = _coded(target, coder)
                terminal = Terminal(arguments)
                terminals.append(terminal)
                assert terminal.wait_for(lambda: b"respondent" in terminal.drawn), f"the desk did not start: {line}"
                terminal.type(b"s")  # code 1, 'Not safe without staff', on the verbatim shown
                assert terminal.wait_for(lambda: _coded(target, coder) == before + 1), f"not saved: {line}"
                terminal.type(b"\r")  # done, next
                continue
            assert main(arguments) == 0, line
            server_up = server_up or arguments[:2] == ["team", "server"] and "--stop" not in arguments
            if "--stop" in arguments:
                server_up = False
            if arguments[0] == "handout":  # the copy's coder can now leave their terminals' desks be
                for terminal in terminals:
                    terminal.close()
                terminals.clear()
        printed = capsys.readouterr().out
        assert "merged ash's copy: 1 codes added" in printed
        assert "pulled" in printed and "stopped the server" in printed
        with Study.open(home / "oecode-demo" / "wrenfield-team.study") as pulled:
            for coder in ("kit", "bryn"):
                assert len(coding.assignments(pulled, "why", [coder], ("hand",))) >= 1
    finally:
        for terminal in terminals:
            terminal.close()
        if server_up:
            main(["team", "server", "team-pg", "--stop"] + (["--run-as", ACCOUNT] if run_as else []))
        monkeypatch.chdir("/")
        shutil.rmtree(home, ignore_errors=True)
