"""Terminal and file output shared by every command.

This is the only module (with the report and batch layers) that writes to stdout or to
files: JSON documents, progress bars, and atomic file writes.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import sys
import tempfile
from collections.abc import Iterator
from dataclasses import asdict, is_dataclass
from pathlib import Path
from typing import Any

import numpy as np
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

__all__ = ["atomic_output", "console", "emit_json", "err_console", "progress", "to_jsonable"]

console = Console(highlight=False)
err_console = Console(stderr=True, highlight=False)


def to_jsonable(obj: Any) -> Any:
    """Turn result objects into plain JSON values.

    Dataclasses become objects, numpy scalars and arrays become numbers and lists, and
    non-finite floats become ``null`` (JSON has no NaN or infinity).
    """
    if is_dataclass(obj) and not isinstance(obj, type):
        return to_jsonable(asdict(obj))
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.generic):
        return to_jsonable(obj.item())
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


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


@contextlib.contextmanager
def atomic_output(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; rename it to ``path`` on success.

    The temporary name keeps the file's suffix (so libraries that choose a format by
    extension still work). If the block raises, the temporary file is removed and
    ``path`` is left as it was: never half written.
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp_name = tempfile.mkstemp(
        prefix=f".{target.stem}.", suffix=f".partial{target.suffix}", dir=target.parent
    )
    os.close(fd)
    tmp = Path(tmp_name)
    # mkstemp creates the file private (0600); give it the mode a plain open() would.
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    try:
        yield tmp
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def write_text_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` atomically (UTF-8)."""
    with atomic_output(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
