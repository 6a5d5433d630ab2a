"""The project's habits, run by the test command: lint, format, types, examples.

The linters are pinned in the ``test`` extra (pyproject.toml), so these checks give the
same answer on every machine that installs it.
"""

from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "piezo"


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


def _public_without_example() -> list[str]:
    """Public module-level functions and classes whose docstring shows no ``>>>`` example.

    Private modules (a leading underscore, generated kernel code among them) and private
    names are left out; a class's example may show its methods.
    """
    missing = []
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(ROOT)
        if any(part.startswith("_") and part != "__init__.py" for part in rel.parts):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in tree.body:
            if not isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                continue
            if node.name.startswith("_"):
                continue
            if ">>>" not in (ast.get_docstring(node) or ""):
                missing.append(f"{rel}:{node.lineno} {node.name}")
    return missing


def test_every_public_name_has_an_example() -> None:
    missing = _public_without_example()
    assert not missing, f"{len(missing)} public names without a docstring example:\n" + (
        "\n".join(missing)
    )
