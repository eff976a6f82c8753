"""A throwaway PostgreSQL server in a folder, for trying team work on one machine (and for the tests).

`start_local_server(folder)` runs PostgreSQL's own initdb and pg_ctl: a cluster in FOLDER/data listening on
a Unix socket in FOLDER/socket and on 127.0.0.1, a database `oecode`, and the address to use written to
FOLDER/address.txt and as the libpq service `oecode-local` in FOLDER/pg_service.conf. Local socket connections are trusted (the socket folder is private to the user who
started the server); TCP connections need a password (scram-sha-256). Not for real data: a team's real
server is the one its IT runs and backs up.

PostgreSQL refuses to run as root; as root, name an ordinary account with `run_as` (the folder is handed to it).
"""

from __future__ import annotations

import glob
import os
import shutil
import socket
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

from opencode.errors import BadInput, OpenCodeError

DATABASE = "oecode"
SUPERUSER = "oecode"
#: The service name in FOLDER/pg_service.conf (libpq reads it when PGSERVICEFILE names that file).
SERVICE = "oecode-local"
INSTALL_HINT = "install PostgreSQL (e.g. apt-get install postgresql) so that initdb and pg_ctl are available"


@dataclass(frozen=True)
class LocalServer:
    """A running local server: its folder, port, socket folder and the address of its database."""

    folder: Path
    port: int
    socket_dir: Path
    superuser: str = SUPERUSER

    def address(self, study: str | None = None, user: str | None = None, database: str = DATABASE) -> str:
        """A postgresql:// address of the server's database (a study on it when `study` is given)."""
        text = f"postgresql://{user or self.superuser}@/{database}?host={self.socket_dir}&port={self.port}"
        return text + (f"&study={study}" if study else "")

    def tcp_address(self, study: str | None = None, user: str | None = None) -> str:
        """The same database over TCP on 127.0.0.1 (password authentication)."""
        text = f"postgresql://{user or self.superuser}@127.0.0.1:{self.port}/{DATABASE}?sslmode=disable"
        return text + (f"&study={study}" if study else "")


def find_program(name: str) -> str | None:
    """A PostgreSQL server program on PATH or in Debian's versioned folder (the newest), or None."""
    found = shutil.which(name)
    if found:
        return found
    candidates = sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}"),
                        key=lambda p: int(p.split("/")[4]) if p.split("/")[4].isdigit() else 0)
    return candidates[-1] if candidates else None


def free_port() -> int:
    """A TCP port nobody listens on right now."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def _as_user(command: list[str], run_as: str | None) -> list[str]:
    if run_as is None:
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            raise BadInput("PostgreSQL refuses to run as root; start the server as an ordinary user "
                           "(or name one with --run-as USER)")
        return command
    runuser = shutil.which("runuser") or shutil.which("setpriv")
    if runuser is None:
        raise OpenCodeError("cannot start the server as another user: runuser (util-linux) is not installed")
    if runuser.endswith("runuser"):
        return [runuser, "-u", run_as, "--", *command]
    return [runuser, f"--reuid={run_as}", f"--regid={run_as}", "--init-groups", *command]


def _hand_over(folder: Path, run_as: str | None) -> None:
    if run_as is None:
        return
    import pwd

    try:
        account = pwd.getpwnam(run_as)
    except KeyError as error:
        raise BadInput(f"--run-as {run_as}: no such user on this machine") from error
    for root, dirs, files in os.walk(folder):
        for name in [root, *(os.path.join(root, d) for d in dirs), *(os.path.join(root, f) for f in files)]:
            os.chown(name, account.pw_uid, account.pw_gid)


def start_local_server(folder: str | os.PathLike, *, port: int | None = None, run_as: str | None = None,
                       durable: bool = True, superuser: str = SUPERUSER) -> LocalServer:
    """Create (first time) and start a local server in `folder`; returns how to reach it.

    durable=False turns off fsync (faster, for throwaway test clusters only: a power cut loses data).
    """
    folder = Path(folder).absolute()
    initdb, pg_ctl = find_program("initdb"), find_program("pg_ctl")
    if not initdb or not pg_ctl:
        raise OpenCodeError(f"PostgreSQL is not installed: {INSTALL_HINT}")
    data, sockets = folder / "data", folder / "socket"
    if len(str(sockets)) > 90:
        raise BadInput(f"{folder}: the folder path is too long for a Unix socket; choose a shorter one")
    fresh = not (data / "PG_VERSION").exists()
    folder.mkdir(parents=True, exist_ok=True)
    sockets.mkdir(exist_ok=True)
    os.chmod(sockets, 0o700)
    if fresh:
        _hand_over(folder, run_as)
        _run(_as_user([initdb, "-D", str(data), "-U", superuser, "--auth-local=trust", "--auth-host=scram-sha-256",
                       "-E", "UTF8", "--locale=C", "--no-instructions"] + ([] if durable else ["--no-sync"]),
                      run_as), "initdb")
    port = port or free_port()
    options = (f"-c port={port} -c listen_addresses=127.0.0.1 -c unix_socket_directories={sockets} "
               f"-c max_connections=100" + ("" if durable else " -c fsync=off -c full_page_writes=off"))
    _hand_over(folder, run_as)
    _run(_as_user([pg_ctl, "-D", str(data), "-l", str(folder / "server.log"), "-w", "-t", "60", "-o", options,
                   "start"], run_as), "pg_ctl start")
    server = LocalServer(folder, port, sockets, superuser)
    if fresh:
        _create_database(server)
    (folder / "address.txt").write_text(server.address() + "\n", encoding="utf-8")
    (folder / "pg_service.conf").write_text(
        f"# libpq service file for the local server in this folder (PGSERVICEFILE=this file)\n[{SERVICE}]\n"
        f"host={server.socket_dir}\nport={server.port}\ndbname={DATABASE}\nuser={server.superuser}\n",
        encoding="utf-8")
    return server


def stop_local_server(folder: str | os.PathLike, run_as: str | None = None) -> None:
    """Stop the server started in `folder` (fast shutdown; nothing committed is lost)."""
    folder = Path(folder).absolute()
    pg_ctl = find_program("pg_ctl")
    if not pg_ctl:
        raise OpenCodeError(f"PostgreSQL is not installed: {INSTALL_HINT}")
    if not (folder / "data" / "postmaster.pid").exists():
        raise BadInput(f"{folder}: no server is running from this folder")
    _run(_as_user([pg_ctl, "-D", str(folder / "data"), "-m", "fast", "-w", "stop"], run_as), "pg_ctl stop")


def _create_database(server: LocalServer) -> None:
    import psycopg

    deadline = time.monotonic() + 30
    while True:
        try:
            with psycopg.connect(server.address(database="postgres"), autocommit=True) as connection:
                connection.execute(f'CREATE DATABASE "{DATABASE}"')
            return
        except psycopg.OperationalError:
            if time.monotonic() > deadline:
                raise
            time.sleep(0.2)


def _run(command: list[str], what: str) -> None:
    result = subprocess.run(command, capture_output=True, text=True)
    if result.returncode != 0:
        detail = (result.stderr or result.stdout).strip().splitlines()
        raise OpenCodeError(f"{what} failed: {detail[-1] if detail else 'no message'}")
