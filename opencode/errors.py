"""The one exception type for problems a user can fix (bad file, unknown code, locked study)."""


class OpenCodeError(Exception):
    """A user-fixable problem. The message names the file, row, column or code concerned.

    The CLI prints the message without a traceback and exits non-zero.
    """
