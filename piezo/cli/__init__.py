"""The ``piezo`` command line.

Each command group lives in its own module under :mod:`piezo.cli` and exposes
``register(app)``. :func:`main` is the console-script entry point: it runs the typer app
and turns a :class:`~piezo.errors.PiezoError` into one line on stderr.

Exit codes (documented in the README): 0 success; 1 the analysis ran and found a failure
(``check``, ``batch``); 2 unusable input or options; 3 an internal error (a bug: please
report it with the ``--debug`` traceback).
"""

from __future__ import annotations

import importlib
import sys
from typing import Annotated

import typer

from piezo import __version__
from piezo.errors import PiezoError

__all__ = ["EXIT_FAILED", "EXIT_INTERNAL", "EXIT_OK", "EXIT_USAGE", "app", "main"]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2
EXIT_INTERNAL = 3

#: Command modules, in the order their commands are listed by ``piezo --help``.
COMMAND_MODULES = (
    "info",
    "calibrate",
    "levels",
    "spectrum",
    "bands",
    "tone",
    "sweep",
    "response",
    "frontend",
    "check",
    "report",
    "batch",
    "limits",
    "demo",
)

app = typer.Typer(
    name="piezo",
    help="Calibrated analysis of piezoelectric sensor recordings.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode="rich",
)

_state = {"debug": False}


def _version(value: bool) -> None:
    if value:
        typer.echo(f"piezo {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: Annotated[
        bool,
        typer.Option("--version", callback=_version, is_eager=True, help="Show the version."),
    ] = False,
    debug: Annotated[
        bool, typer.Option("--debug", help="Show the full traceback when something fails.")
    ] = False,
) -> None:
    """Calibrated analysis of piezoelectric sensor recordings.

    Levels, spectra, front-end models, frequency response, capture checks and production
    limit checks, all in volts or pascals through one measurement chain.
    """
    _state["debug"] = _state["debug"] or debug


for _name in COMMAND_MODULES:
    importlib.import_module(f"piezo.cli.{_name}").register(app)


def _interrupted() -> None:
    sys.stderr.write("piezo: interrupted\n")
    sys.exit(130)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point."""
    args = sys.argv[1:] if argv is None else argv
    # --debug is accepted anywhere on the line, not only before the command.
    if "--debug" in args:
        _state["debug"] = True
        args = [a for a in args if a != "--debug"]
    try:
        app(args=args, prog_name="piezo", standalone_mode=True)
    except PiezoError as exc:
        if _state["debug"]:
            raise
        sys.stderr.write(f"piezo: error: {exc}\n")
        sys.exit(EXIT_USAGE)
    except KeyboardInterrupt:
        _interrupted()
    except SystemExit as exc:
        if exc.code == 130:  # typer turns Ctrl-C inside a command into a silent exit 130
            _interrupted()
        raise
    except Exception as exc:  # an unexpected failure is a bug, shown as one line
        if _state["debug"]:
            raise
        sys.stderr.write(
            f"piezo: internal error: {type(exc).__name__}: {exc} "
            "(run again with --debug for the traceback)\n"
        )
        sys.exit(EXIT_INTERNAL)
