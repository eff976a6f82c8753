"""A study's change feed: other coders' work and frame edits, as they happen, for desks to redraw from.

On a server each change to a coded table is announced by a trigger (server.install_change_triggers) and a
feed LISTENs on the study's channel: a `StudyChange` per changed row (table, op, coder, verbatim), delivered
when the writer commits, never for a change rolled back. A study file has no such channel; its feed checks
SQLite's data_version (it moves when another connection commits) a few times a second and reports one
`StudyChange` with table "*" (something changed, read again).

A change tells a desk *that* something changed, never the codes themselves: the desk reads them through its
own connection, where the coder's role decides what it may see (blind samples stay blind).

    feed = ChangeFeed(study_path_or_address)
    changes = feed.wait(timeout=1.0)        # [] after a quiet second
    sub = subscribe(target, callback)       # a thread calling callback(changes); sub.stop() ends it
"""

from __future__ import annotations

import json
import os
import sqlite3
import threading
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from opencode.study.address import ServerAddress, is_server_address, parse_address

#: How often a study file's feed looks for commits by other connections (seconds).
FILE_POLL_SECONDS = 0.25


@dataclass(frozen=True)
class StudyChange:
    """One change another connection committed: which table, insert/update/delete, whose row, which verbatim."""

    table: str                 # "*" when the store cannot say (a study file)
    op: str                    # "insert", "update", "delete", or "change"
    coder: str | None = None
    verbatim_id: int | None = None

    @property
    def frame_changed(self) -> bool:
        """Whether the change touches the frame (codes, frames, a question's frame) or cannot say."""
        return self.table in ("*", "codes", "frames", "frame_questions")


class ChangeFeed:
    """Changes committed to a study by any connection, read on demand with `wait`."""

    def __init__(self, target: "str | os.PathLike | ServerAddress"):
        self.target = target
        self._closed = False
        if is_server_address(target):
            from opencode.study.postgres import connect_raw, quote_ident
            from opencode.study.server import channel

            self.address = parse_address(target)
            self._pg = connect_raw(self.address)
            self._pg.execute(f"LISTEN {quote_ident(channel(self.address.study))}")
            self._file = None
        else:
            self._pg = None
            self._file = sqlite3.connect(str(Path(target)), timeout=5, check_same_thread=False)
            self._version = self._data_version()

    def _data_version(self) -> int:
        return int(self._file.execute("PRAGMA data_version").fetchone()[0])

    def wait(self, timeout: float = 1.0) -> list[StudyChange]:
        """Changes committed since the last call, waiting up to `timeout` seconds for the first one."""
        if self._closed:
            return []
        if self._pg is not None:
            found = [self._parse(n.payload) for n in self._pg.notifies(timeout=timeout, stop_after=1)]
            if found:  # gather what arrived with it (a transaction's rows come together)
                found += [self._parse(n.payload) for n in self._pg.notifies(timeout=0.02)]
            return found
        deadline = time.monotonic() + timeout
        while True:
            version = self._data_version()
            if version != self._version:
                self._version = version
                return [StudyChange("*", "change")]
            left = deadline - time.monotonic()
            if left <= 0:
                return []
            time.sleep(min(FILE_POLL_SECONDS, left))

    @staticmethod
    def _parse(payload: str) -> StudyChange:
        data = json.loads(payload)
        verbatim = data.get("verbatim_id")
        return StudyChange(data.get("table", "*"), data.get("op", "change"), data.get("coder"),
                           None if verbatim is None else int(verbatim))

    def close(self) -> None:
        self._closed = True
        if self._pg is not None:
            self._pg.close()
        if self._file is not None:
            self._file.close()

    def __enter__(self) -> "ChangeFeed":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class Subscription:
    """A running feed thread; `stop()` ends it (within about a second)."""

    def __init__(self, feed: ChangeFeed, callback: Callable[[list[StudyChange]], None], ignore_coder: str | None,
                 min_interval: float = 0.0):
        self._feed = feed
        self._min_interval = min_interval
        self._callback = callback
        self._ignore = ignore_coder
        self._stopping = threading.Event()
        self.error: BaseException | None = None
        self._thread = threading.Thread(target=self._run, name="oecode-change-feed", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        try:
            while not self._stopping.is_set():
                changes = self._feed.wait(timeout=0.5)
                if self._ignore is not None:
                    changes = [c for c in changes if c.coder != self._ignore or c.frame_changed]
                if changes and not self._stopping.is_set():
                    self._callback(changes)
                    if self._min_interval:  # what arrives meanwhile comes in the next batch
                        self._stopping.wait(self._min_interval)
        except BaseException as error:  # the feed broke (server gone): the desk keeps its timer refresh
            self.error = error
        finally:
            self._feed.close()

    @property
    def running(self) -> bool:
        return self._thread.is_alive()

    def stop(self) -> None:
        self._stopping.set()
        self._thread.join(timeout=2)


def subscribe(target: "str | os.PathLike | ServerAddress", callback: Callable[[list[StudyChange]], None], *,
              ignore_coder: str | None = None, min_interval: float = 0.0) -> Subscription:
    """Call `callback(changes)` from a background thread whenever others commit changes to the study.

    ignore_coder: leave out row changes made under this coder's name (the desk's own presses), frame
    changes excepted. min_interval: at most one call per this many seconds (changes arriving meanwhile are
    batched), so twenty busy coders do not make a desk redraw twenty times a second. The callback runs on
    the feed's thread: a Textual app hands it on with call_from_thread.
    """
    return Subscription(ChangeFeed(target), callback, ignore_coder, min_interval)
