"""`python -m opencode.tui.drivers_job STUDY QUESTION`: the terms screen's drivers fit, run as a child process.

It prints one JSON object a line: {"progress": [done, total]} as the steps finish, then {"rows": [[term,
figure], ...], "note": "..."} or {"error": "..."}. The screen kills the process when the coder leaves it or
quits, so a long fit never holds up the desk; and it ends by itself when the desk dies without a word
(SIGKILL), through `background.exit_with_parent`.
"""

from __future__ import annotations

import json
import sys


def _emit(message: dict) -> None:
    sys.stdout.write(json.dumps(message) + "\n")
    sys.stdout.flush()


def main(argv: list[str] | None = None) -> int:
    from opencode.tui.background import exit_with_parent

    exit_with_parent()
    args = sys.argv[1:] if argv is None else argv
    if len(args) != 2:
        _emit({"error": "usage: python -m opencode.tui.drivers_job STUDY QUESTION"})
        return 2
    from opencode.analysis.drivers.ranked import ranked_drivers
    from opencode.errors import OpenCodeError
    from opencode.study.store import Study

    try:
        with Study.open(args[0]) as study:
            found = ranked_drivers(study, args[1], progress=lambda done, total: _emit({"progress": [done, total]}))
    except OpenCodeError as error:
        _emit({"error": str(error)})
        return 1
    except BrokenPipeError:  # the screen went away: nobody reads the result
        return 1
    _emit({"rows": [list(row) for row in found.rows], "note": found.note})
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
