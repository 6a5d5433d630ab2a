"""``piezo tone``: frequency, level, THD, THD+N, SINAD (and SNR) of a steady test tone."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from piezo.chain.units import parse_frequency, parse_frequency_range
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, levels_in, print_heading, progress
from piezo.tone.summary import tone_of


def register(app: typer.Typer) -> None:
    """Add the ``tone`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['tone']
    """
    app.command("tone", help="Test-tone frequency, level, THD, THD+N, SINAD and SNR.")(tone)


@source_options
def tone(
    file: Annotated[Path, typer.Argument(help="Recording of a steady test tone.")],
    *,
    noise: Annotated[
        Path | None,
        typer.Option(
            "--noise",
            metavar="FILE",
            help="Recording with the tone switched off (same chain): gives the SNR.",
        ),
    ] = None,
    bandwidth: Annotated[
        str | None,
        typer.Option(
            "--bandwidth",
            metavar="LOW:HIGH",
            help="Measurement bandwidth; default 20Hz:20kHz up to 48 kHz sampling, else "
            "20 Hz to 0.45 × the sample rate, ended at the sensor's frequency range "
            "(profile) when that ends lower.",
        ),
    ] = None,
    expected: Annotated[
        str | None,
        typer.Option("--expected", metavar="FREQ", help="Nominal tone frequency (search ±12 %)."),
    ] = None,
    harmonics: Annotated[
        int, typer.Option("--harmonics", min=2, max=50, help="Highest harmonic in THD.")
    ] = 10,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Analyse a steady tone: fundamental frequency and level, THD (IEC 60268-3: harmonics
    2..N over the fundamental), THD+N and SINAD (AES17: what is left in the bandwidth
    after notching the fundamental, over the total), and SNR against a noise recording.

    The whole recording is averaged into a 1 Hz Blackman-Harris Welch spectrum; a
    recording shorter than 1 s is analysed as one segment.

    Examples
    --------
    The calibrator of the demo runs 1.3 Hz above its nominal 1 kHz:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["tone", "recordings/calibrator-94dB.wav", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "resolution_hz": 1.0, ... "frequency_hz": 1001.2..., ...}
    0
    """
    given = parse_frequency_range(bandwidth, what="--bandwidth") if bandwidth is not None else None
    expected_hz = parse_frequency(expected, "--expected") if expected is not None else None
    source = open_source(file, src)
    noise_source = open_source(noise, src) if noise is not None else None
    with progress(f"Tone in {file.name}", source.frames) as advance:
        measured = tone_of(
            source,
            expected_hz=expected_hz,
            bandwidth_hz=given,
            harmonics=harmonics,
            noise=noise_source,
            advance=advance,
        )
    doc = measured.to_dict()
    if json_out:
        emit_json(doc)
    else:
        _print(doc)


#: What the terminal says about a default bandwidth (``bandwidth_source``).
_SOURCE_NOTE = {
    "sample rate": " (default for the sample rate)",
    "sensor": " (default: up to where the sensor's frequency range ends)",
}


def _print(doc: dict) -> None:
    print_heading(doc["file"])
    lo, hi = doc["bandwidth_hz"]
    console.print(
        f"  THD and THD+N over {lo:g} Hz to {hi:g} Hz"
        + _SOURCE_NOTE.get(doc["bandwidth_source"], "")
        + f", {doc['resolution_hz']:g} Hz bins, "
        f"{doc['segments']} averages"
    )
    table = Table(box=None, pad_edge=False, header_style="bold")
    level_head = "level" if doc["level_unit"] is None else f"level {doc['level_unit']}"
    if doc["level_unit"] is None:
        console.print(f"  levels in {levels_in(doc)}")
    for name in ("ch", "frequency Hz", level_head, "THD %", "THD+N %",
                 "SINAD dB", "SNR dB"):  # fmt: skip
        table.add_column(name, justify="right")
    for c in doc["channels"]:
        snr = c["snr_db"]
        table.add_row(
            str(c["channel"]),
            f"{c['frequency_hz']:.4f}",
            f"{c['level_db']:.2f}",
            f"{c['thd_percent']:.4f}",
            f"{c['thd_n_percent']:.4f}",
            f"{c['sinad_db']:.2f}",
            "—" if snr is None or not math.isfinite(snr) else f"{snr:.2f}",
        )
    console.print(table)
