"""The ``piezo`` command line.

Each command group lives in its own module under :mod:`piezo.cli` and exposes
``register(app)``. :data:`COMMANDS` lists every command with its module and one-line help:
``piezo --help`` is rendered from that table alone, and a command's module is imported only
when that command runs (or shows its own ``--help``), so start-up does not pay for the
analysis stack. :func:`main` is the console-script entry point: it runs the typer app and
turns a :class:`~piezo.errors.PiezoError`, a usage mistake or an interrupt into one line on
stderr.

Exit codes (documented in the README): 0 success; 1 the analysis ran and found a failure
(``check``, ``batch``); 2 unusable input or options; 3 an internal error (a bug: please
report it with the ``--debug`` traceback); 130 interrupted (Ctrl-C).

Help text is plain text: square brackets are shown as written (no rich markup) and the
lines of a paragraph are joined so that the terminal reflows them.
"""

from __future__ import annotations

import difflib
import errno
import gc
import importlib
import importlib.util
import inspect
import os
import re
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Annotated, Any

import typer
import typer.core
import typer.main
from typer.core import TyperArgument, TyperCommand, TyperGroup

try:  # recent typer carries its own copy of click: its exceptions are the ones raised
    from typer._click import exceptions as click_errors
    from typer._click.utils import PacifyFlushWrapper
except ImportError:  # older typer runs on click itself
    from click import exceptions as click_errors  # type: ignore[no-redef]
    from click.utils import PacifyFlushWrapper  # type: ignore[no-redef]

from piezo import __version__
from piezo._kernels.cache import lean_loading
from piezo.cli.exits import (
    EXIT_FAILED,
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_OK,
    EXIT_USAGE,
)
from piezo.errors import PiezoError
from piezo.threads import one_numeric_thread

__all__ = [
    "COMMANDS",
    "COMMAND_MODULES",
    "EXIT_FAILED",
    "EXIT_INTERNAL",
    "EXIT_INTERRUPTED",
    "EXIT_OK",
    "EXIT_USAGE",
    "Command",
    "app",
    "main",
]


@dataclass(frozen=True)
class Command:
    """One top-level command: its name, the module under :mod:`piezo.cli` whose
    ``register(app)`` adds it, and the one-line help ``piezo --help`` lists.

    Examples
    --------
    >>> Command("info", "info", "What a recording is.").module
    'info'
    >>> [command.name for command in COMMANDS if command.module == "frontend"]
    ['frontend', 'simulate', 'equalize']
    """

    name: str
    module: str
    help: str


#: Every top-level command, in the order ``piezo --help`` lists them. The help is the one
#: the module registers (a test keeps the two equal); a module not present in this
#: installation is left out of the listing.
COMMANDS: tuple[Command, ...] = (
    Command(
        "info",
        "info",
        "Format, rate, duration and peak/RMS per channel in dBFS and its own unit "
        "(Pa, m/s², N ...).",
    ),
    Command(
        "calibrate",
        "calibrate",
        "Sensitivity from a calibrator capture (sound, vibration, force): mV/Pa, mV/g, mV/N.",
    ),
    Command(
        "levels",
        "levels",
        "Levels per channel (IEC 61672-1): LZeq, F and S maxima and minima, LZpeak; for "
        "sound pressure LAeq, LCeq, LCpeak, LAE, LAF and LAS percentiles.",
    ),
    Command(
        "spectrum",
        "spectrum",
        "Welch power spectral density per channel (Pa²/Hz, (m/s²)²/Hz, V²/Hz ...), CSV and PNG.",
    ),
    Command("bands", "bands", "Octave and fractional-octave band levels (IEC 61260-1 class 1)."),
    Command("tone", "tone", "Test-tone frequency, level, THD, THD+N, SINAD and SNR."),
    Command("sweep", "sweep", "Swept-sine measurement: make the stimulus, analyse the capture."),
    Command(
        "response",
        "response",
        "H1 response with coherence from a two-channel recording; comparison calibration.",
    ),
    Command(
        "fit-frontend",
        "response",
        "Fit sensitivity, corner (1st/2nd order) and resonance to a response CSV.",
    ),
    Command(
        "frontend",
        "frontend",
        "Sensitivity, corner, bands, phase, noise budget and self-noise of a design.",
    ),
    Command(
        "simulate", "frontend", "Shape a recording (pressure or charge) as a front-end would."
    ),
    Command(
        "equalize", "frontend", "Undo a front-end's low-frequency roll-off down to a lower corner."
    ),
    Command(
        "impedance",
        "impedance",
        "Impedance sweep of an element (CSV table, or a V/I capture with --shunt): fs, fp, "
        "Qm, k_eff, C0 and the Butterworth–Van Dyke circuit per mode.",
    ),
    Command(
        "ringdown",
        "ringdown",
        "Tap and ring-down tests: events, modes (frequency, damping ratio, Q, decay rate) by "
        "the matrix pencil method, averaged over repeated events.",
    ),
    Command(
        "check",
        "check",
        "Capture diagnostics: clipping, headroom, DC, dropouts, hum, roll-off, noise floor. "
        "Exit 1 when a channel fails.",
    ),
    Command(
        "report",
        "report",
        "Write an HTML report (plots embedded, printable, offline) and its JSON per file.",
    ),
    Command(
        "batch",
        "batch",
        "Judge every capture of a lot against a limit spec: verdicts, yield, "
        "CSV/JSON/JUnit/HTML results.",
    ),
    Command("limits", "limits", "Limit specs for batch checks: derive limits from golden units."),
    Command("demo", "demo", "Write the synthetic demo recordings and their profiles."),
)

#: The command modules, each once, in listing order.
COMMAND_MODULES: tuple[str, ...] = tuple(dict.fromkeys(c.module for c in COMMANDS))

_BY_NAME = {c.name: c for c in COMMANDS}

#: Module -> the click commands its ``register(app)`` added, by name.
_loaded: dict[str, dict[str, Any]] = {}


def _module_present(module: str) -> bool:
    return importlib.util.find_spec(f"piezo.cli.{module}") is not None


def _plain_help(text: str | None) -> str | None:
    """Help text as plain text for rich: markup escaped, paragraph lines joined.

    A paragraph whose lines form a list or an indented block (or that starts with click's
    ``\\b`` marker) keeps its line breaks. A docstring's numpy-style ``Examples`` section
    is for readers of the code and is left out.

    Examples
    --------
    >>> from piezo.cli.sweep import noise
    >>> _plain_help(noise.__doc__)
    'Write seeded pink or white noise (a stimulus for piezo response) and its sidecar.'
    """
    if not text:
        return text
    from rich.markup import escape

    text = inspect.cleandoc(text)
    examples = re.search(r"^Examples\n-+$", text, re.MULTILINE)
    if examples is not None:
        text = text[: examples.start()].rstrip()
    paragraphs = []
    for paragraph in text.split("\n\n"):
        lines = paragraph.splitlines()
        keep = paragraph.startswith("\b") or any(
            re.match(r"\s|[-*•] |\d+[.)] ", line) for line in lines[1:]
        )
        paragraphs.append(escape(paragraph if keep else " ".join(ln.strip() for ln in lines)))
    return "\n\n".join(paragraphs)


def _plain_command(command: Any) -> None:
    command.help = _plain_help(command.help)
    command.short_help = _plain_help(command.short_help)
    command.epilog = _plain_help(command.epilog)
    for param in command.params:
        # click options and typer's arguments carry a help text; click's arguments do not.
        if getattr(param, "help", None):
            param.help = _plain_help(param.help)
        _no_value_shown(param)
    _no_value_shown(command.get_help_option(typer.Context(command)))
    if isinstance(command, TyperGroup):
        for sub in command.commands.values():
            _plain_command(sub)


def _no_value_shown(param: Any) -> None:
    """A flag (``--json``, ``--help``) takes no value: its help row shows none (typer
    would print the flag's Python type, ``<bool>``, where an option's value goes)."""
    if getattr(param, "is_flag", False) and param.metavar is None:
        param.metavar = ""


def _resume_collection() -> None:
    """After the start-up imports of a console run: collect again, without ever walking
    the objects made so far (``gc.freeze``: modules, classes, functions, which live as
    long as the process anyway)."""
    if _state.get("collection_paused"):
        _state["collection_paused"] = False
        gc.freeze()
        gc.enable()


def _load(module: str) -> dict[str, Any]:
    """Import ``piezo.cli.<module>``, let it register its commands, return them by name."""
    if module not in _loaded:
        holder = typer.Typer(rich_markup_mode=app.rich_markup_mode, add_completion=False)
        importlib.import_module(f"piezo.cli.{module}").register(holder)
        # A callback makes typer build a group even for a single command, so every
        # command keeps the name it was registered under.
        holder.callback()(lambda: None)
        group = typer.main.get_command(holder)
        assert isinstance(group, TyperGroup)
        for command in group.commands.values():
            _plain_command(command)
        _loaded[module] = dict(group.commands)
    _resume_collection()  # the command's code is loaded: start-up imports are over
    return _loaded[module]


class _NoSuchCommand(click_errors.UsageError):
    def __init__(self, name: str, possibilities: list[str], ctx: Any) -> None:
        super().__init__(f"no such command {name!r}", ctx=ctx)
        self.name = name
        self.possibilities = possibilities


class LazyGroup(TyperGroup):
    """The top-level group: lists :data:`COMMANDS` without importing them; imports a
    command's module only when that command is resolved.

    Examples
    --------
    The listing comes from :data:`COMMANDS`; resolving a command imports its module:

    >>> import typer.main
    >>> group = typer.main.get_command(app)
    >>> isinstance(group, LazyGroup), group.list_commands(None)[:3]
    (True, ['info', 'calibrate', 'levels'])
    >>> group.get_command(None, "fit-frontend").name
    'fit-frontend'
    """

    _listing = False

    def list_commands(self, ctx: Any) -> list[str]:
        present = {m: _module_present(m) for m in COMMAND_MODULES}
        return [c.name for c in COMMANDS if present[c.module]]

    def get_command(self, ctx: Any, cmd_name: str) -> Any:
        entry = _BY_NAME.get(cmd_name)
        if entry is None or not _module_present(entry.module):
            return None
        if self._listing:
            # The listing needs only the name and the one line: no import.
            return TyperCommand(
                name=entry.name, callback=None, help=entry.help, short_help=entry.help
            )
        return _load(entry.module).get(cmd_name)

    def resolve_command(self, ctx: Any, args: list[str]) -> tuple[str | None, Any, list[str]]:
        if args and not args[0].startswith("-"):
            names = self.list_commands(ctx)
            if args[0] not in names:
                raise _NoSuchCommand(args[0], difflib.get_close_matches(args[0], names), ctx)
        return super().resolve_command(ctx, args)

    def format_help(self, ctx: Any, formatter: Any) -> None:
        self.help = _plain_help(self.help)
        for param in [*self.params, self.get_help_option(ctx)]:
            _no_value_shown(param)
        self._listing = True
        try:
            super().format_help(ctx, formatter)
        finally:
            self._listing = False

    def format_commands(self, ctx: Any, formatter: Any) -> None:
        rows = [(name, _BY_NAME[name].help) for name in self.list_commands(ctx)]
        if rows:
            with formatter.section("Commands"):
                formatter.write_dl(rows)


app = typer.Typer(
    name="piezo",
    cls=LazyGroup,
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode="rich",
)

_state = {"debug": False, "collection_paused": False}


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
    limit checks, each channel in its own unit (Pa, m/s², N, V ...) through its measurement
    chain.
    """
    _state["debug"] = _state["debug"] or debug


def usage_message(exc: Any) -> str:
    """One line for a usage mistake: what is wrong and, where there is one, the likely fix.

    Examples
    --------
    >>> from piezo.cli import click_errors
    >>> usage_message(click_errors.NoSuchOption("--intervall", possibilities=["--interval"]))
    'no such option --intervall (did you mean --interval?)'
    >>> usage_message(click_errors.UsageError("Got unexpected extra argument (b.wav)"))
    'got unexpected extra argument (b.wav)'
    """
    if isinstance(exc, click_errors.NoSuchOption):
        text = f"no such option {exc.option_name}"
        if exc.possibilities:
            text += f" (did you mean {' or '.join(sorted(exc.possibilities))}?)"
    elif isinstance(exc, _NoSuchCommand):
        text = f"no such command {exc.name!r}"
        if exc.possibilities:
            text += f" (did you mean {' or '.join(exc.possibilities)}?)"
    elif isinstance(exc, click_errors.MissingParameter) and exc.param is not None:
        param = exc.param
        if isinstance(param, TyperArgument):
            text = f"missing argument {(param.name or '').upper()}"
        else:
            text = f"missing option {max(param.opts, key=len)}"
    else:
        text = " ".join(exc.format_message().split()).rstrip(".")
        text = text[:1].lower() + text[1:]
        # A sub-group's unknown command, in the wording of the top level's.
        unknown = re.fullmatch(r"no such command ('[^']*')(?:\. Did you mean (.*)\?)?", text)
        if unknown is not None:
            text = f"no such command {unknown[1]}"
            if unknown[2]:
                text += f" (did you mean {unknown[2].replace(chr(39), '')}?)"
    ctx = getattr(exc, "ctx", None)
    if isinstance(exc, click_errors.MissingParameter) and ctx is not None:
        text += f" (see {ctx.command_path} --help)"
    return text


def _run(args: Sequence[str]) -> int:
    """Run the app on ``args``; return the exit code (usage mistakes as one line)."""
    command = typer.main.get_command(app)
    try:
        with command.make_context("piezo", list(args)) as ctx:
            command.invoke(ctx)
    except typer.Exit as exc:
        return int(exc.exit_code)
    except click_errors.NoArgsIsHelpError as exc:
        # The help was printed (rich) or is the message (plain click): exit 2 as before.
        if exc.format_message():
            typer.echo(exc.format_message())
        return EXIT_USAGE
    except click_errors.ClickException as exc:
        _error_line(usage_message(exc))
        return exc.exit_code
    except typer.Abort:
        sys.stderr.write("piezo: interrupted\n")
        return EXIT_INTERRUPTED
    except OSError as exc:
        if exc.errno != errno.EPIPE:
            raise
        # The reader of stdout went away (``piezo ... | head``): nothing more to say.
        sys.stdout = PacifyFlushWrapper(sys.stdout)
        sys.stderr = PacifyFlushWrapper(sys.stderr)
        return EXIT_FAILED
    return EXIT_OK


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point.

    Examples
    --------
    ``main`` ends by :func:`sys.exit` with the exit code; a usage mistake is one line on
    stderr and exit code 2:

    >>> try:
    ...     main(["--version"])
    ... except SystemExit as done:
    ...     print(done.code)
    piezo ...
    0
    >>> try:
    ...     main(["lvels", "x.wav"])
    ... except SystemExit as done:
    ...     print(done.code)
    2
    """
    args = sys.argv[1:] if argv is None else argv
    if argv is None:
        # A process of its own: numpy is not imported yet, and one BLAS/OpenMP thread is
        # all piezo's small linear algebra uses (piezo.threads).
        one_numeric_thread(os.environ)
        # ... and no user code: numba loads without the libraries no kernel uses.
        lean_loading()
        # Start-up imports create only long-lived objects (modules, classes): no garbage
        # collection until the command's module is loaded (about 0.03 s of CPU; see
        # _resume_collection).
        gc.disable()
        _state["collection_paused"] = True
    code = _exit_code(args)
    if argv is None:
        # The process ends here: move every object out of the garbage collector's reach
        # (gc.freeze), so the interpreter's last collections at exit do not walk the
        # hundreds of thousands of objects numba's registries hold (about 0.15 s of CPU
        # after a kernel ran). Not done for a call with ``argv`` (tests, embedding).
        gc.freeze()
    sys.exit(code)


def _exit_code(args: list[str]) -> int:
    """Run the command line ``args``: the exit code, errors as one line on stderr."""
    # --debug is accepted anywhere on the line, not only before the command.
    _state["debug"] = "--debug" in args
    args = [a for a in args if a != "--debug"]
    try:
        return _run(args)
    except PiezoError as exc:
        if _state["debug"]:
            raise
        _error_line(str(exc))
        return EXIT_USAGE
    except KeyboardInterrupt:
        sys.stderr.write("piezo: interrupted\n")
        return EXIT_INTERRUPTED
    except SystemExit:
        raise
    except Exception as exc:  # an unexpected failure is a bug, shown as one line
        if _state["debug"]:
            raise
        from piezo.io.text import printable

        sys.stderr.write(
            f"piezo: internal error: {type(exc).__name__}: {printable(str(exc))} "
            "(run again with --debug for the traceback)\n"
        )
        return EXIT_INTERNAL


def _error_line(message: str) -> None:
    """The one line on stderr for a usage mistake or bad input (the message may quote a
    file name or an option value: control characters and line breaks shown as escapes)."""
    from piezo.io.text import printable  # here: only a failing run needs it

    sys.stderr.write(f"piezo: error: {printable(message)}\n")
