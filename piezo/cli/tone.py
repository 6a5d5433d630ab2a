"""``piezo tone``: frequency, level, THD, THD+N, SINAD (and SNR) of a steady test tone."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, progress
from piezo.cli.spectrum import parse_frequency
from piezo.errors import InputError
from piezo.spectral.welch import WelchPSD
from piezo.tone.analysis import ToneAnalyzer, band_mean_square, default_bandwidth_hz

#: Bin spacing of the tone analysis, hertz (1 s segments).
RESOLUTION_HZ = 1.0


def register(app: typer.Typer) -> None:
    """Add the ``tone`` command to ``app``."""
    app.command("tone", help="Test-tone frequency, level, THD, THD+N, SINAD and SNR.")(tone)


def parse_bandwidth(text: str) -> tuple[float, float]:
    """``"20Hz:20kHz"`` -> ``(20.0, 20000.0)``."""
    parts = text.split(":")
    if len(parts) != 2:
        raise InputError(f"--bandwidth must look like '20Hz:20kHz'; got {text!r}")
    lo = parse_frequency(parts[0].strip(), "--bandwidth (low end)")
    hi = parse_frequency(parts[1].strip(), "--bandwidth (high end)")
    if not lo < hi:
        raise InputError(f"--bandwidth: low end must be below high end; got {text!r}")
    return lo, hi


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
            "20 Hz to 0.45 × the sample rate.",
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
    """
    given = parse_bandwidth(bandwidth) if bandwidth is not None else None
    expected_hz = parse_frequency(expected, "--expected") if expected is not None else None
    source = open_source(file, src)
    fs = source.sample_rate_hz
    lo, hi = given if given is not None else default_bandwidth_hz(fs)
    nch = len(source.channel_indices)
    seg = None if source.frames >= fs / RESOLUTION_HZ else source.frames
    if source.frames < 2:
        raise InputError("the recording is too short for a tone analysis", source=str(file))
    try:
        analyzer = ToneAnalyzer(
            fs,
            nch,
            expected_hz=expected_hz,
            bandwidth_hz=(lo, hi),
            harmonics=harmonics,
            resolution_hz=RESOLUTION_HZ,
            segment_frames=seg,
        )
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    with progress(f"Tone in {file.name}", source.frames) as advance:
        for block in source.blocks():
            analyzer.update(block)
            advance(block.shape[0])
    noise_ms = None
    if noise is not None:
        nsrc = open_source(noise, src)
        if len(nsrc.channel_indices) != nch or nsrc.sample_rate_hz != fs:
            raise InputError(
                f"the noise recording must have the same rate and channels as {file.name} "
                f"({fs:g} Hz, {nch} channel(s))",
                source=str(noise),
            )
        nseg = int(min(nsrc.frames, round(fs / RESOLUTION_HZ)))
        if nseg < 2:
            raise InputError("the noise recording is empty", source=str(noise))
        welch = WelchPSD(fs, nch, segment_frames=nseg, window="blackmanharris")
        for block in nsrc.blocks():
            welch.update(block)
        noise_ms = band_mean_square(welch.result(), *analyzer.bandwidth_hz)
    try:
        results = analyzer.result(noise_mean_square=noise_ms)
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    ref = source.reference
    doc = {
        "file": str(file),
        "unit": source.unit,
        "level_unit": source.chain.level_unit,
        "bandwidth_hz": list(analyzer.bandwidth_hz),
        "bandwidth_source": "option" if given is not None else "sample rate",
        "resolution_hz": results[0].resolution_hz,
        "segments": results[0].segments,
        "noise_file": None if noise is None else str(noise),
        "channels": [
            {
                "channel": ch,
                "frequency_hz": r.frequency_hz,
                "level_db": r.level_db(ref),
                "tone_rms": r.tone_rms,
                "thd_percent": r.thd_percent,
                "thd_n_percent": r.thd_n_percent,
                "sinad_db": r.sinad_db,
                "snr_db": r.snr_db,
                "noise_rms": r.noise_rms,
                "total_rms": r.total_rms,
                "residual_rms": r.residual_rms,
                "harmonics": [
                    {"order": n, "rms": v, "percent": 100 * v / r.tone_rms if r.tone_rms else None}
                    for n, v in zip(r.harmonic_orders, r.harmonic_rms, strict=True)
                ],
            }
            for ch, r in zip(source.channel_indices, results, strict=True)
        ],
    }
    if json_out:
        emit_json(doc)
    else:
        _print(doc)


def _print(doc: dict) -> None:
    console.print(f"[bold]{doc['file']}[/bold]")
    lo, hi = doc["bandwidth_hz"]
    console.print(
        f"  THD and THD+N over {lo:g} Hz to {hi:g} Hz"
        + (" (default for the sample rate)" if doc["bandwidth_source"] == "sample rate" else "")
        + f", {doc['resolution_hz']:g} Hz bins, "
        f"{doc['segments']} averages"
    )
    table = Table(box=None, pad_edge=False, header_style="bold")
    for name in ("ch", "frequency Hz", f"level {doc['level_unit']}", "THD %", "THD+N %",
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
