"""The code keeps the house style: ruff and mypy find nothing in the package or the tests."""

from __future__ import annotations

import subprocess
import sys

from server.config import ROOT


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", *args], cwd=ROOT, capture_output=True, text=True, check=False
    )


def test_ruff_finds_nothing_to_fix() -> None:
    done = _run("ruff", "check", "server", "tests", "migrations")
    assert done.returncode == 0, done.stdout + done.stderr


def test_mypy_finds_no_type_error_in_the_package() -> None:
    done = _run("mypy", "--no-incremental")
    assert done.returncode == 0, done.stdout + done.stderr
