"""Options shared by every analysis command, defined once.

:func:`source_options` adds the measurement-chain and input options to a command and hands
the command a :class:`SourceOptions`; :func:`open_source` hands them to :func:`piezo.open`
(:func:`piezo.chain.open.open_source`), the one calibrated open. Option names are a public
contract: users' scripts rely on them.
"""

from __future__ import annotations

import functools
import inspect
import re
import typing
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

import typer

from piezo.chain.measurement import CHANNEL_SETTINGS, CalibratedSource
from piezo.chain.open import open_source as open_calibrated
from piezo.errors import InputError

__all__ = [
    "JsonOption",
    "SourceOptions",
    "WeightAnyQuantityOption",
    "open_source",
    "parse_channel_values",
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


#: A chain option as typed: one text, or the texts of a repeated option (``N=VALUE``
#: for channel N, a bare value for every channel).
OptionTexts = str | Path | Sequence[str | Path] | None


@dataclass(frozen=True)
class SourceOptions:
    """Input and chain options as typed on the command line (text, unparsed).

    The chain options (``sensitivity`` ... ``response_curve``) hold one text or the
    texts of the repeated option, each a bare value (every channel) or ``N=VALUE``
    (channel N); :func:`open_source` parses them.

    Examples
    --------
    >>> options = SourceOptions(sensitivity="8.5 mV/Pa", channel=[0])
    >>> options.sensitivity, options.channel, options.no_sidecar
    ('8.5 mV/Pa', [0], False)
    >>> SourceOptions(sensitivity=["10 mV/g", "1=50 mV/Pa"]).sensitivity
    ['10 mV/g', '1=50 mV/Pa']
    """

    sensitivity: OptionTexts = None
    gain: OptionTexts = None
    full_scale: OptionTexts = None
    reference: OptionTexts = None
    charge_gain: OptionTexts = None
    profile: Path | None = None
    quantity: OptionTexts = None
    response_curve: OptionTexts = None
    integrate: int = 0
    channel: list[int] | None = None
    rate: str | None = None
    columns: str | None = None
    no_sidecar: bool = False


_OPTIONS: dict[str, tuple[Any, Any]] = {
    "sensitivity": (
        list[str] | None,
        typer.Option(
            "--sensitivity",
            metavar="[N=]SENS",
            help="Sensor sensitivity: '20 mV/Pa', '-34 dBV/Pa', '-196 dB re 1 V/uPa', "
            "'10 mV/g', '2 mV/N', '12 pC/Pa' or '4 pC/N' (with --charge-gain). "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "gain": (
        list[str] | None,
        typer.Option(
            "--gain",
            metavar="[N=]GAIN",
            help="Amplifier gain between sensor and ADC: '20 dB' or '10' (V/V). Default 0 dB. "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "full_scale": (
        list[str] | None,
        typer.Option(
            "--full-scale",
            metavar="[N=]VOLTS",
            help="Volts at digital full scale for audio files. Default 1 V. CSV values are volts. "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "reference": (
        list[str] | None,
        typer.Option(
            "--reference",
            metavar="[N=]PRESSURE",
            help="Reference pressure for dB: '20 uPa' (air, default) or '1 uPa' (water). "
            "Other quantities use ISO 1683 references (1 um/s², 1 nm/s, 1 pm, 1 uN). "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "charge_gain": (
        list[str] | None,
        typer.Option(
            "--charge-gain",
            metavar="[N=]V/C",
            help="Charge amplifier gain for pC/Pa sensitivities, e.g. '1 mV/pC'. "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "quantity": (
        list[str] | None,
        typer.Option(
            "--quantity",
            metavar="[N=]QUANTITY",
            help="What the sensor measures: pressure, acceleration, velocity, displacement, "
            "force, voltage or charge. Default: the profile's, else the sensitivity's unit. "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
            rich_help_panel=CHAIN_PANEL,
        ),
    ),
    "response_curve": (
        list[str] | None,
        typer.Option(
            "--response-curve",
            metavar="[N=]CSV",
            help="Sensor response curve (frequency_hz, relative_db[, phase_deg]) undone in "
            "every result; for all channels, over the profile's. "
            "'N=VALUE' sets channel N (0-based) only; repeatable.",
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
    "response_curve": "--response-curve",
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
    >>> option_message("channel 1: full_scale: unknown unit in '2 A'")
    "channel 1: --full-scale: unknown unit in '2 A'"
    """
    for name, option in _OPTION_NAMES.items():
        # A parameter named in parentheses, as a hint, is respelt too.
        message = message.replace(f"({name},", f"({option},").replace(f"({name})", f"({option})")
    # A message about one channel's value ("channel 1: sensitivity: ...") keeps its prefix.
    channel = _CHANNEL_PREFIX.match(message)
    head, rest = (channel.group(0), message[channel.end() :]) if channel else ("", message)
    for name, option in _OPTION_NAMES.items():
        for sep in (":", " "):
            if rest.startswith(name + sep):
                return head + option + rest[len(name) :]
    return message


_CHANNEL_PREFIX = re.compile(r"^channel \d+: ")

#: ``N=VALUE``: a channel number, "=", the value (which may hold "=" itself).
_CHANNEL_VALUE = re.compile(r"^\s*([^=]*?)\s*=\s*(.*?)\s*$", re.DOTALL)


def parse_channel_values(
    texts: OptionTexts, *, option: str, path: bool = False
) -> tuple[str | None, dict[int, str]]:
    """Split a chain option's texts into the value for every channel and those of single ones.

    Each text is a bare value (every channel) or ``N=VALUE`` (channel N, 0-based). At
    most one bare value and one value per channel. With ``path`` (a file name option), a
    text whose part before ``=`` is not a channel number is a bare file name.

    Raises
    ------
    InputError
        A malformed ``N=VALUE``, an empty value, or a channel (or every channel) given
        twice; the message names ``option``.

    Examples
    --------
    >>> parse_channel_values(["10 mV/g", "1=50 mV/Pa", " 3 = 2 mV/N"], option="--sensitivity")
    ('10 mV/g', {1: '50 mV/Pa', 3: '2 mV/N'})
    >>> parse_channel_values("20 dB", option="--gain"), parse_channel_values(None, option="--gain")
    (('20 dB', {}), (None, {}))
    >>> parse_channel_values(["1=10 mV/g", "1=12 mV/g"], option="--sensitivity")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: --sensitivity: channel 1 is given twice ('1=10 mV/g', '1=12 mV/g')
    >>> parse_channel_values(["x=10 mV/g"], option="--sensitivity")
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: --sensitivity: cannot read 'x=10 mV/g': a value for one channel \
is N=VALUE with N = 0, 1, ... (0-based), e.g. '1=10 mV/g'
    """
    if texts is None:
        return None, {}
    items = [texts] if isinstance(texts, str | Path) else list(texts)
    every: str | None = None
    own: dict[int, str] = {}
    given: dict[int | None, str] = {}
    for item in items:
        text = str(item)
        match = _CHANNEL_VALUE.match(text)
        number: int | None = None
        value = text.strip()
        key = "" if match is None else match.group(1)
        is_number = key.isascii() and key.isdigit()
        if match is not None and (is_number or not path):
            value = match.group(2)
            if not is_number:
                raise InputError(
                    f"{option}: cannot read {text!r}: a value for one channel is N=VALUE "
                    "with N = 0, 1, ... (0-based), e.g. '1=10 mV/g'"
                )
            number = int(key)
        if not value:
            where = "" if number is None else f" for channel {number}"
            raise InputError(f"{option}: no value{where} in {text!r}")
        if number in given:
            if number is None:
                raise InputError(
                    f"{option}: two values for every channel ({given[None]!r}, {text!r}); "
                    "give one, and N=VALUE for channel N"
                )
            raise InputError(
                f"{option}: channel {number} is given twice ({given[number]!r}, {text!r})"
            )
        given[number] = text
        if number is None:
            every = value
        else:
            own[number] = value
    return every, own


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
    every: dict[str, str | None] = {}
    own: dict[int, dict[str, str]] = {}
    for name in CHANNEL_SETTINGS:
        every[name], values = parse_channel_values(
            getattr(src, name), option=_OPTION_NAMES[name], path=name == "response_curve"
        )
        for number, value in values.items():
            own.setdefault(number, {})[name] = value
    try:
        return open_calibrated(
            file,
            sensitivity=every["sensitivity"],
            gain=every["gain"],
            full_scale=every["full_scale"],
            reference=every["reference"],
            charge_gain=every["charge_gain"],
            profile=src.profile,
            quantity=every["quantity"],
            response_curve=every["response_curve"],
            channel_values=own,
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
