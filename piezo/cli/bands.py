"""``piezo bands``: fractional-octave band levels (IEC 61260-1:2014 class 1 filters)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from piezo.chain.units import parse_duration, parse_frequency
from piezo.cli.options import (
    JsonOption,
    SourceOptions,
    WeightAnyQuantityOption,
    open_source,
    source_options,
)
from piezo.cli.output import (
    ForceOption,
    console,
    emit_json,
    err_console,
    levels_in,
    print_heading,
    progress,
    refuse_existing,
    write_text_atomic,
)
from piezo.errors import InputError
from piezo.io.tables import csv_text
from piezo.plots.style import axis_label
from piezo.spectral.bands import FRACTIONS, BandResult
from piezo.spectral.summary import bands_of


def register(app: typer.Typer) -> None:
    """Add the ``bands`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['bands']
    """
    app.command("bands", help="Octave and fractional-octave band levels (IEC 61260-1 class 1).")(
        bands
    )


@source_options
def bands(
    file: Annotated[Path, typer.Argument(help="Recording: WAV, FLAC, RF64, W64, CSV ...")],
    *,
    fraction: Annotated[
        int,
        typer.Option(
            "--fraction",
            metavar="B",
            help=f"1/B octave: {', '.join(map(str, FRACTIONS))} (3: third octaves).",
        ),
    ] = 3,
    low: Annotated[
        str, typer.Option("--low", metavar="FREQ", help="Lowest nominal band.")
    ] = "20Hz",
    high: Annotated[
        str | None,
        typer.Option(
            "--high",
            metavar="FREQ",
            help="Highest nominal band; default 20kHz up to 48 kHz sampling, else the "
            "highest band the sample rate allows, or the sensor's frequency range "
            "(profile) when that ends lower.",
        ),
    ] = None,
    interval: Annotated[
        str | None,
        typer.Option(
            "--interval", metavar="TIME", help="Also give band levels per interval, e.g. '1s'."
        ),
    ] = None,
    weighting: Annotated[
        str,
        typer.Option(
            "--weighting", metavar="A|C|Z", help="Frequency weighting (IEC 61672-1) first."
        ),
    ] = "Z",
    csv: Annotated[
        Path | None, typer.Option("--csv", metavar="OUT.csv", help="Write band levels as CSV.")
    ] = None,
    force: ForceOption = False,
    weight_any_quantity: WeightAnyQuantityOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Band Leq of each channel through a multirate IEC 61260-1:2014 class 1 filter bank.

    Bands are named by their nominal mid-band frequency; exact mid-band frequencies
    follow the base-ten formula of the standard. Levels are in dB re the reference
    pressure (or re 1 V without a sensitivity).

    Examples
    --------
    A 94 dB, 1 kHz calibrator tone puts 94 dB into the 1 kHz octave, whose exact
    mid-band frequency is 1000 Hz (IEC 61260-1:2014, 5.2):

    >>> from piezo.cli import main
    >>> try:
    ...     main(["bands", "recordings/calibrator-94dB.wav", "--sensitivity", "8.5 mV/Pa",
    ...           "--fraction", "1", "--low", "500Hz", "--high", "2kHz", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "nominal_hz": 1000, "exact_hz": 1000.0, ... "level_db": 93.99..., ...}
    0
    """
    refuse_existing(csv, force=force)
    if fraction not in FRACTIONS:
        raise InputError(
            f"--fraction must be one of {', '.join(map(str, FRACTIONS))}; got {fraction}"
        )
    weighting = weighting.upper()
    if weighting not in ("A", "C", "Z"):
        raise InputError(f"--weighting must be A, C or Z; got {weighting!r}")
    low_hz = parse_frequency(low, "--low")
    high_given = parse_frequency(high, "--high") if high is not None else None
    interval_s = parse_duration(interval, what="--interval") if interval is not None else None
    if interval_s is not None and not interval_s > 0:
        raise InputError(f"--interval must be positive, got {interval!r}")
    source = open_source(file, src)
    with progress(f"Bands of {file.name}", source.frames) as advance:
        measured = bands_of(
            source,
            fraction=fraction,
            low_hz=low_hz,
            high_hz=high_given,
            interval_s=interval_s,
            weighting=weighting,
            weight_any_quantity=weight_any_quantity,
            advance=advance,
        )
    result = measured.result
    ref = measured.level_reference
    doc = measured.to_dict()
    if csv is not None:
        write_text_atomic(
            csv,
            _format_csv(
                result,
                source.channel_indices,
                ref,
                measured.level_units or str(measured.level_unit),
            ),
        )
    if json_out:
        emit_json(doc)
    else:
        _print(doc)
    if csv is not None:
        err_console.print(f"table written: {csv}")


def _format_csv(
    result: BandResult,
    channels: tuple[int, ...],
    reference: float | np.ndarray,
    level_unit: str | Sequence[str],
) -> str:
    """CSV text: one row per band (Leq), or per interval and band with ``--interval``.

    Band levels are in columns ``ch<N>_level_db``; a ``# column: unit`` comment line above
    the header names their reference (``level_unit``, docs/glossary.md).
    """
    levels = result.level_db(reference)
    cols = [f"ch{ch}_level_db" for ch in channels]
    units = [level_unit] * len(cols) if isinstance(level_unit, str) else list(level_unit)
    comments = ["piezo band table", *(f"{c}: {u}" for c, u in zip(cols, units, strict=True))]
    if result.interval_s is None:
        rows = (
            [f"{b.nominal_hz:g}", f"{b.exact_hz:.4f}", *(_fmt(v) for v in levels[j])]
            for j, b in enumerate(result.bands)
        )
        return csv_text(["nominal_hz", "exact_hz", *cols], rows, comments=comments)
    hist = result.history_db(reference)
    timed = (
        [f"{t:.6g}", f"{b.nominal_hz:g}", f"{b.exact_hz:.4f}", *(_fmt(v) for v in row[j])]
        for t, row in zip(result.history_time_s, hist, strict=True)
        for j, b in enumerate(result.bands)
    )
    return csv_text(["time_s", "nominal_hz", "exact_hz", *cols], timed, comments=comments)


def _fmt(value: float) -> str:
    return f"{value:.2f}" if np.isfinite(value) else ""


def _print(doc: dict) -> None:
    print_heading(doc["file"])
    console.print(
        f"  1/{doc['fraction']}-octave band Leq ({doc['weighting']}-weighted), "
        f"{levels_in(doc)}, "
        "IEC 61260-1:2014 class 1 filters"
    )
    if doc["high_source"] == "sample rate":
        console.print(
            f"  bands up to {doc['high_hz']:g} Hz: the default for "
            f"{doc['sample_rate_hz']:g} Hz sampling (--high to change)"
        )
    elif doc["high_source"] == "sensor":
        console.print(
            f"  bands up to {doc['high_hz']:g} Hz: where the sensor's frequency range ends "
            "(profile frequency_range; --high to change)"
        )
    for note in doc["response_curve_notes"]:
        console.print(f"  {note}")
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column(axis_label("band", "Hz"), justify="right")
    for entry in doc["channels"]:
        table.add_column(f"ch {entry['channel']}", justify="right")
    nb = len(doc["channels"][0]["bands"])
    for j in range(nb):
        label = doc["channels"][0]["bands"][j]["nominal_hz"]
        row = [f"{label:g}"]
        for entry in doc["channels"]:
            v = entry["bands"][j]["level_db"]
            row.append("—" if v is None or not math.isfinite(v) else f"{v:.1f}")
        table.add_row(*row)
    console.print(table)
    if doc["weighting"] != "Z":
        console.print(
            "  Weighted band levels from a piezo sensor are not sound level meter "
            "readings (IEC 61672-1): do not use them to assess noise exposure.",
            style="dim",
        )
