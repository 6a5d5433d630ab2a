"""``piezo levels``: the IEC 61672-1 level set of a recording (LAeq, LAFmax, LCpeak, ...)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer
from rich.table import Table

from piezo.chain.units import parse_duration, parse_frequency_range, parse_quantity
from piezo.cli.options import (
    JsonOption,
    SourceOptions,
    WeightAnyQuantityOption,
    open_source,
    source_options,
)
from piezo.cli.output import console, emit_json, levels_in, print_heading, progress
from piezo.errors import InputError
from piezo.levels.summary import LEVEL_KEYS, levels_of
from piezo.plots.style import axis_label

#: Terminal history tables longer than this are left to --json.
MAX_HISTORY_ROWS = 60
#: Per-interval levels of the terminal history table.
HISTORY_KEYS = ("LZeq", "LAeq", "LCeq", "LAFmax", "LCpeak")


def register(app: typer.Typer) -> None:
    """Add the ``levels`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['levels']
    """
    app.command(
        "levels",
        help="Levels per channel (IEC 61672-1): LZeq, F and S maxima and minima, LZpeak; for "
        "sound pressure LAeq, LCeq, LCpeak, LAE, LAF and LAS percentiles.",
    )(levels)


@source_options
def levels(
    file: Annotated[Path, typer.Argument(help="Recording: WAV, FLAC, RF64, W64, CSV ...")],
    *,
    interval: Annotated[
        str | None,
        typer.Option(
            "--interval",
            metavar="T",
            help="Also give a level history: Leq, LAFmax and LCpeak per interval of T "
            "(e.g. '1s', '100 ms'), and LAF/LAS sampled every 0.1 s.",
        ),
    ] = None,
    settle: Annotated[
        str | None,
        typer.Option(
            "--settle",
            metavar="T",
            help="Filter settling time excluded from LCpeak and the F and S maxima (and, "
            "plus 5 time constants, from the minima and the percentiles). Default 0.1 s; "
            "use 0 for a capture that starts on the event.",
        ),
    ] = None,
    percentiles: Annotated[
        str | None,
        typer.Option(
            "--percentiles",
            metavar="P,P,...",
            help="Further percentiles, e.g. '1,10,50,90,99' for LAF1 ... LAF99 and "
            "LAS1 ... LAS99.",
        ),
    ] = None,
    weight_any_quantity: WeightAnyQuantityOption = False,
    velocity_band: Annotated[
        str,
        typer.Option(
            "--velocity-band",
            metavar="LOW:HIGH",
            help="Band of the RMS velocity given for velocity channels (a velocity sensor, "
            "or acceleration with --integrate 1): 10Hz:1kHz by default, the broadband "
            "range of machine-vibration severity (ISO 20816-1).",
        ),
    ] = "10Hz:1kHz",
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Equivalent, maximum, minimum, peak, exposure and percentile levels.

    Frequency weightings A, C, Z and time weightings F (125 ms) and S (1 s) follow
    IEC 61672-1:2013. Levels are in dB re 20 µPa (air), 1 µPa (water, --reference) or,
    without a sensitivity, dB re 1 V. See docs/levels.md for each level's definition and
    the start-up handling.

    Examples
    --------
    A 94 dB, 1 kHz calibrator tone through its measured 8.5 mV/Pa reads LAeq = 94 dB
    (A-weighting is 0 dB at 1 kHz, IEC 61672-1:2013 Table 3), and its C-weighted peak
    about 3 dB higher (a sine's crest factor √2):

    >>> from piezo.cli import main
    >>> try:
    ...     main(["levels", "recordings/calibrator-94dB.wav", "--sensitivity", "8.5 mV/Pa",
    ...           "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "unit": "Pa", ... "LZeq": 94.00..., "LAeq": 94.00..., ... "LCpeak": 97.0..., ...}
    0
    """
    interval_s = parse_duration(interval, what="--interval") if interval is not None else None
    band_hz = parse_frequency_range(velocity_band, what="--velocity-band", positive=True)
    source = open_source(file, src)
    settle_s = None
    if settle is not None:
        settle_s = parse_quantity(settle, "s", what="--settle")
        if settle_s < 0:
            raise InputError(f"--settle must be 0 or more, got {settle!r}")
    with progress(f"Levels {file.name}", source.frames) as advance:
        measured = levels_of(
            source,
            interval_s=interval_s,
            filter_settle_s=settle_s,
            percentiles=None if percentiles is None else _parse_percentiles(percentiles),
            weight_any_quantity=weight_any_quantity,
            velocity_band_hz=band_hz,
            advance=advance,
        )
    doc = measured.to_dict()
    if json_out:
        emit_json(doc)
        return
    _print(doc)


def _parse_percentiles(text: str) -> list[float]:
    """``"1,10,50"`` → [1.0, 10.0, 50.0]; each strictly between 0 and 100."""
    try:
        values = [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise InputError(
            f"--percentiles must be numbers separated by commas, got {text!r}"
        ) from None
    if not values or any(not 0 < v < 100 for v in values):
        raise InputError(f"--percentiles must lie between 0 and 100, got {text!r}")
    return values


def _fmt(value: float | None) -> str:
    return "—" if value is None else f"{value:.1f}"


def _print(doc: dict[str, Any]) -> None:
    print_heading(doc["file"])
    console.print(
        f"  {doc['duration_s']:.3f} s at {doc['sample_rate_hz']:g} Hz, levels in {levels_in(doc)}"
    )
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("level")
    for ch in doc["channels"]:
        table.add_column(f"ch {ch['channel']}", justify="right")
    extra = [k for k in doc["channels"][0] if k.startswith(("LAF", "LAS")) and k not in LEVEL_KEYS]
    left_out = []
    for key in (*LEVEL_KEYS, *extra):
        values = [ch[key] for ch in doc["channels"]]
        if all(v is None for v in values):
            left_out.append(key)
            continue
        table.add_row(key, *(_fmt(v) for v in values))
    table.add_row(
        axis_label("crest factor", "dB"), *(_fmt(ch["crest_factor_db"]) for ch in doc["channels"])
    )
    console.print(table)
    if left_out:
        console.print(
            f"  not given for any channel, left out ({len(left_out)}; --json has them "
            "as null): " + ", ".join(left_out)
        )
    excluded = doc["start_up_excluded_s"]
    console.print(
        f"  start-up excluded: {excluded['LAFmax']:g} s from LCpeak and the F and S "
        f"maxima, {excluded['LAFmin']:g} s from the F minima and LAF percentiles, "
        f"{excluded['LASmin']:g} s from the S minima and LAS percentiles"
    )
    if "velocity_band_hz" in doc:
        low, high = doc["velocity_band_hz"]
        for ch in doc["channels"]:
            if "velocity_rms_m_per_s" in ch:
                console.print(
                    f"  ch {ch['channel']}: velocity RMS {low:g} Hz to {high:g} Hz "
                    f"{1e3 * ch['velocity_rms_m_per_s']:.4g} mm/s"
                )
    for ch in doc["channels"]:
        for note in ch["notes"]:
            console.print(f"  ch {ch['channel']}: {note}")
    for note in doc["response_curve_notes"]:
        console.print(f"  {note}")
    history = doc.get("history")
    if history is not None:
        rows = len(history["interval_start_s"])
        if rows > MAX_HISTORY_ROWS:
            console.print(f"  history: {rows} intervals (use --json to get them)")
        else:
            hist = Table(box=None, pad_edge=False, header_style="bold")
            hist.add_column("start s", justify="right")
            for ch in history["channels"]:
                for name in HISTORY_KEYS:
                    hist.add_column(f"{name} ch {ch['channel']}", justify="right")
            for i in range(rows):
                cells = [f"{history['interval_start_s'][i]:g}"]
                for ch in history["channels"]:
                    cells += [_fmt(_finite(ch[name][i])) for name in HISTORY_KEYS]
                hist.add_row(*cells)
            console.print(hist)
    console.print(doc["caution"], style="dim")


def _finite(value: float) -> float | None:
    return None if value != value else float(value)  # NaN -> None
