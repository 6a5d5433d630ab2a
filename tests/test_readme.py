"""The README's example commands run as written, on a copy of the bundled recordings."""

from __future__ import annotations

import shlex
import shutil
import subprocess
import sys

import pytest

from tests.paths import RECORDINGS, REPO


def readme_examples() -> list[str]:
    """The commands of the README's "Try them on the bundled recordings" block."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    block = text.split("Try them on the bundled recordings:")[1].split("```sh")[1]
    block = block.split("```")[0].replace("\\\n", " ")
    return [line.strip() for line in block.splitlines() if line.strip()]


def test_the_readme_has_examples():
    commands = readme_examples()
    assert len(commands) >= 10 and all(c.startswith("piezo ") for c in commands)


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    folder = tmp_path_factory.mktemp("readme")
    shutil.copytree(RECORDINGS, folder / "recordings")
    return folder


@pytest.mark.parametrize("command", readme_examples())
def test_readme_example_runs(workdir, command):
    # Exit 0, or 1 where the example shows a finding (the pump bench's clipped channel);
    # never 2 (bad input) or 3 (a bug), never an error line.
    argv = [sys.executable, "-m", "piezo", *shlex.split(command)[1:]]
    done = subprocess.run(argv, cwd=workdir, capture_output=True, text=True, timeout=120)
    assert done.returncode in (0, 1), done.stderr
    assert "piezo: error" not in done.stderr and "Traceback" not in done.stderr
