"""A small tmux control-mode client: run a program in a real pseudo-terminal, type keys, read the screen, and
time when the program's output reached the terminal (used by tests/test_desk_terminal.py and bench/bench_desk_terminal.py).

Control mode (`tmux -C`) reports every byte the program writes as an `%output` line the moment tmux reads it,
and answers commands (send-keys, capture-pane) in `%begin`/`%end` blocks on the same ordered stream, so the
time of the last output before a capture that shows the expected screen is when that screen was drawn.
"""

from __future__ import annotations

import os
import queue
import shlex
import subprocess
import threading
import time
import uuid
from dataclasses import dataclass, field


@dataclass
class Block:
    """One command's answer: its lines, whether it failed, and the time of the last output before it."""

    lines: list[str] = field(default_factory=list)
    error: bool = False
    last_output: float = 0.0


class TmuxTerminal:
    """One tmux server on a private socket with one window of a fixed size, driven through control mode."""

    def __init__(self, tmux: str = "tmux", width: int = 80, height: int = 24, env: dict[str, str] | None = None):
        self.tmux, self.width, self.height = tmux, width, height
        self.socket = f"oecode-{os.getpid()}-{uuid.uuid4().hex[:8]}"
        self.env = env or {}
        self.client: subprocess.Popen | None = None
        self._blocks: queue.Queue[Block] = queue.Queue()
        self._last_output = 0.0
        self._outputs = 0
        self._lock = threading.Lock()
        self._output_seen = threading.Condition(self._lock)

    def _cmd(self, *args: str) -> list[str]:
        return [self.tmux, "-L", self.socket, "-f", "/dev/null", *args]

    def start(self, shell_command: str = "sh") -> "TmuxTerminal":
        """Start the server with a shell in an 80x24 (or given) window, and attach the control client."""
        env = {**os.environ, **self.env}
        subprocess.run(self._cmd("new-session", "-d", "-s", "main", "-x", str(self.width), "-y", str(self.height),
                                 shell_command), check=True, env=env)
        subprocess.run(self._cmd("set-option", "-g", "window-size", "manual"), check=True, env=env)
        subprocess.run(self._cmd("set-option", "-g", "remain-on-exit", "on"), check=True, env=env)
        subprocess.run(self._cmd("resize-window", "-t", "main", "-x", str(self.width), "-y", str(self.height)),
                       check=True, env=env)
        self.client = subprocess.Popen(self._cmd("-C", "attach-session", "-t", "main"), stdin=subprocess.PIPE,
                                       stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env, bufsize=0)
        threading.Thread(target=self._read, daemon=True).start()
        self._sync()
        return self

    def _sync(self, timeout: float = 10.0) -> None:
        """Line answers up with commands: an attaching client first gets an answer to no command of ours, and a
        command sent before the attach completes fails; ask until our own token comes back."""
        assert self.client is not None and self.client.stdin is not None
        token = uuid.uuid4().hex
        end = time.perf_counter() + timeout
        while time.perf_counter() < end:
            self.client.stdin.write(f"display-message -p {token}\n".encode())
            self.client.stdin.flush()
            try:
                while True:
                    block = self._blocks.get(timeout=0.5)
                    if block.lines == [token]:
                        while not self._blocks.empty():  # answers to our earlier tries
                            self._blocks.get_nowait()
                        return
                    if block.error:
                        break
            except queue.Empty:
                continue
        raise TimeoutError("the tmux control client never answered")

    def _read(self) -> None:
        assert self.client is not None and self.client.stdout is not None
        block: Block | None = None
        for raw in self.client.stdout:
            now = time.perf_counter()
            line = raw.decode("utf-8", "replace").rstrip("\n")
            if block is not None:
                if line.startswith("%end") or line.startswith("%error"):
                    block.error = line.startswith("%error")
                    self._blocks.put(block)
                    block = None
                else:
                    block.lines.append(line)
                continue
            if line.startswith("%begin"):
                with self._lock:
                    block = Block(last_output=self._last_output)
            elif line.startswith("%output"):
                with self._lock:
                    self._last_output = now
                    self._outputs += 1
                    self._output_seen.notify_all()

    def command(self, line: str, timeout: float = 10.0) -> Block:
        """Send one tmux command and wait for its answer."""
        assert self.client is not None and self.client.stdin is not None
        self.client.stdin.write((line + "\n").encode())
        self.client.stdin.flush()
        block = self._blocks.get(timeout=timeout)
        if block.error:
            raise RuntimeError(f"tmux {line!r}: {' '.join(block.lines)}")
        return block

    def send(self, *keys: str, literal: bool = False) -> float:
        """Type keys (tmux key names such as Right, Enter, C-q; or text with literal=True); the time sent."""
        sent = time.perf_counter()
        self.command("send-keys -t main " + ("-l " if literal else "") + " ".join(shlex.quote(k) for k in keys))
        return sent

    def paste(self, text: str) -> float:
        """Paste text as a terminal does (a bracketed paste when the program asked for one); the time sent."""
        sent = time.perf_counter()
        self.command(f"set-buffer -b oecode-paste {shlex.quote(text)}")
        self.command("paste-buffer -p -d -b oecode-paste -t main")
        return sent

    def screen(self) -> tuple[str, float]:
        """The visible screen as text, and the time of the last output tmux had read before drawing it."""
        block = self.command("capture-pane -p -t main")
        return "\n".join(block.lines), block.last_output

    def outputs(self) -> int:
        with self._lock:
            return self._outputs

    def wait_output(self, after: int, timeout: float) -> bool:
        """Wait until more than `after` output lines arrived."""
        with self._lock:
            return self._output_seen.wait_for(lambda: self._outputs > after, timeout=timeout)

    def wait_for(self, check, timeout: float = 30.0) -> tuple[str, float]:
        """Wait until check(screen text) holds; (screen, time its last output arrived). TimeoutError otherwise."""
        end = time.perf_counter() + timeout
        while True:
            seen = self.outputs()
            text, at = self.screen()
            if check(text):
                return text, at
            left = end - time.perf_counter()
            if left <= 0:
                raise TimeoutError(f"the terminal never showed what was expected; it shows:\n{text}")
            self.wait_output(seen, min(left, 0.5))

    def exited(self) -> bool:
        """Whether the program in the pane has ended (the pane stays, showing its last screen)."""
        return self.command("display-message -p -t main '#{pane_dead}'").lines == ["1"]

    def wait_exit(self, timeout: float = 10.0) -> float:
        """Wait for the program to end; the seconds it took. TimeoutError if it is still running."""
        start = time.perf_counter()
        while not self.exited():
            if time.perf_counter() - start > timeout:
                raise TimeoutError(f"the program was still running after {timeout:.0f} s")
            time.sleep(0.02)
        return time.perf_counter() - start

    def settle(self, quiet: float = 0.3, timeout: float = 30.0) -> str:
        """The screen once the program has written nothing for `quiet` seconds (a whole frame drawn)."""
        end = time.perf_counter() + timeout
        while time.perf_counter() < end:
            seen = self.outputs()
            if not self.wait_output(seen, quiet):
                break
        return self.screen()[0]

    def pane_pid(self) -> int:
        return int(self.command("display-message -p -t main '#{pane_pid}'").lines[0])

    def close(self) -> None:
        if self.client is not None:
            try:
                self.client.stdin.close()
            except OSError:
                pass
            self.client.kill()
            self.client.wait()
        subprocess.run(self._cmd("kill-server"), capture_output=True)
