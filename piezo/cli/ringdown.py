"""``piezo ringdown``: events of a tap or ring-down capture and their decaying modes."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer
from rich.table import Table

from piezo.chain.units import (
    format_uncertain,
    parse_decibels,
    parse_frequency_range,
    parse_quantity,
)
from piezo.cli.impedance import CAUTION
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, print_heading, progress
from piezo.errors import InputError
from piezo.results import shared_value


def register(app: typer.Typer) -> None:
    """Add the ``ringdown`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['ringdown']
    """
    app.command(
        "ringdown",
        help="Tap and ring-down tests: events, modes (frequency, damping ratio, Q, decay "
        "rate) by the matrix pencil method, averaged over repeated events.",
    )(ringdown)


def _db(text: str, what: str) -> float:
    return parse_decibels(text, what=what, positive=True)


@source_options
def ringdown(
    file: Annotated[Path, typer.Argument(help="Capture: WAV, FLAC, CSV scope export ...")],
    *,
    threshold: Annotated[
        str,
        typer.Option("--threshold", metavar="DB", help="Event threshold above the noise floor."),
    ] = "20dB",
    max_modes: Annotated[
        int, typer.Option("--max-modes", min=1, max=20, help="Modes kept per event.")
    ] = 6,
    skip: Annotated[
        str,
        typer.Option(
            "--skip",
            metavar="T",
            help="Time after an event's peak before the free decay is fitted (contact time).",
        ),
    ] = "0.2ms",
    band: Annotated[
        str | None,
        typer.Option("--band", metavar="LOW:HIGH", help="Only modes in this band."),
    ] = None,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Find the events of a capture and identify the modes of each decay.

    Matrix pencil (Hua & Sarkar 1990) refined by least squares, with standard
    uncertainties; δ = 2πζ/√(1−ζ²), Q = 1/(2ζ). See docs/element.md.

    Examples
    --------
    Q = 1/(2ζ): 1/(2 · 0.000797) = 627:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["ringdown", "recordings/element-lot/tap/EL-29101.flac", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "frequency_hz": 30542.7..., ... "q": 627.4..., "q_std": null,
    "damping_ratio": 0.000796..., ...}
    0
    """
    from piezo.element.ringdown import RingdownAnalyzer

    threshold_db = _db(threshold, "--threshold")
    skip_s = parse_quantity(skip, "s", what="--skip")
    if skip_s < 0:
        raise InputError(f"--skip must be 0 or more, got {skip!r}")
    lo, hi = (
        parse_frequency_range(band, what="--band", positive=True)
        if band is not None
        else (0.0, None)
    )
    source = open_source(file, src)
    analyzer = RingdownAnalyzer(
        source.sample_rate_hz, len(source.channel_indices), threshold_db=threshold_db,
        max_modes=max_modes, skip_s=skip_s, min_frequency_hz=lo, max_frequency_hz=hi,
    )  # fmt: skip
    with progress(f"Ring-down of {file.name}", source.frames) as advance:
        for block in source.blocks():
            analyzer.update(block)
            advance(block.shape[0])
    results = analyzer.result()
    doc = _document(file, source, results)
    if json_out:
        emit_json(doc)
    else:
        _print(doc)


def _document(file: Path, source: Any, results: list[Any]) -> dict[str, Any]:
    """The ``--json`` document."""
    channels = []
    units = source.units
    for index, unit, r in zip(source.channel_indices, units, results, strict=True):
        channels.append(
            {
                "channel": index,
                "unit": unit,
                "modes": list(r.modes),
                "events": [
                    {
                        "start_s": e.start_s,
                        "duration_s": e.duration_s,
                        "peak": e.peak,
                        "fit_start_s": e.fit_start_s,
                        "fit_duration_s": e.fit_duration_s,
                        "noise_rms": e.noise_rms,
                        "residual_rms": e.residual_rms,
                        "modes": list(e.modes),
                    }
                    for e in r.events
                ],
            }
        )
    return {
        "file": str(file),
        "unit": shared_value(units),
        "sample_rate_hz": source.sample_rate_hz,
        "method": "matrix pencil (Hua & Sarkar 1990) refined by least squares",
        "uncertainty_note": "standard uncertainties (k = 1) from the fit's covariance; "
        "frequency_std_hz and q_std are the spread over events",
        "caution": CAUTION,
        "channels": channels,
    }


def _print(doc: dict[str, Any]) -> None:
    print_heading(doc["file"], f"({doc['method']})")
    for ch in doc["channels"]:
        n = len(ch["events"])
        console.print(f"  channel {ch['channel']}: {n} event(s)")
        if not ch["modes"]:
            continue
        table = Table(box=None, pad_edge=False, header_style="bold")
        for name in ("f / Hz", "spread Hz", "Q", "spread Q", "ζ", "decay dB/s", "amplitude",
                     "events"):  # fmt: skip
            table.add_column(name, justify="right")
        for m in ch["modes"]:
            table.add_row(
                f"{m.frequency_hz:.6g}",
                "—" if m.frequency_std_hz is None else f"{m.frequency_std_hz:.2g}",
                f"{m.q:.4g}",
                "—" if m.q_std is None else f"{m.q_std:.2g}",
                f"{m.damping_ratio:.3g}",
                f"{m.decay_db_per_s:.4g}",
                f"{m.amplitude:.3g} {ch['unit']}",
                str(m.events),
            )
        console.print(table)
        if n <= 10:
            for e in ch["events"]:
                modes = ", ".join(
                    f"{m.frequency_hz:.6g} Hz Q "
                    + (format_uncertain(m.q, m.u_q) if m.u_q is not None else f"{m.q:.4g}")
                    for m in e["modes"]
                )
                console.print(f"    event at {e['start_s']:.4f} s: {modes or 'no mode'}")
    console.print(
        "  uncertainties: expanded (k = 2), standard (k = 1) in --json; "
        "spreads over events (sample std)"
    )
    console.print(doc["caution"], style="dim")
