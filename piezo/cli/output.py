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
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.console import Console
from rich.text import Text

from piezo.errors import OutputError
from piezo.io.atomic import atomic_output, write_text_atomic
from piezo.io.text import printable
from piezo.results import to_jsonable

__all__ = [
    "ForceOption",
    "atomic_output",
    "console",
    "emit_json",
    "err_console",
    "levels_in",
    "print_heading",
    "progress",
    "refuse_existing",
    "to_jsonable",
    "write_text_atomic",
]

#: The one overwrite policy: an output file named on the command line that exists is
#: replaced only with ``--force`` (documented in the README, "Outputs").
ForceOption = Annotated[
    bool, typer.Option("--force", help="Replace output files that exist already.")
]


def levels_in(doc: dict[str, Any]) -> str:
    """What a document's levels are in: its shared ``level_unit``, or each channel's own.

    Examples
    --------
    >>> levels_in({"level_unit": "dB re 20 µPa", "channels": []})
    'dB re 20 µPa'
    >>> levels_in({"level_unit": None, "channels": [
    ...     {"channel": 0, "level_unit": "dB re 20 µPa"},
    ...     {"channel": 1, "level_unit": "dB re 1 µm/s²"}]})
    'dB re 20 µPa (ch 0), dB re 1 µm/s² (ch 1)'
    """
    if doc["level_unit"] is not None:
        return str(doc["level_unit"])
    return ", ".join(f"{e['level_unit']} (ch {e['channel']})" for e in doc["channels"])


def refuse_existing(*paths: Path | None, force: bool) -> None:
    """Refuse output files that exist, unless ``force``: the one overwrite policy.

    A path that is an existing folder is refused even with ``force`` (nothing replaces
    a folder). None entries (options not given) are skipped.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     out = pathlib.Path(tmp) / "table.csv"
    ...     refuse_existing(out, None, force=False)  # not there yet
    ...     _ = out.write_text("x")
    ...     refuse_existing(out, force=True)  # there, and --force given
    ...     refuse_existing(out, force=False)
    Traceback (most recent call last):
    ...
    piezo.errors.OutputError: .../table.csv: exists; use --force to replace it
    """
    for path in paths:
        if path is None:
            continue
        if path.is_dir() and not path.is_symlink():
            raise OutputError("cannot write: is a directory", source=str(path))
        if not force and (path.exists() or path.is_symlink()):
            raise OutputError("exists; use --force to replace it", source=str(path))


class _PlainConsole(Console):
    """A console for text that may hold the user's words (file names, serials, names
    from spec files): not read as rich markup or emoji codes, so a name like
    ``[capture]`` or ``:fire:`` prints as it is, and with control characters shown as
    escapes (:func:`piezo.io.text.printable`; line breaks stay), so a file name cannot
    move the cursor or change colours. Styles are given as ``style=`` or
    :class:`rich.text.Text` spans, never inside the text."""

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(highlight=False, markup=False, emoji=False, **kwargs)

    def render_str(self, text: str, *args: Any, **kwargs: Any) -> Text:
        return super().render_str(printable(text, keep_newlines=True), *args, **kwargs)


console = _PlainConsole()
err_console = _PlainConsole(stderr=True)


def print_heading(title: object, detail: str = "") -> None:
    """The first line of a command's terminal output: ``title`` (usually the file, as
    the user named it) in bold, then ``detail``; never broken into lines, so a long
    path can be copied whole.

    Examples
    --------
    >>> print_heading("probe [1]:fire:.wav", "channel 0")
    probe [1]:fire:.wav  channel 0
    >>> print_heading("a\\x1b[2Jb\\n.wav")  # control characters shown, on one line
    a\\x1b[2Jb\\n.wav
    """
    rest = f"  {printable(detail)}" if detail else ""
    heading = Text.assemble((printable(str(title)), "bold"), rest)
    console.print(heading, soft_wrap=True)


def emit_json(obj: Any) -> None:
    """Print exactly one JSON document on stdout.

    Examples
    --------
    >>> emit_json({"level_db": 94.0, "bands_hz": (500, 1000), "peak": float("nan")})
    {
      "level_db": 94.0,
      "bands_hz": [
        500,
        1000
      ],
      "peak": null
    }
    """
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")
    sys.stdout.flush()


def _interactive() -> bool:
    """True when stdout and stderr are both terminals (progress bars are shown)."""
    return sys.stdout.isatty() and sys.stderr.isatty()


@contextlib.contextmanager
def progress(description: str, total: float | None) -> Iterator[Any]:
    """A progress bar on a terminal; silent when stdout is not a terminal.

    Yields a function ``advance(amount)``. The bar is drawn on stderr so a JSON document
    on stdout is never mixed with it.

    Examples
    --------
    Under doctest stdout is not a terminal, so nothing is drawn:

    >>> with progress("Reading x.wav", total=3) as advance:
    ...     for _ in range(3):
    ...         advance(1)
    >>> print("done")
    done
    """
    if not _interactive():
        yield lambda amount=1: None
        return
    # Imported here for start-up time: only a terminal run draws a bar.
    from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

    bar = Progress(
        TextColumn("{task.description}", style="bold", markup=False),
        BarColumn(),
        TextColumn("{task.percentage:>3.0f}%"),
        TimeRemainingColumn(),
        console=err_console,
        transient=True,
    )
    with bar:
        task = bar.add_task(printable(description), total=total)  # may name a file
        yield lambda amount=1: bar.advance(task, amount)
