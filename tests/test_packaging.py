"""A non-editable install carries the lexicons and the demo survey inside the package."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent


@pytest.mark.slow
def test_installed_copy_finds_lexicons_and_demo(tmp_path):
    target = tmp_path / "site"
    subprocess.run([sys.executable, "-m", "pip", "install", "--quiet", "--no-deps", "--target", str(target), str(REPO)],
                   check=True, capture_output=True, text=True)
    probe = ("from opencode.resources import lexicon_dir, demo_dir; "
             "print(lexicon_dir()); print(demo_dir()); "
             "print(sorted(p.name for p in lexicon_dir().glob('*.txt'))); "
             "print(sorted(p.name for p in demo_dir().iterdir()))")
    environment = {**os.environ, "PYTHONPATH": str(target)}
    result = subprocess.run([sys.executable, "-c", probe], cwd=tmp_path, env=environment, check=True,
                            capture_output=True, text=True)
    lexicons, demo, lexicon_files, demo_files = result.stdout.splitlines()
    assert Path(lexicons).is_relative_to(target) and Path(demo).is_relative_to(target)
    assert "nonanswers-en.txt" in lexicon_files and "stop-en.txt" in lexicon_files
    assert "wrenfield.csv" in demo_files and "wrenfield.sav" in demo_files and "generate.py" in demo_files
    # Every module and stylesheet of the source tree is in the installed copy (a package left out of
    # pyproject.toml would be missing here).
    source = {p.relative_to(REPO / "opencode") for p in (REPO / "opencode").rglob("*") if p.suffix in (".py", ".tcss")}
    installed = {p.relative_to(target / "opencode") for p in (target / "opencode").rglob("*")
                 if p.suffix in (".py", ".tcss") and "lexicons" not in p.parts[-2:] and p.parts[len(target.parts) + 1]
                 not in ("demo", "lexicons")}
    assert source <= installed, sorted(map(str, source - installed))
