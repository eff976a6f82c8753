"""A real, throwaway PostgreSQL cluster for the team tests: one per test session (per xdist worker).

PostgreSQL refuses to run as root; when the tests run as root the cluster is started as an unprivileged
account (`oecodepg`, created here when missing; .ci/run creates it too). Without initdb/pg_ctl the tests
skip with an install hint, and fail under OECODE_CI=1 (helpers.require_program).
"""

from __future__ import annotations

import glob
import itertools
import os
import shutil
import subprocess
import tempfile

import pytest

from helpers import require_program
from opencode.study.pg_local import LocalServer, start_local_server, stop_local_server

ACCOUNT = "oecodepg"
_names = itertools.count(1)


def _unprivileged_account() -> str | None:
    if os.geteuid() != 0:
        return None
    if subprocess.run(["id", "-u", ACCOUNT], capture_output=True).returncode != 0:
        made = subprocess.run(["useradd", "--system", "--no-create-home", "--shell", "/usr/sbin/nologin", ACCOUNT],
                              capture_output=True, text=True)
        if made.returncode != 0 and subprocess.run(["id", "-u", ACCOUNT], capture_output=True).returncode != 0:
            pytest.fail(f"cannot create the account {ACCOUNT} to run PostgreSQL as: {made.stderr.strip()}")
    return ACCOUNT


def server_programs() -> None:
    """Skip (or fail under CI) when PostgreSQL's server programs are not installed."""
    for name in ("initdb", "pg_ctl"):
        require_program(name, *sorted(glob.glob(f"/usr/lib/postgresql/*/bin/{name}")))


@pytest.fixture(scope="session")
def pg_server():
    """A running local cluster (fsync off: throwaway) with a database `oecode`; stopped and removed at the end."""
    server_programs()
    run_as = _unprivileged_account()
    folder = tempfile.mkdtemp(prefix="oecode-pg-", dir="/tmp")
    server: LocalServer = start_local_server(folder, run_as=run_as, durable=False)
    try:
        yield server
    finally:
        try:
            stop_local_server(folder, run_as=run_as)
        finally:
            shutil.rmtree(folder, ignore_errors=True)


def study_name(prefix: str = "t") -> str:
    """A study name (schema) not used before in this session."""
    return f"{prefix}{os.getpid()}_{next(_names)}"
