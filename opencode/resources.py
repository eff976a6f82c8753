"""Find the files that ship with the package: lexicons (stop lists, non-answers) and the demo survey."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from opencode.errors import OpenCodeError


def _bundled(package: str, top_level: str) -> Path:
    """An installed data package's folder; in a plain source checkout, the top-level folder it is built from."""
    try:
        return Path(str(resources.files(package)))
    except ModuleNotFoundError:
        return Path(__file__).resolve().parent.parent / top_level


def lexicon_dir() -> Path:
    """The folder holding the bundled plain-text lexicons."""
    return _bundled("opencode.lexicons", "lexicons")


def demo_dir() -> Path:
    """The folder holding the bundled demo survey, its generator and starter code frames."""
    return _bundled("opencode.demo", "demo")


def read_lexicon(name: str) -> list[str]:
    """Entries of a bundled lexicon file (one entry a line; '#' starts a comment; blank lines skipped)."""
    path = lexicon_dir() / name
    if not path.is_file():
        raise OpenCodeError(f"{path}: no such lexicon file")
    entries = []
    for line in path.read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if line:
            entries.append(line)
    return entries
