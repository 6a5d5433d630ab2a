"""Shared fixtures: a seeded random generator and a command-line runner."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np
import pytest
from hypothesis import settings

from piezo.cli import main

# Property tests check results, not speed: no per-example deadline (a loaded CI machine
# must not turn a correct test red).
settings.register_profile("piezo", deadline=None)
settings.load_profile("piezo")


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator, so every run sees the same 'random' data."""
    return np.random.default_rng(20261201)


@dataclasses.dataclass
class CliResult:
    """Exit code and captured streams of one command-line run."""

    code: int
    out: str
    err: str

    def json(self):
        """Parse stdout as exactly one JSON document."""
        return json.loads(self.out)


@pytest.fixture
def cli(capsys):
    """Run ``piezo ARGS...`` in-process; returns a :class:`CliResult`."""

    def run(*args: str | Path) -> CliResult:
        capsys.readouterr()
        try:
            main([str(a) for a in args])
            code = 0
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)

    return run
