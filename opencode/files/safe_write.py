"""Write files through a temporary file in the same folder and an atomic rename: never half-written."""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import Iterator

from opencode.errors import OpenCodeError


def check_writable_target(path: str | os.PathLike) -> Path:
    """Return the target as a Path, or raise a clear error if its folder is missing or not writable."""
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.exists():
        raise OpenCodeError(f"{target}: the folder {folder} does not exist")
    if not folder.is_dir():
        raise OpenCodeError(f"{target}: {folder} is not a folder")
    if not os.access(folder, os.W_OK):
        raise OpenCodeError(f"{target}: no permission to write in {folder}")
    if target.is_dir():
        raise OpenCodeError(f"{target}: is a folder, expected a file path")
    return target


def normal_file_mode() -> int:
    """The permissions a plain new file gets under the current umask (temporary files start at 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside `path`; on success rename it over `path`, on error remove it.

    Use for writers that want a file name (pyreadstat, openpyxl, matplotlib).
    """
    target = check_writable_target(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=suffix or target.suffix or ".tmp", dir=target.parent or ".")
    os.close(fd)
    tmp_path = Path(tmp)
    os.chmod(tmp_path, normal_file_mode())  # mkstemp makes 0600; a finished file gets normal permissions
    try:
        yield tmp_path
        os.replace(tmp_path, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp_path.unlink()
        raise


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, mode: str = "w", encoding: str | None = "utf-8", newline: str | None = None):
    """Open a temporary file for writing; it replaces `path` only if the block finishes without error."""
    binary = "b" in mode
    with atomic_path(path) as tmp:
        with open(tmp, mode, encoding=None if binary else encoding, newline=None if binary else newline) as handle:
            yield handle
