"""Options shared by every analysis command, defined once.

:func:`source_options` adds the measurement-chain and input options to a command and hands
the command a :class:`SourceOptions`; :func:`open_source` hands them to :func:`piezo.open`
(:func:`piezo.chain.open.open_source`), the one calibrated open. Option names are a public
contract: users' scripts rely on them.
"""

from __future__ import annotations

import functools
import inspect
import typing
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

import typer

from piezo.chain.measurement import CalibratedSource
from piezo.chain.open import open_source as open_calibrated
from piezo.errors import InputError

__all__ = [
    "JsonOption",
    "SourceOptions",
    "WeightAnyQuantityOption",
    "open_source",
    "source_options",
]

CHAIN_PANEL = "Measurement chain"
INPUT_PANEL = "Input"

JsonOption = Annotated[
    bool, typer.Option("--json", help="Print one JSON document on stdout instead of tables.")
]

WeightAnyQuantityOption = Annotated[
    bool,
    typer.Option(
        "--weight-any-quantity",
        help="Apply the A and C weightings to quantities other than sound pressure too "
        "(IEC 61672-1 defines them for sound pressure only).",
    ),
]


@dataclass(frozen=True)
class SourceOptions:
    """Input and chain options as typed on the command line (text, unparsed).

    Examples
    --------
    >>> options = SourceOptions(sensitivity="8.5 mV/Pa", channel=[0])
    >>> options.sensitivity, options.channel, options.no_sidecar
    ('8.5 mV/Pa', [0], False)
    """

    sensitivity: str | None = None
    gain: str | None = None
    full_scale: str | None = None
    reference: str | None = None
    charge_gain: str | None = None
    profile: Path | None = None
    quantity: str | None = None
    response_curve: Path | None = None
    integrate: int = 0
    channel: list[int] | None = None
    rate: str | None = None
    columns: str | None = None
    no_sidecar: bool = False


_OPTIONS: dict[str, tuple[Any, Any]] = {
    "sensitivity": (
        str | None,
        typer.Option(
            "--sensitivity",
            metavar="SENS",
            help="Sensor sensitivity: '20 mV/Pa', '-34 dBV/Pa', '-196 dB re 1 V/uPa', "
            "'10 mV/g', '2 mV/N', '12 pC/Pa' or '4 pC/N' (with --charge-gain).",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "gain": (
        str | None,
        typer.Option(
            "--gain",
            metavar="GAIN",
            help="Amplifier gain between sensor and ADC: '20 dB' or '10' (V/V). Default 0 dB.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "full_scale": (
        str | None,
        typer.Option(
            "--full-scale",
            metavar="VOLTS",
            help="Volts at digital full scale for audio files. Default 1 V. CSV values are volts.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "reference": (
        str | None,
        typer.Option(
            "--reference",
            metavar="PRESSURE",
            help="Reference pressure for dB: '20 uPa' (air, default) or '1 uPa' (water). "
            "Other quantities use ISO 1683 references (1 um/s², 1 nm/s, 1 pm, 1 uN).",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "charge_gain": (
        str | None,
        typer.Option(
            "--charge-gain",
            metavar="V/C",
            help="Charge amplifier gain for pC/Pa sensitivities, e.g. '1 mV/pC'.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "quantity": (
        str | None,
        typer.Option(
            "--quantity",
            metavar="QUANTITY",
            help="What the sensor measures: pressure, acceleration, velocity, displacement, "
            "force, voltage or charge. Default: the profile's, else the sensitivity's unit.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "response_curve": (
        Path | None,
        typer.Option(
            "--response-curve",
            metavar="CSV",
            help="Sensor response curve (frequency_hz, relative_db[, phase_deg]) undone in "
            "every result; for all channels, over the profile's.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "integrate": (
        int,
        typer.Option(
            "--integrate",
            metavar="1|2",
            help="Integrate acceleration to velocity (1) or displacement (2), velocity to "
            "displacement (1); each step with a 1 Hz high-pass so drift stays bounded.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "profile": (
        Path | None,
        typer.Option(
            "--profile",
            metavar="TOML",
            help="Sensor profile (TOML). NAME.toml beside NAME.wav is read automatically.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "no_sidecar": (
        bool,
        typer.Option(
            "--no-sidecar",
            help="Ignore the NAME.toml profile beside the recording.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "channel": (
        list[int] | None,
        typer.Option(
            "--channel",
            metavar="N",
            help="Channel to analyse, 0-based; repeat for several. Default: all.",
            rich_help_panel=INPUT_PANEL,
        ),
    ),
    "rate": (
        str | None,
        typer.Option(
            "--rate",
            metavar="RATE",
            help="Sample rate for CSV files without a time column, e.g. '48k' or '10 kHz'.",
            rich_help_panel=INPUT_PANEL,
        ),
    ),
    "columns": (
        str | None,
        typer.Option(
            "--columns",
            metavar="COLS",
            help="CSV value columns by name or 0-based index, comma-separated.",
            rich_help_panel=INPUT_PANEL,
        ),
    ),
}

_DEFAULTS: dict[str, Any] = {"no_sidecar": False, "integrate": 0}


def source_options(func: Callable[..., Any]) -> Callable[..., Any]:
    """Add the shared input and chain options to a typer command.

    The decorated function takes a keyword parameter ``src: SourceOptions`` instead of the
    individual options; the command-line parameters are appended to its signature, so
    typer shows them (under their own help panels) on every analysis command.

    Examples
    --------
    >>> import inspect
    >>> @source_options
    ... def show(file: str, *, src: SourceOptions) -> None:
    ...     print(file, src.sensitivity, src.gain)
    >>> params = inspect.signature(show).parameters
    >>> "src" in params, "sensitivity" in params, "no_sidecar" in params
    (False, True, True)
    >>> show("a.wav", sensitivity="8.5 mV/Pa")
    a.wav 8.5 mV/Pa None
    """
    sig = inspect.signature(func)
    hints = typing.get_type_hints(func, include_extras=True)
    params = [
        p.replace(annotation=hints.get(p.name, p.annotation))
        for p in sig.parameters.values()
        if p.name != "src"
    ]
    annotations = {k: v for k, v in hints.items() if k != "src"}
    for name, (typ, info) in _OPTIONS.items():
        params.append(
            inspect.Parameter(
                name,
                inspect.Parameter.KEYWORD_ONLY,
                default=_DEFAULTS.get(name),
                annotation=Annotated[typ, info],
            )
        )
        annotations[name] = Annotated[typ, info]

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        picked = {name: kwargs.pop(name, _DEFAULTS.get(name)) for name in _OPTIONS}
        return func(*args, src=SourceOptions(**picked), **kwargs)

    wrapper.__signature__ = sig.replace(parameters=params)  # type: ignore[attr-defined]
    wrapper.__annotations__ = annotations
    return wrapper


#: Library parameter names -> the options that set them, for error messages.
_OPTION_NAMES = {
    "sensitivity": "--sensitivity",
    "full_scale": "--full-scale",
    "charge_gain": "--charge-gain",
    "reference": "--reference",
    "gain": "--gain",
    "quantity": "--quantity",
    "integrate": "--integrate",
    "rate_hz": "--rate",
    "rate": "--rate",
    "columns": "--columns",
}


def option_message(message: str) -> str:
    """A library message with its parameter name spelt as the command-line option.

    Examples
    --------
    >>> option_message("full_scale: unknown unit in '2 A'")
    "--full-scale: unknown unit in '2 A'"
    >>> option_message("rate must be positive, got '-1'")
    "--rate must be positive, got '-1'"
    >>> option_message("sensitivity: give the gain too (charge_gain, e.g. '1 mV/pC')")
    "--sensitivity: give the gain too (--charge-gain, e.g. '1 mV/pC')"
    """
    for name, option in _OPTION_NAMES.items():
        # A parameter named in parentheses, as a hint, is respelt too.
        message = message.replace(f"({name},", f"({option},").replace(f"({name})", f"({option})")
    for name, option in _OPTION_NAMES.items():
        for sep in (":", " "):
            if message.startswith(name + sep):
                return option + message[len(name) :]
    return message


def open_source(
    file: Path, src: SourceOptions, *, allow_time_gaps: bool = False
) -> CalibratedSource:
    """Open ``file`` through :func:`piezo.open` with the command's options.

    ``allow_time_gaps`` lets a CSV time column with gaps through (reported on the
    recording) instead of refusing it; only the capture check asks for that.

    Examples
    --------
    >>> from pathlib import Path
    >>> capture = Path("recordings/calibrator-94dB.wav")
    >>> source = open_source(capture, SourceOptions(sensitivity="8.5 mV/Pa"))
    >>> source.chain.sensitivity_v_per_pa, source.unit
    (0.0085, 'Pa')
    >>> open_source(capture, SourceOptions(full_scale="2 A"))
    Traceback (most recent call last):
    ...
    piezo.errors.UnitError: ...: --full-scale: unknown unit in '2 A'; ...
    """
    try:
        return open_calibrated(
            file,
            sensitivity=src.sensitivity,
            gain=src.gain,
            full_scale=src.full_scale,
            reference=src.reference,
            charge_gain=src.charge_gain,
            profile=src.profile,
            quantity=src.quantity,
            response_curve=src.response_curve,
            integrate=src.integrate,
            channels=src.channel or None,
            rate=src.rate,
            columns=src.columns,
            use_sidecar=not src.no_sidecar,
            allow_time_gaps=allow_time_gaps,
        )
    except InputError as exc:
        exc.message = option_message(exc.message)
        exc.args = (exc.message,)
        raise
