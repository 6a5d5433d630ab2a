"""``piezo info``: what a recording is, and its peak and RMS per channel."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer
from rich.table import Table

from piezo.chain.measurement import Chain, Provenance
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, print_heading, progress
from piezo.levels.stats import SignalStats
from piezo.plots.style import axis_label
from piezo.results import reference_key


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
        "info",
        help="Format, rate, duration and peak/RMS per channel in dBFS and its own unit "
        "(Pa, m/s², N ...).",
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
    sensitivity (option, sidecar or profile) peak and RMS are also given in the
    quantity's unit (Pa, m/s², N ...) and in dB re its ISO 1683 reference. Each channel
    is shown through its own chain (a profile's [channel.N] sections).

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
    channels = []
    for i, ch in enumerate(source.channel_indices):
        chain = source.chain_of(ch)
        # Full scale in calibrated units: a raw sample of 1.0 (PCM) or full_scale_v volts (CSV).
        fs_units = chain.scale(is_pcm=rec.is_pcm) * (1.0 if rec.is_pcm else chain.full_scale_v)
        peak, rms, mean = stats.peak[i], stats.rms[i], stats.mean[i]
        entry = {
            "channel": ch,
            "name": rec.channel_names[ch],
            "quantity": chain.measured.name,
            "unit": chain.unit,
            "level_unit": chain.level_unit,
            "peak_dbfs": _db(peak / fs_units),
            "rms_dbfs": _db(rms * math.sqrt(2) / fs_units),
            "dc_offset_dbfs": _db(abs(mean) / fs_units),
        }
        if chain.calibrated:
            entry.update(peak=peak, rms=rms)
            if chain.unit == "Pa":
                entry.update(peak_pa=peak, rms_pa=rms)
            entry.update(
                peak_db=_db(peak / chain.reference),
                rms_db=_db(rms / chain.reference),
            )
        else:
            entry.update(peak_v=peak, rms_v=rms, rms_dbv=_db(rms))
        entry["chain"] = chain_document(chain, source.provenance_of(ch))
        channels.append(entry)
    units = {c["unit"] for c in channels}
    level_units = {c["level_unit"] for c in channels}
    doc = {
        "file": str(file),
        "format": rec.format,
        "subtype": rec.subtype,
        "sample_rate_hz": rec.sample_rate_hz,
        "frames": rec.frames,
        "duration_s": rec.duration_s,
        "channels_in_file": rec.channels,
        # Shared by the analysed channels, else None (each channel states its own).
        "unit": units.pop() if len(units) == 1 else None,
        "level_unit": level_units.pop() if len(level_units) == 1 else None,
        "chain": chain_document(source.file_chain, source.provenance),
        "channels": channels,
    }
    if json_out:
        emit_json(doc)
        return
    _print(doc)


def chain_document(chain: Chain, provenance: Provenance | None) -> dict[str, Any]:
    """A chain as JSON values, with where each value came from.

    Examples
    --------
    >>> from piezo.chain.measurement import Chain
    >>> doc = chain_document(Chain(sensitivity_v_per_unit=0.004, quantity="force"), None)
    >>> doc["quantity"], doc["unit"], doc["sensitivity"], doc["level_unit"]
    ('force', 'N', '4.000 mV/N', 'dB re 1 µN')
    """
    return {
        "quantity": chain.quantity,
        "unit": chain.unit,
        "full_scale_v": chain.full_scale_v,
        "gain": chain.gain,
        "sensitivity_v_per_unit": chain.sensitivity_v_per_unit,
        "sensitivity": chain.sensitivity_text,
        "sensitivity_v_per_pa": chain.sensitivity_v_per_pa,
        "reference_pa": chain.reference_pa,
        **({} if chain.unit == "Pa" else {reference_key(chain.unit): chain.reference}),
        "level_unit": chain.level_unit,
        "response_curve": chain.response_curve_file,
        "frequency_range_hz": chain.frequency_range_hz,
        "provenance": provenance.as_dict() if provenance else None,
    }


def _db(ratio: float) -> float | None:
    return 20 * math.log10(ratio) if ratio > 0 else None


def _fmt(value: float | None, spec: str = ".2f") -> str:
    return "—" if value is None or not np.isfinite(value) else format(value, spec)


def _print(doc: dict) -> None:
    print_heading(doc["file"])
    console.print(
        f"  {doc['format']} {doc['subtype']}, {doc['sample_rate_hz']:g} Hz, "
        f"{doc['frames']} frames ({doc['duration_s']:.3f} s), "
        f"{doc['channels_in_file']} channel(s)"
    )
    chains = {_chain_text(ch["chain"]) for ch in doc["channels"]}
    if len(chains) == 1:
        console.print(f"  chain: {chains.pop()}")
    else:
        for ch in doc["channels"]:
            console.print(f"  chain of ch {ch['channel']}: {_chain_text(ch['chain'])}")
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("ch", justify="right")
    table.add_column("quantity")
    table.add_column(axis_label("peak", "dBFS"), justify="right")
    table.add_column(axis_label("RMS", "dBFS"), justify="right")
    table.add_column("peak", justify="right")
    table.add_column("RMS", justify="right")
    table.add_column("RMS level", justify="right")
    for ch in doc["channels"]:
        unit = ch["unit"]
        if "peak" in ch:
            values = [ch["peak"], ch["rms"], ch["rms_db"]]
        else:
            values = [ch["peak_v"], ch["rms_v"], ch["rms_dbv"]]
        table.add_row(
            str(ch["channel"]),
            ch["quantity"],
            _fmt(ch["peak_dbfs"]),
            _fmt(ch["rms_dbfs"]),
            f"{_fmt(values[0], '.4g')} {unit}",
            f"{_fmt(values[1], '.4g')} {unit}",
            f"{_fmt(values[2])} {ch['level_unit']}",
        )
    console.print(table)


def _chain_text(chain: dict) -> str:
    sens = chain["sensitivity"]
    sens_text = "none (results in volts)" if sens is None else sens
    curve = f", response curve {chain['response_curve']}" if chain["response_curve"] else ""
    band = chain["frequency_range_hz"]
    band_text = f", frequency range {band[0]:g} Hz .. {band[1]:g} Hz" if band else ""
    return (
        f"{chain['quantity']}, full scale {chain['full_scale_v']:g} V, gain "
        f"{chain['gain']:g} V/V, sensitivity {sens_text}{curve}{band_text}"
    )
