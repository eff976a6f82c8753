"""Shared fixtures: small survey files written in the test's own folder."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest


def file_digest(path: Path) -> str:
    """A digest of a file's bytes (or 'absent'), to prove a failed command changed nothing."""
    return hashlib.sha256(path.read_bytes()).hexdigest() if path.exists() else "absent"


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
