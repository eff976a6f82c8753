"""Every command of the README walkthrough prints lines that fit the terminal (issue 14, "done when").

Run at COLUMNS=80 and COLUMNS=120: no line of stdout or stderr is wider. Prose (notes, warnings) may be wrapped by
the output stream; tables must arrive fitted by the renderer, so a line the stream had to wrap must not look
like a table row (two or more column gaps).
"""

from __future__ import annotations

import re
import shlex

import pytest

import opencode.cli as cli
import opencode.files.terminal_text as terminal_text
from opencode.files.terminal_text import TerminalStream
from test_readme_commands import walkthrough_commands

_COLUMN_GAP = re.compile(r"\S {2,}\S")


@pytest.mark.parametrize("width", [80, 120])
def test_walkthrough_output_fits_the_width(width, demo_folder, monkeypatch, capsys):
    monkeypatch.chdir(demo_folder.parent)  # the README's paths start with oecode-demo/
    monkeypatch.setenv("COLUMNS", str(width))
    streams: list[TerminalStream] = []

    class Recorded(TerminalStream):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            streams.append(self)

    monkeypatch.setattr(terminal_text, "TerminalStream", Recorded)  # cli.py imports it when a verb runs
    too_wide, tables_wrapped = [], []
    for command in walkthrough_commands():
        streams.clear()
        assert cli.main(shlex.split(command)[1:]) == 0, command
        assert streams, "the command's output did not pass through TerminalStream"
        captured = capsys.readouterr()
        for line in (captured.out + captured.err).splitlines():
            if len(line.split("\r")[-1]) > width:
                too_wide.append(f"{command}\n    {len(line)}: {line}")
        for stream in streams:
            tables_wrapped += [f"{command}\n    {line}" for line in stream.wrapped
                               if len(_COLUMN_GAP.findall(line.strip())) >= 2]
    assert not too_wide, "\n".join(too_wide[:10])
    assert not tables_wrapped, "table lines left to the prose wrapper:\n" + "\n".join(tables_wrapped[:10])
