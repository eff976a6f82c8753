"""User text never sends control characters to a terminal (window title, clear screen, cursor moves, bidi
reordering): every verb's output is cleaned, aligned tables clean each cell; and the Markdown and HTML
codebooks print labels as inert text."""

from __future__ import annotations

import re
import sqlite3

import pytest
from markdown_it import MarkdownIt

from opencode.cli import main
from opencode.coding import codebook, frames
from opencode.files.terminal_text import TerminalStream, one_line, terminal_text
from opencode.files.textout import format_table
from opencode.study.store import Study
from helpers import make_desk_study

ESCAPES = ["\x1b]0;owned\x07", "\x1b[2J", "\x1b[31m", "\x9b2J", "\r", "\u202e", "\x08", "\x00"]
HOSTILE = "A\x1b]0;owned\x07B\x1b[2JC\u202eD\rE\x9b2J"


def _no_controls(text: str) -> bool:
    return not re.search("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]", text)


@pytest.mark.parametrize("escape", ESCAPES)
def test_terminal_text_removes_each_control(escape):
    assert terminal_text(f"a{escape}b") == "a" + terminal_text(escape) + "b"
    assert _no_controls(terminal_text(f"a{escape}b"))


def test_tabs_and_line_feeds_stay_and_one_line_flattens():
    assert terminal_text("a\tb\nc") == "a\tb\nc"
    assert one_line("a\tb\nc\x1b[2J") == "a b c[2J"


def test_stream_keeps_our_progress_carriage_return_on_stderr_only():
    import io

    err, out = io.StringIO(), io.StringIO()
    TerminalStream(err, keep_cr=True).write("\r  bar \x1b[2J")
    TerminalStream(out).write("\r  bar \x1b[2J")
    assert err.getvalue() == "\r  bar [2J" and out.getvalue() == "  bar [2J"


def test_aligned_tables_clean_every_cell():
    text = format_table(["code", "label\x1b[2J"], [[1, HOSTILE], [2, "ok"]])
    assert _no_controls(text.replace("\n", ""))
    assert "A]0;ownedB[2JCDE2J" in text  # the text stays readable; only the control characters went


@pytest.fixture
def hostile_study(tmp_path):
    path = make_desk_study(tmp_path)
    with Study.open(path) as study:
        frames.add_code(study, "why", HOSTILE, number=7, hotkey="x", description="<script>alert(1)</script>")
    connection = sqlite3.connect(path)  # a crafted study: labels written straight into the file
    connection.execute("UPDATE variables SET label = ? WHERE name = 'why'", (HOSTILE,))
    connection.commit()
    connection.close()
    return path


@pytest.mark.parametrize("argv", [["info", "{s}"], ["frame", "list", "{s}", "--question", "why"],
                                  ["words", "{s}", "--question", "why"],
                                  ["frame", "edit", "{s}", "--question", "why", "--code", "7", "--label", HOSTILE],
                                  ["frame", "rule", "{s}", "--question", "why", "--code", "1", "--dry-run"]])
def test_verbs_print_no_control_characters(hostile_study, capfd, argv):
    code = main([str(hostile_study) if a == "{s}" else a for a in argv])
    out, err = capfd.readouterr()
    assert code == 0, err
    assert _no_controls(out.replace("\n", "").replace("\t", "")), repr(out)
    # our own progress bars redraw their line on stderr with a carriage return; nothing else gets through
    assert _no_controls(err.replace("\n", "").replace("\t", "").replace("\r", "")), repr(err)


def test_error_messages_are_cleaned_too(tmp_path, capfd):
    code = main(["info", str(tmp_path / "no\x1b]0;x\x07such.study")])
    _, err = capfd.readouterr()
    assert code == 1 and "\x1b" not in err and "\x07" not in err


def test_markdown_codebook_renders_labels_as_text(hostile_study, tmp_path):
    with Study.open(hostile_study) as study:
        frames.add_code(study, "why", "<img src=x onerror=alert(1)> [click](javascript:alert(1)) **bold**",
                        number=8, description="# heading\n- list\n<script>x</script>")
        frames.add_code(study, "why", "=HYPERLINK(\"http://x.example\")", number=9)
        path = codebook.write_codebook(study, "why", tmp_path / "c.md")
    text = path.read_text(encoding="utf-8")
    html = MarkdownIt("commonmark").render(text)  # outside check: a CommonMark renderer
    assert "<script" not in html and "<img" not in html and "javascript:" not in html.replace("javascript:alert", "")
    assert "<a " not in html and "<strong>" not in html
    assert "&lt;img src=x onerror=alert(1)&gt;" in html and "&lt;script&gt;" in html
    assert html.count("<h1>") == 1  # the description's "# heading" did not become a heading
    assert "'=HYPERLINK" in text and _no_controls(text.replace("\n", ""))


def test_html_codebook_escapes_and_guards(hostile_study, tmp_path):
    with Study.open(hostile_study) as study:
        path = codebook.write_codebook(study, "why", tmp_path / "c.html")
    text = path.read_text(encoding="utf-8")
    assert "<script>alert(1)</script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert _no_controls(text.replace("\n", ""))
