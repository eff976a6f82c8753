"""Ctrl+C as a recorded fact: libraries that swallow KeyboardInterrupt (pandas' C reader turns it into a
parse error) must not make an interruption look like a bad file."""

from __future__ import annotations

import signal
import threading

_pressed = threading.Event()


def _on_interrupt(signum, frame):
    _pressed.set()
    raise KeyboardInterrupt


def record_interrupts() -> None:
    """Make Ctrl+C both raise KeyboardInterrupt (as usual) and leave a mark `interrupted()` can read."""
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGINT, _on_interrupt)


def interrupted() -> bool:
    """Whether Ctrl+C was pressed since `record_interrupts()`."""
    return _pressed.is_set()
