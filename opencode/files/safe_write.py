"""Write files through a temporary file in the same folder and an atomic rename: never half-written.

Every target is checked first by `targets.check_target` (never a study, a device or an unnamed existing
file). Temporary files carry a recognisable name (`.~oecode-PID-HOST-XXXX.NAME`) so that one left by a killed
run is removed by the next run writing in that folder; libraries that spill to a temporary folder
(openpyxl) are pointed at a private folder beside the output, never the shared one, so no verbatim text
lingers in /tmp. An OS error (disk full, read-only file system, no permission) becomes one WriteFailed line
naming the file.
"""

from __future__ import annotations

import contextlib
import errno
import glob
import os
import shutil
import socket
import tempfile
import time
import zlib
from pathlib import Path
from typing import Iterator

from opencode.errors import WriteFailed
from opencode.files.targets import check_target, record_written

TEMP_PREFIX = ".~oecode-"
#: A leftover from another computer (shared folder) is removed only after this many seconds.
FOREIGN_TEMP_AGE = 24 * 3600

_OS_ERRORS = {
    errno.ENOSPC: "the disk is full (no space left on device)",
    errno.EDQUOT: "the disk quota is used up",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "no permission to write there",
    errno.EPERM: "no permission to write there",
    errno.ENAMETOOLONG: "the file name is too long",
    errno.EFBIG: "the file is too large for this file system",
    errno.EIO: "an input/output error on the disk",
}


def describe_os_error(error: OSError, path: str | os.PathLike) -> str:
    """One line for a failed write: the file, what went wrong in words, and that nothing was half-written."""
    reason = _OS_ERRORS.get(error.errno) or error.strerror or str(error) or type(error).__name__
    return f"{path}: could not write: {reason}; nothing was written"


def check_writable_target(path: str | os.PathLike) -> Path:
    """The target checked for writing (see `targets.check_target`); kept under its older name."""
    return check_target(path)


def normal_file_mode() -> int:
    """The permissions a plain new file gets under the current umask (temporary files start at 0600)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _host_tag() -> str:
    return f"{zlib.crc32(socket.gethostname().encode('utf-8', 'replace')):08x}"


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists but belongs to someone else
        return True
    return True


def clean_stale_temporaries(folder: str | os.PathLike) -> list[Path]:
    """Remove temporary files and folders that a killed oecode run left in `folder`; return what went.

    A leftover from this computer goes when the process that made it is gone; one from another computer
    (a shared folder) only when it is older than a day.
    """
    removed: list[Path] = []
    host, now = _host_tag(), time.time()
    try:
        entries = [e for e in os.scandir(folder) if e.name.startswith(TEMP_PREFIX)]
    except OSError:
        return removed
    for entry in entries:
        parts = entry.name[len(TEMP_PREFIX):].split("-", 2)
        if len(parts) < 3 or not parts[0].isdigit():
            continue
        pid, their_host = int(parts[0]), parts[1]
        try:
            age = now - entry.stat(follow_symlinks=False).st_mtime
        except OSError:
            continue
        stale = not _process_alive(pid) if their_host == host else age > FOREIGN_TEMP_AGE
        if not stale or (their_host == host and pid == os.getpid()):
            continue
        with contextlib.suppress(OSError):
            if entry.is_dir(follow_symlinks=False):
                shutil.rmtree(entry.path)
            else:
                os.remove(entry.path)
            removed.append(Path(entry.path))
    return removed


def temporary_name(target: Path) -> str:
    """A name for a temporary file beside `target` that the next run can recognise as a leftover."""
    return f"{TEMP_PREFIX}{os.getpid()}-{_host_tag()}-{target.name[:80]}"


def remove_own_temporaries(target: Path) -> None:
    """Remove every temporary file this process made beside `target` (with its -wal/-shm), found by name: also
    one whose creation a Ctrl+C cut short before its name reached the caller."""
    folder = target.parent if str(target.parent) else Path(".")
    for leftover in folder.glob(glob.escape(temporary_name(target)) + ".*"):
        with contextlib.suppress(FileNotFoundError):
            os.remove(leftover)


def make_temporary(target: Path, suffix: str | None = None) -> Path:
    """Create an empty temporary file (mode 0600) beside `target`, after removing stale leftovers there."""
    folder = target.parent if str(target.parent) else Path(".")
    clean_stale_temporaries(folder)
    try:
        fd, name = tempfile.mkstemp(prefix=temporary_name(target) + ".", suffix=suffix or target.suffix or ".tmp",
                                    dir=folder)
    except OSError as error:
        raise WriteFailed(describe_os_error(error, target)) from None
    os.close(fd)
    return Path(name)


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside `path`; on success rename it over `path`, on error remove it.

    Use for writers that want a file name (pyreadstat, openpyxl, matplotlib).
    """
    target = check_target(path)
    try:  # the temporary file is removed by name: also when Ctrl+C cuts its creation short
        tmp_path = make_temporary(target, suffix)
        os.chmod(tmp_path, normal_file_mode())  # mkstemp makes 0600; a finished file gets normal permissions
        yield tmp_path
        check_target(target)  # still safe to replace (nothing became a study or a device meanwhile)
        os.replace(tmp_path, target)
    except OSError as error:
        remove_own_temporaries(target)
        raise WriteFailed(describe_os_error(error, path)) from None
    except BaseException:
        remove_own_temporaries(target)
        raise
    record_written(target)


@contextlib.contextmanager
def atomic_open(path: str | os.PathLike, mode: str = "w", encoding: str | None = "utf-8", newline: str | None = None):
    """Open a temporary file for writing; it replaces `path` only if the block finishes without error."""
    binary = "b" in mode
    with atomic_path(path) as tmp:
        with open(tmp, mode, encoding=None if binary else encoding, newline=None if binary else newline) as handle:
            yield handle


@contextlib.contextmanager
def private_tempdir(beside: str | os.PathLike) -> Iterator[Path]:
    """Point Python's temporary folder at a private folder (mode 0700) beside an output while a library
    spills data there (openpyxl writes each sheet to a temporary file); removed afterwards, and by the next
    run if this one is killed."""
    target = Path(beside)
    folder = target.parent if str(target.parent) else Path(".")
    clean_stale_temporaries(folder)
    try:
        private = Path(tempfile.mkdtemp(prefix=temporary_name(target) + ".", suffix=".d", dir=folder))
    except OSError as error:
        raise WriteFailed(describe_os_error(error, target)) from None
    previous = tempfile.tempdir
    tempfile.tempdir = str(private)
    try:
        yield private
    finally:
        tempfile.tempdir = previous
        shutil.rmtree(private, ignore_errors=True)
