"""The layers import one way (import-linter contracts in pyproject.toml), and no SQL leaves study/."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def test_import_linter_contracts_hold():
    # import-linter (registry package) checks the contracts declared under [tool.importlinter].
    lint = Path(sys.executable).with_name("lint-imports")
    done = subprocess.run([str(lint), "--config", str(REPO / "pyproject.toml")], cwd=REPO, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-2000:]
    assert "0 broken" in done.stdout
