"""Slow work off the UI thread that never holds up quitting: a daemon thread, or a child process for model fits.

Textual's thread workers run in the event loop's executor, and the process waits for those threads when it
exits, so Ctrl+Q during a long read or fit would hang. These jobs run in daemon threads (quitting does not
wait), report back on the UI thread, and drop their result once cancelled. A model fit runs in a child
process that is killed at once on cancel, so leaving the screen also frees the processor the desk needs;
the child calls `exit_with_parent()` first, so a desk killed outright (SIGKILL, a closed terminal) does not
leave a fit running.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
from typing import Any, Callable, Sequence

#: Held while a background thread imports the text analyzer and friends for the first time, and while a screen
#: module loads, so the UI thread and a worker never import the same modules at the same moment.
IMPORTING = threading.RLock()

#: The environment variable through which `ProcessJob` tells its child the desk's process id.
PARENT_ENV = "OECODE_PARENT_PID"
_PR_SET_PDEATHSIG = 1  # linux/prctl.h


def _ask_kernel_for_death_signal() -> bool:
    """Linux: have the kernel send SIGKILL when the parent dies (prctl PR_SET_PDEATHSIG); False elsewhere."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False


def _watch_parent(parent: int, every: float) -> None:
    while True:
        if os.getppid() != parent:
            os._exit(1)
        threading.Event().wait(every)


def exit_with_parent(use_prctl: bool = True, every: float = 0.5) -> str:
    """In a child process: end when the parent dies. Returns how ("prctl", "poll" or "" with no parent known).

    The parent's id comes from `PARENT_ENV` (set by `ProcessJob`), else `os.getppid()` now. On Linux the kernel
    kills the child (the signal follows the parent's thread that started the child: `ProcessJob` starts it
    from the UI thread, which lives as long as the desk); elsewhere, or when prctl fails, a daemon thread
    checks `os.getppid()` every `every` seconds. A parent that died before either was in place is caught by
    comparing the parent's id once more.
    """
    try:
        parent = int(os.environ.get(PARENT_ENV) or os.getppid())
    except ValueError:
        parent = os.getppid()
    if parent <= 1:
        return ""
    how = "prctl" if use_prctl and _ask_kernel_for_death_signal() else "poll"
    if os.getppid() != parent:  # gone before the watch began
        os._exit(1)
    if how == "poll":
        threading.Thread(target=_watch_parent, args=(parent, every), daemon=True, name="oecode-parent").start()
    return how


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
        env = {**os.environ, PARENT_ENV: str(os.getpid())}
        self.process = subprocess.Popen([sys.executable, "-m", self.module, *self.args], stdin=subprocess.DEVNULL,
                                        stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
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
