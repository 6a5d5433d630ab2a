"""``piezo info``: what a recording is, and its peak and RMS per channel."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, progress
from piezo.levels.stats import SignalStats


def register(app: typer.Typer) -> None:
    """Add the ``info`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['info']
    """
    app.command(
        "info", help="Format, rate, duration and peak/RMS per channel (dBFS, Pa, dB SPL)."
    )(info)


@source_options
def info(
    file: Annotated[Path, typer.Argument(help="Recording: WAV, FLAC, RF64, W64, CSV ...")],
    *,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Describe a recording: format, sample rate, duration, and peak and RMS per channel.

    Levels in dBFS follow AES17: the RMS of a full-scale sine reads 0 dBFS. With a
    sensitivity (option, sidecar or profile) peak and RMS are also given in pascals and
    in dB re the reference pressure.

    Examples
    --------
    16000 frames at 16 kHz are one second:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["info", "recordings/pd27-golden/PD27-23001.flac", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "sample_rate_hz": 16000.0, "frames": 16000, "duration_s": 1.0, ...}
    0
    """
    source = open_source(file, src)
    rec = source.recording
    stats = SignalStats(len(source.channel_indices))
    with progress(f"Reading {file.name}", rec.frames) as advance:
        for block in source.blocks():
            stats.update(block)
            advance(block.shape[0])
    # Full scale in calibrated units: a raw sample of 1.0 (PCM) or full_scale_v volts (CSV).
    fs_units = source.scale * (1.0 if rec.is_pcm else source.chain.full_scale_v)
    channels = []
    for i, ch in enumerate(source.channel_indices):
        peak, rms, mean = stats.peak[i], stats.rms[i], stats.mean[i]
        entry = {
            "channel": ch,
            "name": rec.channel_names[ch],
            "peak_dbfs": _db(peak / fs_units),
            "rms_dbfs": _db(rms * math.sqrt(2) / fs_units),
            "dc_offset_dbfs": _db(abs(mean) / fs_units),
        }
        if source.chain.calibrated:
            entry.update(
                peak_pa=peak,
                rms_pa=rms,
                peak_db=_db(peak / source.reference),
                rms_db=_db(rms / source.reference),
            )
        else:
            entry.update(peak_v=peak, rms_v=rms, rms_dbv=_db(rms))
        channels.append(entry)
    doc = {
        "file": str(file),
        "format": rec.format,
        "subtype": rec.subtype,
        "sample_rate_hz": rec.sample_rate_hz,
        "frames": rec.frames,
        "duration_s": rec.duration_s,
        "channels_in_file": rec.channels,
        "unit": source.unit,
        "level_unit": source.chain.level_unit,
        "chain": {
            "full_scale_v": source.chain.full_scale_v,
            "gain": source.chain.gain,
            "sensitivity_v_per_pa": source.chain.sensitivity_v_per_pa,
            "reference_pa": source.chain.reference_pa,
            "provenance": source.provenance.as_dict() if source.provenance else None,
        },
        "channels": channels,
    }
    if json_out:
        emit_json(doc)
        return
    _print(doc, calibrated=source.chain.calibrated)


def _db(ratio: float) -> float | None:
    return 20 * math.log10(ratio) if ratio > 0 else None


def _fmt(value: float | None, spec: str = ".2f") -> str:
    return "—" if value is None or not np.isfinite(value) else format(value, spec)


def _print(doc: dict, *, calibrated: bool) -> None:
    console.print(f"[bold]{doc['file']}[/bold]")
    console.print(
        f"  {doc['format']} {doc['subtype']}, {doc['sample_rate_hz']:g} Hz, "
        f"{doc['frames']} frames ({doc['duration_s']:.3f} s), "
        f"{doc['channels_in_file']} channel(s)"
    )
    chain = doc["chain"]
    sens = chain["sensitivity_v_per_pa"]
    sens_text = "none (results in volts)" if sens is None else f"{1e3 * sens:.4g} mV/Pa"
    console.print(
        f"  chain: full scale {chain['full_scale_v']:g} V, gain {chain['gain']:g} V/V, "
        f"sensitivity {sens_text}"
    )
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("ch", justify="right")
    table.add_column("peak dBFS", justify="right")
    table.add_column("RMS dBFS", justify="right")
    if calibrated:
        table.add_column("peak Pa", justify="right")
        table.add_column("RMS Pa", justify="right")
        table.add_column(f"RMS {doc['level_unit']}", justify="right")
    else:
        table.add_column("peak V", justify="right")
        table.add_column("RMS V", justify="right")
        table.add_column("RMS dB re 1 V", justify="right")
    for ch in doc["channels"]:
        row = [str(ch["channel"]), _fmt(ch["peak_dbfs"]), _fmt(ch["rms_dbfs"])]
        if calibrated:
            row += [_fmt(ch["peak_pa"], ".4g"), _fmt(ch["rms_pa"], ".4g"), _fmt(ch["rms_db"])]
        else:
            row += [_fmt(ch["peak_v"], ".4g"), _fmt(ch["rms_v"], ".4g"), _fmt(ch["rms_dbv"])]
        table.add_row(*row)
    console.print(table)
