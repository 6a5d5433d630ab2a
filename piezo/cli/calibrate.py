"""``piezo calibrate``: sensitivity from a calibrator capture, for every quantity."""

from __future__ import annotations

import datetime as _dt
import math
from pathlib import Path
from typing import Annotated

import typer
from rich.text import Text

from piezo.chain.measurement import CalibratedSource, profile_with_sensitivity, sidecar_path
from piezo.chain.quantity import (
    QUANTITIES,
    Quantity,
    Sensitivity,
    format_sensitivity,
    parse_level_of,
    quantity_named,
)
from piezo.chain.units import parse_decibels, parse_quantity
from piezo.cli.options import (
    JsonOption,
    SourceOptions,
    open_source,
    source_options,
)
from piezo.cli.output import (
    console,
    emit_json,
    err_console,
    print_heading,
    progress,
    write_text_atomic,
)
from piezo.errors import InputError, UnitError
from piezo.io.text import parse_toml, read_text
from piezo.tone.calibrator import calibrator_frequency_hz
from piezo.tone.summary import Calibration, calibration_of

#: Plausible calibrator levels, dB re the quantity's ISO 1683 reference: 60 dB is 20 mPa,
#: 1 mm/s² or 1 mN; 200 dB is 2 kPa, 10⁴ g or 10 kN. Outside, the level is taken for a
#: slip (a value in its unit typed without the unit, "10" for 10 m/s²).
LEVEL_RANGE_DB = (60.0, 200.0)


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
        help="Sensitivity from a calibrator capture (sound, vibration, force): mV/Pa, mV/g, mV/N.",
    )(calibrate)


@source_options
def calibrate(
    file: Annotated[Path, typer.Argument(help="Capture of the sensor on a calibrator.")],
    *,
    level: Annotated[
        str | None,
        typer.Option(
            "--level",
            help="Calibrator level with its unit: '94 dB', '114 dB re 20 uPa', '10 m/s²', "
            "'1 g', '10 N' (RMS); a bare number is dB re the channel's reference "
            "(20 uPa, 1 um/s², 1 uN ...). Its unit names the quantity unless --quantity "
            "does. Default 94 dB for sound pressure; required for other quantities.",
        ),
    ] = None,
    frequency: Annotated[
        str | None,
        typer.Option(
            "--frequency",
            help="Nominal calibrator frequency. Default: 1 kHz for sound pressure, 159.2 Hz "
            "(1000 rad/s) for acceleration, velocity and displacement.",
        ),
    ] = None,
    write_profile: Annotated[
        Path | None,
        typer.Option(
            "--write-profile",
            help="Write the quantity and sensitivity into this profile (created or "
            "updated; [channel.N] for one channel of a multi-channel file). Use the "
            "recording's sidecar name to update it.",
        ),
    ] = None,
    calibrator_tolerance: Annotated[
        str,
        typer.Option(
            "--calibrator-tolerance",
            help="Level tolerance of the calibrator (rectangular, e.g. '0.25 dB', the "
            "class 1 tolerance of IEC 60942:2017 for sound calibrators; give a vibration "
            "or force calibrator's stated tolerance), used in the uncertainty budget.",
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
    the calibrator's RMS amount of the channel's quantity gives the sensitivity, in the
    quantity's trade form (mV/Pa, mV/(m/s²) and mV/g, mV/N ...). Any sensitivity given
    by option or profile is ignored for the measurement. A tone whose level or frequency
    drifts is refused (the calibrator was moved, or is failing).

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
    tolerance_db = parse_decibels(calibrator_tolerance, what="--calibrator-tolerance")
    certificate_db = (
        None
        if calibrator_uncertainty is None
        else parse_decibels(calibrator_uncertainty, what="--calibrator-uncertainty")
    )
    source = open_source(file, src)
    if len(source.channel_indices) != 1:
        if src.channel:
            raise InputError("calibrate measures one channel; give a single --channel")
        raise InputError(
            f"{source.recording.channels} channels ({_quantities(source)}): calibrate "
            "measures one; choose it with --channel N",
            source=str(file),
        )
    quantity, level_db = _calibrator_level(source, level)
    if frequency is None:
        expected_hz = calibrator_frequency_hz(quantity.name, what="--frequency")
    else:
        expected_hz = parse_quantity(frequency, "Hz", what="--frequency")
    with progress(f"Measuring {file.name}", source.frames) as advance:
        calibration = calibration_of(
            source,
            level_db=level_db,
            expected_hz=expected_hz,
            quantity=quantity.name,
            calibrator_tolerance_db=tolerance_db,
            calibrator_expanded_db=certificate_db,
            charge_gain_v_per_c=source.chain_of(source.channel_indices[0]).charge_gain_v_per_c,
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
        _update_profile(write_profile, calibration, several=source.recording.channels > 1)
        doc["profile_written"] = str(write_profile)
    if json_out:
        emit_json(doc)
        return
    _print(file, doc, calibration)
    if write_profile is not None:
        err_console.print(f"profile written: {write_profile}")
    elif sidecar_path(file).exists():
        err_console.print(
            f"tip: --write-profile {sidecar_path(file)} stores this sensitivity in the sidecar"
        )


def _quantities(source: CalibratedSource) -> str:
    """``"0: acceleration, 1: pressure"``: what each channel of the file measures."""
    return ", ".join(
        f"{i}: {source.chain_of(i).quantity}" for i in range(source.recording.channels)
    )


def _calibrator_level(source: CalibratedSource, text: str | None) -> tuple[Quantity, float]:
    """The calibrator's quantity and its level in dB re that quantity's reference.

    The quantity is ``--quantity``'s when given, else the one the level's unit names,
    else the channel's (its profile's, or sound pressure). Without a level, a sound
    calibrator's 94 dB; other calibrators have no usual level.
    """
    index = source.channel_indices[0]
    chain = source.chain_of(index)
    given = source.provenance_of(index)
    by_option = given is not None and given.quantity == "option"
    channel_quantity = quantity_named(chain.quantity)
    if text is None:
        if channel_quantity.name != "pressure":
            raise InputError(
                f"--level: channel {index} measures {channel_quantity.name}; give the "
                "calibrator's level with its unit, e.g. --level '10 m/s²'"
            )
        text = "94"

    def reference(q: Quantity) -> float:
        # The chain's reference pressure (20 µPa in air, 1 µPa in water), else ISO 1683.
        return chain.reference_pa if q.name == "pressure" else q.reference

    try:
        rms, named = parse_level_of(text, reference=reference(channel_quantity), what="--level")
    except UnitError as exc:
        raise InputError(exc.message) from None
    quantity = channel_quantity if named is None else named
    if named is not None and by_option and named != channel_quantity:
        raise InputError(
            f"--level: {text!r} is a level of {named.name}, but --quantity says the channel "
            f"measures {channel_quantity.name}"
        )
    if not quantity.mechanical:
        raise InputError(
            f"channel {index} measures {quantity.name}: calibrate measures a sensor's "
            "sensitivity; give its quantity with --quantity (pressure, acceleration, force ...)"
        )
    level_db = 20.0 * math.log10(rms / reference(quantity))
    iso_db = 20.0 * math.log10(rms / quantity.reference)
    low, high = LEVEL_RANGE_DB
    if not low <= iso_db <= high:
        raise InputError(
            f"--level {text!r} is {iso_db:.1f} dB re {quantity.reference_text}, not a "
            f"calibrator level ({low:g} to {high:g} dB); give the unit, e.g. '94 dB', "
            "'10 m/s²', '1 g'"
        )
    return quantity, level_db


def _print(file: Path, doc: dict, calibration: Calibration) -> None:
    result = calibration.result
    quantity = QUANTITIES[result.quantity]
    print_heading(file, f"channel {doc['channel']}  ({result.quantity})")
    console.print(
        f"  calibrator    {result.level_db:.5g} {doc['level_unit']} "
        f"= {result.calibrator_rms:.5g} {quantity.unit} RMS",
        markup=False,
    )
    console.print(f"  tone          {result.tone_hz:.2f} Hz, {result.tone_rms_v * 1e3:.5g} mV RMS")
    extra = ""
    if result.sensitivity_dbv_per_pa is not None:
        extra = f"  ({result.sensitivity_dbv_per_pa:.2f} dB re 1 V/Pa)"
    if result.charge_gain_v_per_c is not None:
        volts = Sensitivity(result.sensitivity_v_per_unit, "V", quantity)
        extra += f"  ({format_sensitivity(volts)} after the charge amplifier)"
    console.print(Text.assemble("  sensitivity   ", (result.sensitivity_text, "bold"), extra))
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
    if quantity.name == "pressure":
        console.print(
            "    the calibrator's static-pressure and load-volume corrections", markup=False
        )
    else:
        console.print(
            "    the calibrator's loading by the sensor's mass and its transverse motion",
            markup=False,
        )
    console.print(f"  residual      {result.residual_db:.1f} dB re tone (noise + distortion)")
    console.print(
        f"  stability     {result.level_spread_db:.3f} dB, "
        f"{100 * result.frequency_spread:.3f} % over {result.segments} segments"
    )


def _update_profile(path: Path, calibration: Calibration, *, several: bool) -> None:
    """Set the measured quantity and sensitivity in the profile at ``path`` (created or
    updated): in ``[channel.N]`` when the recording has several channels or the profile a
    section of that channel, else in ``[sensor]``."""
    old = read_text(path, what="profile") if path.exists() or path.is_symlink() else None
    channel = calibration.channel
    own = False
    if old:
        tables = parse_toml(old, source=str(path)).get("channel", {})
        own = isinstance(tables, dict) and str(channel) in tables
    result = calibration.result
    text = profile_with_sensitivity(
        old,
        result.sensitivity_v_per_unit,
        calibration_date=_dt.date.today().isoformat(),
        source=str(path),
        quantity=result.quantity,
        section=f"channel.{channel}" if several or own else "sensor",
        charge_gain_v_per_c=result.charge_gain_v_per_c,
    )
    write_text_atomic(path, text)
