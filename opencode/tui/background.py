"""Slow work off the UI thread that never holds up quitting: a daemon thread, or a child process for model fits.

Textual's thread workers run in the event loop's executor, and the process waits for those threads when it
exits, so Ctrl+Q during a long read or fit would hang. These jobs run in daemon threads (quitting does not
wait), report back on the UI thread, and drop their result once cancelled. A model fit runs in a child
process that is killed at once on cancel, so leaving the screen also frees the processor the desk needs.
"""

from __future__ import annotations

import json
import subprocess
import sys
import threading
from typing import Any, Callable, Sequence

#: Held while a background thread imports the text analyzer and friends for the first time, and while a screen
#: module loads, so the UI thread and a worker never import the same modules at the same moment.
IMPORTING = threading.RLock()


def _deliver(app, callback: Callable[..., None], *args: Any) -> None:
    """Call back on the UI thread; quietly nothing once the app has closed."""
    if not app.is_running:
        return
    try:
        app.call_from_thread(callback, *args)
    except Exception:  # the app closed meanwhile: nobody is waiting for the result
        pass


class ThreadJob:
    """`work()` in a daemon thread; `done(result)` or `failed(error)` on the UI thread unless cancelled."""

    def __init__(self, app, work: Callable[[], Any], done: Callable[[Any], None],
                 failed: Callable[[BaseException], None] | None = None):
        self.app, self.work, self.done, self.failed = app, work, done, failed
        self.cancelled = False
        self.finished = False

    def start(self) -> "ThreadJob":
        self.app.jobs.add(self)
        threading.Thread(target=self._run, daemon=True, name="oecode-job").start()
        return self

    def _run(self) -> None:
        try:
            result = self.work()
        except BaseException as error:  # reported on the UI thread, never raised in the thread
            self._finish(self.failed, error)
            return
        self._finish(self.done, result)

    def _finish(self, callback, value) -> None:
        def land(value=value) -> None:
            self.finished = True
            self.app.jobs.discard(self)
            if not self.cancelled and callback is not None:
                callback(value)
        _deliver(self.app, land)

    def cancel(self) -> None:
        """Drop the result (the thread ends on its own; quitting does not wait for it)."""
        self.cancelled = True
        self.app.jobs.discard(self)


class ProcessJob:
    """A child `python -m MODULE ARGS` writing one JSON object per line; each line reaches `line(obj)` on the UI
    thread, and `ended(returncode)` once it stops. `cancel()` kills the child at once."""

    def __init__(self, app, module: str, args: Sequence[str], line: Callable[[dict], None],
                 ended: Callable[[int], None] | None = None):
        self.app, self.module, self.args, self.line, self.ended = app, module, list(args), line, ended
        self.cancelled = False
        self.process: subprocess.Popen | None = None

    def start(self) -> "ProcessJob":
        self.process = subprocess.Popen([sys.executable, "-m", self.module, *self.args], stdin=subprocess.DEVNULL,
                                        stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
        self.app.jobs.add(self)
        threading.Thread(target=self._read, daemon=True, name="oecode-process").start()
        return self

    def _read(self) -> None:
        process = self.process
        assert process is not None and process.stdout is not None
        for raw in process.stdout:
            if self.cancelled:
                break
            try:
                message = json.loads(raw)
            except ValueError:
                continue
            _deliver(self.app, self._land, message)
        code = process.wait()
        _deliver(self.app, self._end, code)

    def _land(self, message: dict) -> None:
        if not self.cancelled:
            self.line(message)

    def _end(self, code: int) -> None:
        self.app.jobs.discard(self)
        if not self.cancelled and self.ended is not None:
            self.ended(code)

    @property
    def running(self) -> bool:
        return self.process is not None and self.process.poll() is None and not self.cancelled

    def cancel(self) -> None:
        """Kill the child now; nothing it sends afterwards is shown."""
        self.cancelled = True
        self.app.jobs.discard(self)
        if self.process is not None and self.process.poll() is None:
            self.process.kill()
