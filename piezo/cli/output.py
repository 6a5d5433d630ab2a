"""Terminal and file output shared by every command.

This is the only module (with the report and batch layers) that writes to stdout: JSON
documents and progress bars. Files are written by :mod:`piezo.io.atomic` (re-exported
here for the commands).
"""

from __future__ import annotations

import contextlib
import json
import sys
from collections.abc import Iterator
from typing import Any

from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

from piezo.io.atomic import atomic_output, write_text_atomic
from piezo.results import to_jsonable

__all__ = [
    "atomic_output",
    "console",
    "emit_json",
    "err_console",
    "progress",
    "to_jsonable",
    "write_text_atomic",
]

console = Console(highlight=False)
err_console = Console(stderr=True, highlight=False)


def emit_json(obj: Any) -> None:
    """Print exactly one JSON document on stdout."""
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")
    sys.stdout.flush()


def interactive() -> bool:
    """True when stdout and stderr are both terminals (progress bars are shown)."""
    return sys.stdout.isatty() and sys.stderr.isatty()


@contextlib.contextmanager
def progress(description: str, total: float | None) -> Iterator[Any]:
    """A progress bar on a terminal; silent when stdout is not a terminal.

    Yields a function ``advance(amount)``. The bar is drawn on stderr so a JSON document
    on stdout is never mixed with it.
    """
    if not interactive():
        yield lambda amount=1: None
        return
    bar = Progress(
        TextColumn("[bold]{task.description}"),
        BarColumn(),
        TextColumn("{task.percentage:>3.0f}%"),
        TimeRemainingColumn(),
        console=err_console,
        transient=True,
    )
    with bar:
        task = bar.add_task(description, total=total)
        yield lambda amount=1: bar.advance(task, amount)
