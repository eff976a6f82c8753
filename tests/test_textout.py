"""The width-fitting table renderer, prose wrapping and the one p formatter (files/textout.py)."""

from __future__ import annotations

import io
import math
import re

import pytest

from opencode.files.terminal_text import TerminalStream, unwrapped
from opencode.files.textout import format_p, format_table, output_width, wrap_text

LABELS = ["Not safe without staff on site in the evenings and at weekends", "Staff jobs and hours",
          "Antisocial behaviour, damage and litter around the building after dark", "Cost"]
NUMBERS = [[1234567, 0.8894, "62.7", "0.713 [0.665, 0.754]", "<0.001", "+0.035"],
           [89, 0.1234, "100.0", "1.000 [1.000, 1.000]", "0.318", "-0.232"],
           [5, 0.5, "6.6", "0.525 [0.299, 0.712]", "0.047", "+0.262"],
           [0, 0.0, "0.0", "-", "-", "-"]]
HEADERS = ["code", "label", "respondents", "share", "% of respondents", "kappa [95% interval]", "q", "mean score"]


def _rows():
    return [[i + 1, label, *numbers] for i, (label, numbers) in enumerate(zip(LABELS, NUMBERS))]


def _numeric_cells(rows):
    """Every cell that is a number or a number with its interval, as the table prints it."""
    cells = []
    for row in rows:
        for value in row:
            text = f"{value:.3f}" if isinstance(value, float) else str(value)
            if re.fullmatch(r"[-+<]?[0-9][0-9,.]*(?: \[[0-9.]+, [0-9.]+\])?", text):
                cells.append(text)
    return cells


@pytest.mark.parametrize("width", [40, 80, 120])
def test_every_line_fits_the_width(width):
    text = format_table(HEADERS, _rows(), width=width, title="Why do you say that? " * 6, note="sorted by code " * 9)
    assert max(len(line) for line in text.splitlines()) <= width


@pytest.mark.parametrize("width", [40, 80, 120])
def test_numbers_are_never_split(width):
    rows = _rows()
    text = format_table(HEADERS, rows, width=width)
    lines = text.splitlines()
    for cell in _numeric_cells(rows):
        # the whole number (an interval may wrap only at its spaces, so its first number is whole)
        first = cell.split(" [")[0]
        assert any(re.search(rf"(?<![\d.]){re.escape(first)}(?![\d.])", line) for line in lines), (width, cell)
    # no line ends in a number cut after its decimal point, nor starts with the rest of one
    assert not any(re.search(r"\d\.$", line.rstrip()) for line in lines)
    assert "0.\n" not in text


def test_numeric_cells_whole_on_one_line_at_80():
    rows = _rows()
    text = format_table(HEADERS, rows, width=80)
    for cell in _numeric_cells(rows):
        assert cell in text, cell  # each numeric cell, interval included, on one line


def test_long_labels_wrap_within_their_cell():
    text = format_table(["code", "label", "n"], [[1, LABELS[2], 12], [2, "short", 3]], width=40)
    lines = text.splitlines()
    assert max(len(line) for line in lines) <= 40
    assert len(lines) > 4  # the long label took more than one line
    words = " ".join(line[6:].rsplit("  ", 1)[0].strip() for line in lines[2:-1])
    assert "Antisocial behaviour, damage and litter around the building after dark".split()[:5] == words.split()[:5]
    assert lines[2].rstrip().endswith("12")  # the number sits on the row's first line, whole


def test_wide_table_is_cut_into_blocks_repeating_the_stub():
    headers = ["code", "label"] + [f"column number {i}" for i in range(12)]
    rows = [[i, f"label {i}"] + [f"{1000 * i + j}.5" for j in range(12)] for i in range(3)]
    text = format_table(headers, rows, width=60, stub=2)
    assert max(len(line) for line in text.splitlines()) <= 60
    header_lines = [line for line in text.splitlines() if line.startswith("code")]
    assert len(header_lines) >= 2  # the stub repeats over each block
    for i in range(3):
        for j in range(12):
            assert f"{1000 * i + j}.5" in text


def test_groups_titles_are_never_cut():
    title = "Support for opening library branches until 22:00 with self-service access after 18:00"
    headers = ["code", "label", "Total", "Strongly oppose", "A", "Oppose", "B", "Row test q"]
    rows = [[1, "Not safe without staff", "62.7", "89.5", "CDE", "85.8", "DE", "<0.001"]]
    text = format_table(headers, rows, align="rlrrlrlr", width=40, stub=2,
                        groups=[("", [[2]]), (title, [[3, 4], [5, 6, 7]])])
    assert max(len(line) for line in text.splitlines()) <= 40
    assert " ".join(text.split()).count(title) >= 1
    assert "(continued)" in text  # the banner did not fit in one block, its title repeats


def test_old_signature_still_works():
    text = format_table(["a", "b"], [["x", 1.5], ["y", None]])
    assert text.splitlines()[0].split() == ["a", "b"]
    assert "1.500" in text


def test_output_width_follows_columns(monkeypatch):
    monkeypatch.setenv("COLUMNS", "97")
    assert output_width() == 97
    monkeypatch.delenv("COLUMNS")
    assert output_width(io.StringIO()) == 80  # not a terminal


@pytest.mark.parametrize("value, text", [(0.0, "<0.001"), (5.6e-45, "<0.001"), (0.000999, "<0.001"),
                                         (0.001, "0.001"), (0.0034, "0.003"), (0.05, "0.050"), (1.0, "1.000"),
                                         (math.nan, "-"), (None, "-")])
def test_p_formatter(value, text):
    assert format_p(value) == text


def test_wrap_text_keeps_short_lines_and_indents_continuations():
    text = wrap_text("short line\nnote: " + "word " * 40, 40)
    lines = text.splitlines()
    assert lines[0] == "short line"
    assert all(len(line) <= 40 for line in lines)
    assert all(line.startswith("      ") for line in lines[2:])


def test_terminal_stream_wraps_prose_but_not_inside_unwrapped():
    raw = io.StringIO()
    stream = TerminalStream(raw, width=30)
    print("a note " * 10, file=stream)
    with unwrapped(stream):
        print("x," * 40, file=stream)
    stream.flush()
    lines = raw.getvalue().splitlines()
    assert all(len(line) <= 30 for line in lines[:-1])
    assert lines[-1] == "x," * 40
    assert len(stream.wrapped) == 1


def test_narrow_two_column_table_never_repeats_a_column():
    text = format_table(["verbatim", "a very long header that cannot fit"], [[12345678, "x" * 30]], width=20, stub=2)
    assert text.count("12345678") == 1
