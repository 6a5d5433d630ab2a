"""``piezo calibrate``: sensitivity from a sound calibrator capture."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Annotated

import typer

from piezo.chain.measurement import sidecar_path
from piezo.chain.units import parse_quantity
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, err_console, progress, write_text_atomic
from piezo.errors import InputError
from piezo.io.text import parse_toml, read_text
from piezo.io.toml import toml_value
from piezo.tone.calibrator import ToneCalibrator, calibrator_pressure_pa


def register(app: typer.Typer) -> None:
    """Add the ``calibrate`` command to ``app``."""
    app.command(
        "calibrate", help="Sensitivity (mV/Pa, dBV/Pa) from a 94 or 114 dB calibrator capture."
    )(calibrate)


@source_options
def calibrate(
    file: Annotated[Path, typer.Argument(help="Capture of the sensor on a sound calibrator.")],
    *,
    level: Annotated[
        float, typer.Option("--level", help="Calibrator level, dB re the reference pressure.")
    ] = 94.0,
    frequency: Annotated[
        str, typer.Option("--frequency", help="Nominal calibrator frequency.")
    ] = "1 kHz",
    write_profile: Annotated[
        Path | None,
        typer.Option(
            "--write-profile",
            help="Write the sensitivity into this profile (created or updated). "
            "Use --write-profile with the recording's sidecar name to update it.",
        ),
    ] = None,
    accept_unstable: Annotated[
        bool,
        typer.Option("--accept-unstable", help="Report an unstable tone instead of refusing."),
    ] = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Measure a calibrator tone and derive the sensor's sensitivity.

    The tone's band-limited RMS voltage (after undoing full scale and gain) divided by
    the calibrator's RMS pressure gives the sensitivity. Any sensitivity given by option
    or profile is ignored for the measurement. A tone whose level or frequency drifts is
    refused (the calibrator was moved, or is failing).
    """
    expected_hz = parse_quantity(frequency, "Hz", what="--frequency")
    if not 60.0 <= level <= 160.0:
        raise InputError(f"--level {level:g} dB is not a calibrator level (60 to 160 dB)")
    source = open_source(file, src)
    if len(source.channel_indices) != 1:
        if src.channel:
            raise InputError("calibrate measures one channel; give a single --channel")
        raise InputError(
            f"{source.recording.channels} channels: choose the calibrated one with --channel",
            source=str(file),
        )
    # Volts at the sensor: the chain without its sensitivity.
    volts_per_raw = source.chain.scale(is_pcm=source.recording.is_pcm)
    if source.chain.sensitivity_v_per_pa is not None:
        volts_per_raw *= source.chain.sensitivity_v_per_pa
    cal = ToneCalibrator(
        source.sample_rate_hz,
        expected_hz=expected_hz,
        level_db=level,
        reference_pa=source.chain.reference_pa,
    )
    rec = source.recording
    try:
        with progress(f"Measuring {file.name}", rec.frames) as advance:
            for block in rec.blocks(channels=source.channel_indices):
                cal.update(block * volts_per_raw)
                advance(block.shape[0])
        result = cal.result()
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    if not result.stable and not accept_unstable:
        raise InputError(
            f"the tone is not stable (level spread {result.level_spread_db:.2f} dB, "
            f"frequency spread {100 * result.frequency_spread:.2f} %); re-seat the calibrator "
            "and record again, or pass --accept-unstable",
            source=str(file),
        )
    doc = {
        "file": str(file),
        "channel": source.channel_indices[0],
        "sensitivity_mv_per_pa": result.sensitivity_mv_per_pa,
        "sensitivity_dbv_per_pa": result.sensitivity_dbv_per_pa,
        "tone_hz": result.tone_hz,
        "residual_db": result.residual_db,
        "tone_rms_v": result.tone_rms_v,
        "calibrator_level_db": level,
        "calibrator_pressure_pa": calibrator_pressure_pa(level, source.chain.reference_pa),
        "reference_pa": source.chain.reference_pa,
        "level_spread_db": result.level_spread_db,
        "frequency_spread_percent": 100 * result.frequency_spread,
        "stable": result.stable,
        "gain": source.chain.gain,
        "full_scale_v": source.chain.full_scale_v,
    }
    if write_profile is not None:
        _update_profile(write_profile, result.sensitivity_mv_per_pa)
        doc["profile_written"] = str(write_profile)
    if json_out:
        emit_json(doc)
        return
    console.print(f"[bold]{file}[/bold]  channel {doc['channel']}")
    console.print(
        f"  calibrator {level:g} dB re {source.chain.reference_pa * 1e6:g} µPa "
        f"= {doc['calibrator_pressure_pa']:.5g} Pa RMS"
    )
    console.print(f"  tone          {result.tone_hz:.2f} Hz, {result.tone_rms_v * 1e3:.5g} mV RMS")
    console.print(
        f"  sensitivity   [bold]{result.sensitivity_mv_per_pa:.4f} mV/Pa[/bold]  "
        f"({result.sensitivity_dbv_per_pa:.2f} dBV/Pa)"
    )
    console.print(f"  residual      {result.residual_db:.1f} dB re tone (noise + distortion)")
    console.print(
        f"  stability     {result.level_spread_db:.3f} dB, "
        f"{100 * result.frequency_spread:.3f} % over {result.segments} segments"
    )
    if write_profile is not None:
        err_console.print(f"profile written: {write_profile}")
    elif sidecar_path(file).exists():
        err_console.print(
            f"tip: --write-profile {sidecar_path(file)} stores this sensitivity in the sidecar"
        )


def _update_profile(path: Path, sensitivity_mv_per_pa: float) -> None:
    """Set ``[sensor] sensitivity`` and ``calibration_date`` in a profile, keeping the rest."""
    text = read_text(path, what="profile") if path.exists() or path.is_symlink() else ""
    parse_toml(text, source=str(path))
    lines = text.splitlines()
    values = {
        "sensitivity": toml_value(f"{sensitivity_mv_per_pa:.5g} mV/Pa"),
        "calibration_date": _dt.date.today().isoformat(),
    }
    out: list[str] = []
    section = None
    seen_sensor = False
    written: set[str] = set()
    for line in lines:
        stripped = line.strip()
        if stripped.startswith("["):
            if section == "sensor":
                blanks = 0
                while out and not out[-1].strip():
                    out.pop()
                    blanks += 1
                out.extend(f"{k} = {v}" for k, v in values.items() if k not in written)
                out.extend([""] * blanks)
                written.update(values)
            section = stripped.strip("[]").strip()
            seen_sensor = seen_sensor or section == "sensor"
        key = stripped.split("=", 1)[0].strip() if "=" in stripped else None
        if section == "sensor" and key in values and key not in written:
            out.append(f"{key} = {values[key]}")
            written.add(key)
            continue
        if section == "sensor" and key == "charge_sensitivity":
            continue  # replaced by the measured voltage sensitivity
        out.append(line)
    if section == "sensor":
        out.extend(f"{k} = {v}" for k, v in values.items() if k not in written)
    elif not seen_sensor:
        out = ["[sensor]", *(f"{k} = {v}" for k, v in values.items()), "", *out]
    write_text_atomic(path, "\n".join(out).rstrip("\n") + "\n")
