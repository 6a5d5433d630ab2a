"""``piezo bands``: fractional-octave band levels (IEC 61260-1:2014 class 1 filters)."""

from __future__ import annotations

import io
import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from piezo.chain.units import parse_duration
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, err_console, progress, write_text_atomic
from piezo.cli.spectrum import parse_frequency
from piezo.errors import InputError
from piezo.spectral.bands import FRACTIONS, BandAnalyzer, BandResult, default_high_hz


def register(app: typer.Typer) -> None:
    """Add the ``bands`` command to ``app``."""
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
            "highest band the sample rate allows.",
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
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Band Leq of each channel through a multirate IEC 61260-1:2014 class 1 filter bank.

    Bands are named by their nominal mid-band frequency; exact mid-band frequencies
    follow the base-ten formula of the standard. Levels are in dB re the reference
    pressure (or re 1 V without a sensitivity).
    """
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
    nch = len(source.channel_indices)
    high_hz = high_given if high_given is not None else default_high_hz(source.sample_rate_hz)
    try:
        analyzer = BandAnalyzer(
            source.sample_rate_hz,
            nch,
            fraction=fraction,
            low_hz=low_hz,
            high_hz=high_hz,
            interval_s=interval_s,
            weighting=weighting,
        )
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    with progress(f"Bands of {file.name}", source.frames) as advance:
        for block in source.blocks():
            analyzer.update(block)
            advance(block.shape[0])
    result = analyzer.result()
    ref = source.reference
    levels = result.level_db(ref)
    doc = {
        "file": str(file),
        "fraction": fraction,
        "unit": source.unit,
        "level_unit": source.chain.level_unit,
        "weighting": weighting,
        "sample_rate_hz": source.sample_rate_hz,
        "interval_s": interval_s,
        "high_hz": high_hz,
        "high_source": "option" if high_given is not None else "sample rate",
        "channels": [],
    }
    for i, ch in enumerate(source.channel_indices):
        entry = {
            "channel": ch,
            "bands": [
                {
                    "nominal_hz": _number(b.nominal_hz),
                    "exact_hz": b.exact_hz,
                    "lower_hz": b.lower_hz,
                    "upper_hz": b.upper_hz,
                    "level_db": _finite(levels[j, i]),
                }
                for j, b in enumerate(result.bands)
            ],
        }
        if interval_s is not None:
            hist = result.history_db(ref)[:, :, i]
            entry["history"] = {
                "time_s": result.history_time_s,
                "interval_duration_s": result.history_duration_s,
                "level_db": [[_finite(v) for v in row] for row in hist],
            }
        doc["channels"].append(entry)
    if csv is not None:
        write_text_atomic(csv, format_csv(result, source.channel_indices, ref))
    if json_out:
        emit_json(doc)
    else:
        _print(doc)
    if csv is not None:
        err_console.print(f"table written: {csv}")


def _number(value: float) -> int | float:
    """1000.0 -> 1000, 31.5 stays 31.5 (nominal labels read naturally in JSON)."""
    return int(value) if float(value).is_integer() else value


def _finite(value: float) -> float | None:
    return float(value) if np.isfinite(value) else None


def format_csv(result: BandResult, channels: tuple[int, ...], reference: float) -> str:
    """CSV text: one row per band (Leq), or per interval and band with ``--interval``."""
    buf = io.StringIO()
    levels = result.level_db(reference)
    cols = ",".join(f"ch{ch}_dB" for ch in channels)
    if result.interval_s is None:
        buf.write(f"nominal_hz,exact_hz,{cols}\n")
        for j, b in enumerate(result.bands):
            vals = ",".join(_fmt(levels[j, i]) for i in range(len(channels)))
            buf.write(f"{b.nominal_hz:g},{b.exact_hz:.4f},{vals}\n")
        return buf.getvalue()
    hist = result.history_db(reference)
    buf.write(f"time_s,nominal_hz,exact_hz,{cols}\n")
    for t, row in zip(result.history_time_s, hist, strict=True):
        for j, b in enumerate(result.bands):
            vals = ",".join(_fmt(row[j, i]) for i in range(len(channels)))
            buf.write(f"{t:.6g},{b.nominal_hz:g},{b.exact_hz:.4f},{vals}\n")
    return buf.getvalue()


def _fmt(value: float) -> str:
    return f"{value:.2f}" if np.isfinite(value) else ""


def _print(doc: dict) -> None:
    console.print(f"[bold]{doc['file']}[/bold]")
    console.print(
        f"  1/{doc['fraction']}-octave band Leq ({doc['weighting']}-weighted), "
        f"{doc['level_unit']}, "
        "IEC 61260-1:2014 class 1 filters"
    )
    if doc["high_source"] == "sample rate":
        console.print(
            f"  bands up to {doc['high_hz']:g} Hz: the default for "
            f"{doc['sample_rate_hz']:g} Hz sampling (--high to change)"
        )
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("band Hz", justify="right")
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
            "  [dim]Weighted band levels from a piezo sensor are not sound level meter "
            "readings (IEC 61672-1): do not use them to assess noise exposure.[/dim]"
        )
