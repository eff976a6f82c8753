"""Every command of the README's walkthrough runs as written after `oecode demo` (keeps the README true)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from opencode.cli import main

README = Path(__file__).resolve().parent.parent / "README.md"


def walkthrough_commands() -> list[str]:
    text = README.read_text(encoding="utf-8")
    block = re.search(r"<!-- walkthrough -->\n(.*?)<!-- /walkthrough -->", text, re.S).group(1)
    return [line.strip() for line in block.splitlines() if line.strip().startswith("oecode ")]


def test_readme_set_up_commands_are_the_ones_ci_runs():
    text = README.read_text(encoding="utf-8")
    ci = (README.parent / ".ci" / "run").read_text(encoding="utf-8")
    assert "pip install . && oecode demo" in text
    assert 'pip install ".[test]" && pytest -q -n 2' in text
    assert "\npytest -q -n 2\n" in ci


def test_walkthrough_runs_as_written(demo_folder, monkeypatch, capsys):
    monkeypatch.chdir(demo_folder.parent)  # the README's paths start with oecode-demo/
    commands = walkthrough_commands()
    assert len(commands) >= 20
    for command in commands:
        arguments = shlex.split(command)[1:]
        assert main(arguments) == 0, command
    printed = capsys.readouterr().out
    assert "Not safe without staff" in printed
