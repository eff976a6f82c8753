"""Where a file may be written: the one check every writer makes before it writes (see `check_target`).

Refused, whatever the options: a study file (any SQLite database) or its `-wal` / `-shm` / `-journal` side
files, a name ending in `.study`, a survey file a study open in this process was imported from, a folder,
a device, FIFO or socket, and anything under /proc, /sys or /dev. Paths are resolved first, so a symbolic
link, `./` or `..` cannot hide the real target. An existing regular file is replaced only when the output
policy allows it: library callers may (they name their own paths); the `oecode` command allows it only
with `--overwrite` or a yes at a terminal prompt.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import stat
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Iterator

from opencode.errors import BadInput, UnsafeTarget, WriteFailed

STUDY_SUFFIX = ".study"
SQLITE_MAGIC = b"SQLite format 3\x00"
SIDE_FILES = ("-wal", "-shm", "-journal")
SYSTEM_FOLDERS = ("/proc", "/sys", "/dev")


@dataclass
class OutputPolicy:
    """How existing files are treated while it is in force, and every file written under it."""

    overwrite: bool = True
    confirm: Callable[[Path], bool] | None = None
    approved: set[str] = field(default_factory=set)
    written: list[Path] = field(default_factory=list)


_POLICY: contextvars.ContextVar[OutputPolicy] = contextvars.ContextVar("oecode_output_policy", default=None)
#: real path -> what it is ("the survey file the study x.study was imported from"); never written.
_PROTECTED: dict[str, str] = {}


def current_policy() -> OutputPolicy:
    policy = _POLICY.get()
    return policy if policy is not None else OutputPolicy()


@contextlib.contextmanager
def output_policy(overwrite: bool, confirm: Callable[[Path], bool] | None = None) -> Iterator[OutputPolicy]:
    """Within the block, existing files are replaced only if `overwrite` or `confirm(path)` says yes."""
    policy = OutputPolicy(overwrite=overwrite, confirm=confirm)
    token = _POLICY.set(policy)
    try:
        yield policy
    finally:
        _POLICY.reset(token)


def record_written(path: Path) -> None:
    """Note a finished file in the policy in force (the command lists them)."""
    policy = _POLICY.get()
    if policy is not None:
        policy.written.append(Path(path))


def protect(paths: Iterable[str | os.PathLike], why: str) -> None:
    """Never let a writer replace these files in this process (e.g. the survey files a study came from)."""
    for path in paths:
        _PROTECTED[os.path.realpath(path)] = why


def _is_sqlite(path: str) -> bool:
    try:
        with open(path, "rb") as handle:
            return handle.read(len(SQLITE_MAGIC)) == SQLITE_MAGIC
    except OSError:
        return False


def _kind_of(mode: int) -> str | None:
    """What a non-regular file is, in words (None for a regular file)."""
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _study_side_file(real: str) -> str | None:
    """The study a `-wal` / `-shm` / `-journal` name belongs to, if its base is a study or SQLite file."""
    for side in SIDE_FILES:
        if real.endswith(side):
            base = real[: -len(side)]
            if base.endswith(STUDY_SUFFIX) or _is_sqlite(base):
                return base
    return None


def check_target(path: str | os.PathLike, *, beside: str | os.PathLike | None = None) -> Path:
    """Check that `path` may be written now; return the path to write (a symbolic link's target).

    `beside` names the file the user asked for when `path` is a companion written next to it (a code frame
    CSV, a Triple-S data file): the messages then say so. Raises UnsafeTarget, BadInput or WriteFailed.
    """
    given = Path(path)
    if not str(path).strip():
        raise BadInput("the output path is empty")
    shown = f"{given} (written beside {beside})" if beside else str(given)
    real = os.path.realpath(given)
    if any(real == root or real.startswith(root + "/") for root in SYSTEM_FOLDERS):
        raise UnsafeTarget(f"{shown}: is a system or device path ({real}); oecode writes only regular files")
    try:
        info = os.stat(real)
    except (FileNotFoundError, NotADirectoryError):
        info = None
    except OSError as error:
        raise WriteFailed(f"{shown}: cannot be checked ({error.strerror})") from None
    if info is not None:
        kind = _kind_of(info.st_mode)
        if kind == "a folder":
            raise BadInput(f"{shown}: is a folder, expected a file path")
        if kind:
            raise UnsafeTarget(f"{shown}: is {kind}, not a regular file; oecode writes only regular files")
        if _is_sqlite(real):
            raise UnsafeTarget(f"{shown}: is a study file (an SQLite database); oecode never writes over one, "
                               "choose another name")
    if real.endswith(STUDY_SUFFIX):
        raise UnsafeTarget(f"{shown}: names ending in {STUDY_SUFFIX} are kept for study files; choose another name")
    side_of = _study_side_file(real)
    if side_of:
        raise UnsafeTarget(f"{shown}: is a side file of the study {side_of}; choose another name")
    if real in _PROTECTED:
        raise UnsafeTarget(f"{shown}: is {_PROTECTED[real]}; oecode never writes over it, choose another name")
    folder = os.path.dirname(real) or "."
    if not os.path.exists(folder):
        raise BadInput(f"{shown}: the folder {given.parent} does not exist")
    if not os.path.isdir(folder):
        raise BadInput(f"{shown}: {given.parent} is not a folder")
    if not os.access(folder, os.W_OK):
        raise WriteFailed(f"{shown}: no permission to write in {given.parent if str(given.parent) else '.'}")
    if info is not None:
        _check_replace(given, real, shown)
    return Path(real) if given.is_symlink() else given


def _check_replace(given: Path, real: str, shown: str) -> None:
    policy = current_policy()
    if policy.overwrite or real in policy.approved:
        return
    if policy.confirm is not None and policy.confirm(given):
        policy.approved.add(real)
        return
    raise UnsafeTarget(f"{shown}: already exists; add --overwrite to replace it")


def check_targets(paths: Iterable[tuple[str | os.PathLike, str | os.PathLike | None]]) -> list[Path]:
    """Check several outputs at once (each with the file it is written beside, or None), all before any is
    written; two outputs resolving to one file are refused."""
    checked, seen = [], {}
    for path, beside in paths:
        target = check_target(path, beside=beside)
        real = os.path.realpath(target)
        if real in seen:
            raise UnsafeTarget(f"{path}: would be written twice in one run (also as {seen[real]}); "
                               "choose a different name")
        seen[real] = path
        checked.append(target)
    return checked
