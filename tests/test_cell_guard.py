"""Formula-injection guard for CSV and spreadsheet cells (OWASP "CSV Injection")."""

import pytest

from opencode.files.cell_guard import guard_cell, guard_row


# OWASP "CSV Injection": cells starting with = + - @ tab or carriage return get a leading single quote.
@pytest.mark.parametrize("text", ["=1+1", "+cmd", "-2+3", "@SUM(A1)", "\tfoo", "\rbar", '=HYPERLINK("x")'])
def test_triggers_get_a_leading_quote(text):
    assert guard_cell(text) == "'" + text


@pytest.mark.parametrize("text", ["plain", "a=b", " =x", "", "'already", "1-2"])
def test_safe_text_is_unchanged(text):
    assert guard_cell(text) == text


@pytest.mark.parametrize("value", [-3, -2.5, None, 0, True])
def test_non_text_is_unchanged(value):
    assert guard_cell(value) is value


def test_guard_row():
    assert guard_row(["=a", 1, "b", "@c"]) == ["'=a", 1, "b", "'@c"]
