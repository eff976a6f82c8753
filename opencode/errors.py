"""The exceptions for problems a user can fix: one base class, and subclasses callers may act on.

Every message names the file, row, column or code concerned. The CLI catches the base class, prints the
message on one line (no traceback) and exits non-zero; the desk offers a retry for `StudyBusy` and
`WriteFailed`, by class, never by reading the message.
"""


class OpenCodeError(Exception):
    """A user-fixable problem (the base class). The message names the file, row, column or code concerned."""


class BadInput(OpenCodeError):
    """A file, cell, option or name the user gave cannot be used as it is."""


class StudyNotFound(OpenCodeError):
    """No study at the path or address given."""


class NotAStudy(OpenCodeError):
    """The file exists but is not a study (or not one this version can read)."""


class StudyBusy(OpenCodeError):
    """Another program holds the study's write lock; nothing was written, the same change can be retried."""


#: Older name kept for callers that say "locked".
StudyLocked = StudyBusy


class WriteFailed(OpenCodeError):
    """A write could not complete (disk full, read-only folder, permission); nothing was half-written."""


class UnsafeTarget(OpenCodeError):
    """An output path that would overwrite the study, a companion file, an input or a special file."""


class NotPermitted(OpenCodeError):
    """The study's server refused a change this coder's role may not make (another coder's codes, the frame)."""
