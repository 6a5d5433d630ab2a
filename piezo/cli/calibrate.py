"""``piezo calibrate``: sensitivity from a sound calibrator capture."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Annotated

import typer

from piezo.chain.measurement import profile_with_sensitivity, sidecar_path
from piezo.chain.units import parse_decibels, parse_quantity
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, err_console, progress, write_text_atomic
from piezo.errors import InputError
from piezo.io.text import read_text
from piezo.tone.summary import calibration_of


def register(app: typer.Typer) -> None:
    """Add the ``calibrate`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['calibrate']
    """
    app.command(
        "calibrate",
        help="Sensitivity (mV/Pa, dB re 1 V/Pa) from a 94 or 114 dB calibrator capture.",
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
    calibrator_tolerance: Annotated[
        str,
        typer.Option(
            "--calibrator-tolerance",
            help="Level tolerance of the calibrator (rectangular, e.g. '0.25 dB', the "
            "class 1 tolerance of IEC 60942:2017), used in the uncertainty budget.",
        ),
    ] = "0.25 dB",
    calibrator_uncertainty: Annotated[
        str | None,
        typer.Option(
            "--calibrator-uncertainty",
            help="Expanded uncertainty (k = 2) of the calibrator's level from its "
            "certificate, e.g. '0.1 dB'; replaces --calibrator-tolerance. Give the "
            "certificate's level with --level.",
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

    Examples
    --------
    94 dB re 20 µPa is 20 µPa · 10^(94/20) = 1.0024 Pa RMS:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["calibrate", "recordings/calibrator-94dB.wav", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "sensitivity_mv_per_pa": 8.50..., ... "calibrator_pressure_pa": 1.0023..., ...}
    0
    """
    expected_hz = parse_quantity(frequency, "Hz", what="--frequency")
    tolerance_db = parse_decibels(calibrator_tolerance, what="--calibrator-tolerance")
    certificate_db = (
        None
        if calibrator_uncertainty is None
        else parse_decibels(calibrator_uncertainty, what="--calibrator-uncertainty")
    )
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
    with progress(f"Measuring {file.name}", source.frames) as advance:
        calibration = calibration_of(
            source,
            level_db=level,
            expected_hz=expected_hz,
            calibrator_tolerance_db=tolerance_db,
            calibrator_expanded_db=certificate_db,
            advance=advance,
        )
    result = calibration.result
    if not result.stable and not accept_unstable:
        raise InputError(
            f"the tone is not stable (level spread {result.level_spread_db:.2f} dB, "
            f"frequency spread {100 * result.frequency_spread:.2f} %); re-seat the calibrator "
            "and record again, or pass --accept-unstable",
            source=str(file),
        )
    doc = calibration.to_dict()
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
        f"({result.sensitivity_dbv_per_pa:.2f} dB re 1 V/Pa)"
    )
    budget = calibration.budget
    console.print(
        f"  uncertainty   ± {budget.expanded_uncertainty:.2g} dB "
        f"(k = {budget.coverage_factor:.2f}, about 95 %) on the sensitivity level"
    )
    for component in budget.components:
        console.print(
            f"    u = {component.standard_uncertainty:<8.2g} dB  {component.name} "
            f"({component.distribution})",
            markup=False,
        )
    console.print("    not included: the chain's gain and ADC scale,", markup=False)
    console.print("    the calibrator's static-pressure and load-volume corrections", markup=False)
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
    """Set the measured sensitivity in the profile at ``path`` (created or updated)."""
    old = read_text(path, what="profile") if path.exists() or path.is_symlink() else None
    text = profile_with_sensitivity(
        old,
        sensitivity_mv_per_pa * 1e-3,
        calibration_date=_dt.date.today().isoformat(),
        source=str(path),
    )
    write_text_atomic(path, text)
