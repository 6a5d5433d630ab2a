"""The project's habits, run by the test command: lint, format, types.

The linters are pinned in the ``test`` extra (pyproject.toml), so these checks give the
same answer on every machine that installs it.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", *args], cwd=ROOT, capture_output=True, text=True, timeout=600
    )


def _have(module: str) -> bool:
    return shutil.which(module) is not None or _run(module, "--version").returncode == 0


@pytest.mark.skipif(not _have("ruff"), reason="ruff is not installed (pip install -e '.[test]')")
def test_ruff_finds_nothing() -> None:
    done = _run("ruff", "check", "piezo", "tests", "benchmarks")
    assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.skipif(not _have("ruff"), reason="ruff is not installed (pip install -e '.[test]')")
def test_code_is_formatted() -> None:
    done = _run("ruff", "format", "--check", "piezo", "tests", "benchmarks")
    assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.skipif(not _have("mypy"), reason="mypy is not installed (pip install -e '.[test]')")
def test_mypy_is_clean() -> None:
    done = _run("mypy", "piezo")
    assert done.returncode == 0, done.stdout + done.stderr
