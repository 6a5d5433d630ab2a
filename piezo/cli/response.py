"""``piezo response`` (two-channel H1) and ``piezo fit-frontend`` (fits to a response CSV).

Also the helpers ``piezo sweep analyze`` shares with them: the terminal summary of a fit
and the response plot. The JSON documents come from :mod:`piezo.response.summary`.
"""

from __future__ import annotations

import datetime
import math
import os
from dataclasses import replace
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer
from rich.table import Table
from rich.text import Text

from piezo.chain.measurement import CalibratedSource, profile_for_sensor
from piezo.chain.units import format_uncertain, parse_frequency, parse_quantity
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import (
    ForceOption,
    console,
    emit_json,
    err_console,
    print_heading,
    progress,
    refuse_existing,
    write_text_atomic,
)
from piezo.errors import InputError
from piezo.plots.response import write_plot
from piezo.response.fit import (
    ResponseTable,
    fit_response,
    format_response_csv,
    read_response_table,
)
from piezo.response.summary import (
    Comparison,
    comparison_of,
    fit_document,
    h1_response_of,
    table_subset,
)

FRONTEND_CAUTION = (
    "Fitted values are an engineering estimate of the sensor and front-end; confirm them "
    "by measurement. Piezo elements can produce high voltages under shock or temperature "
    "change: protect the amplifier input."
)


def register(app: typer.Typer) -> None:
    """Add the ``response`` and ``fit-frontend`` commands to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['response', 'fit-frontend']
    """
    app.command(
        "response",
        help="H1 response with coherence from a two-channel recording; comparison calibration.",
    )(response)
    app.command(
        "fit-frontend",
        help="Fit sensitivity, corner (1st/2nd order) and resonance to a response CSV.",
    )(fit_frontend)


# --------------------------------------------------------------------------------------
# Shared helpers
# --------------------------------------------------------------------------------------

ReferenceFrequencyOption = Annotated[
    str,
    typer.Option(
        "--reference-frequency",
        metavar="FREQ",
        help="Frequency of the sensitivity and the ±1/±3 dB bands.",
    ),
]
CsvOption = Annotated[
    Path | None,
    typer.Option("--csv", metavar="OUT.csv", help="Write the response table as CSV."),
]
PlotOption = Annotated[
    Path | None,
    typer.Option("--plot", metavar="OUT.png", help="Draw magnitude, phase and more as PNG."),
]
PointsOption = Annotated[
    int,
    typer.Option(
        "--points-per-octave",
        min=1,
        max=96,
        help="Resolution of the CSV/JSON table (interpolated, not smoothed).",
    ),
]
SmoothOption = Annotated[
    int,
    typer.Option(
        "--smooth",
        min=0,
        max=48,
        help="1/N-octave smoothing of the plotted magnitude only (0: none).",
    ),
]


def _band_text(lo: float, hi: float, lo_limited: bool, hi_limited: bool) -> str:
    left = f"≤{lo:.4g}" if lo_limited else f"{lo:.4g}"
    right = f"≥{hi:.4g}" if hi_limited else f"{hi:.4g}"
    return f"{left} Hz – {right} Hz"


def print_fit(doc: dict[str, Any]) -> None:
    """Terminal summary of :func:`fit_document`'s numbers.

    Examples
    --------
    A first-order 50 Hz high-pass at -40 dB is 10·lg(1 + 0.05²) = 0.01 dB down at 1 kHz:

    >>> import numpy as np
    >>> from piezo.response.fit import fit_response
    >>> from piezo.response.summary import fit_document
    >>> f = np.geomspace(10.0, 10e3, 200)
    >>> print_fit(fit_document(fit_response(f, -40 - 10 * np.log10(1 + (50 / f) ** 2))))
    sensitivity   -40.01 dB (relative) at 1000 Hz
    low corner    50.0... Hz ..., order 1
    resonance     none inside the band
    ...
    """
    unit = doc["magnitude_unit"] or "dB (relative)"
    sens = f"{doc['sensitivity_db']:.2f} {unit}"
    if doc["sensitivity_mv_per_pa"] is not None:
        sens += f"  ({doc['sensitivity_mv_per_pa']:.4g} mV/Pa)"
    console.print(
        Text.assemble("  sensitivity   ", (sens, "bold"), f" at {doc['reference_hz']:g} Hz")
    )
    if doc["corner_hz"] is None:
        console.print("  low corner    below the measured band (response flat at its low end)")
    else:
        q = f", Q {doc['corner_q']:.3g}" if doc["corner_q"] is not None else ""
        where = "" if doc["corner_in_band"] else " (extrapolated)"
        corner = format_uncertain(doc["corner_hz"], doc["corner_std_hz"], "Hz")
        console.print(f"  low corner    {corner}, order {doc['corner_order']}{q}{where}")
    if doc["resonance_hz"] is None:
        console.print("  resonance     none inside the band")
    elif doc["resonance_fit_poor"]:
        console.print(
            Text.assemble(
                "  resonance     peak ",
                (f"{doc['resonance_peak_hz']:.5g} Hz", "bold"),
                f", {doc['resonance_peak_db']:+.2f} dB; not single-mode shaped (single-mode fit "
                f"{doc['resonance_hz']:.4g} Hz, Q {doc['resonance_q']:.2g}, residual "
                f"{doc['resonance_fit_residual_db']:.2f} dB RMS: no uncertainty quoted)",
            )
        )
    else:
        fr = format_uncertain(doc["resonance_hz"], doc["resonance_std_hz"], "Hz")
        qr = format_uncertain(doc["resonance_q"], doc["resonance_q_std"])
        console.print(f"  resonance     {fr}, Q {qr}")
        console.print(
            f"  peak          {doc['resonance_peak_db']:+.2f} dB at "
            f"{doc['resonance_peak_hz']:.5g} Hz (measured)"
        )
    b1, l1 = doc["band_1db_hz"], doc["band_1db_limited"]
    b3, l3 = doc["band_3db_hz"], doc["band_3db_limited"]
    console.print(f"  ±1 dB band    {_band_text(b1[0], b1[1], l1[0], l1[1])}")
    console.print(f"  ±3 dB band    {_band_text(b3[0], b3[1], l3[0], l3[1])}")
    console.print(f"  fit residual  {doc['fit_residual_rms_db']:.3f} dB RMS")


def write_csv(path: Path, table: ResponseTable) -> None:
    """Write the response table atomically.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> import numpy as np
    >>> from piezo.response.fit import ResponseTable
    >>> table = ResponseTable(np.array([100.0, 1000.0]), np.array([-40.5, -40.0]))
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     write_csv(pathlib.Path(tmp) / "response.csv", table)
    ...     print((pathlib.Path(tmp) / "response.csv").read_text(), end="")
    # piezo response table
    frequency_hz,magnitude_db
    100,-40.5000
    1000,-40.0000
    """
    write_text_atomic(path, format_response_csv(table))


# --------------------------------------------------------------------------------------
# piezo response
# --------------------------------------------------------------------------------------


@source_options
def response(
    file: Annotated[Path, typer.Argument(help="Recording with a reference and a device channel.")],
    *,
    reference_channel: Annotated[
        int,
        typer.Option(
            "--reference-channel",
            min=0,
            help="Channel with the stimulus or reference sensor (x). Measured channels: "
            "--channel, default all others.",
        ),
    ] = 0,
    segment: Annotated[
        int | None,
        typer.Option(
            "--segment",
            metavar="FRAMES",
            min=8,
            help="Welch segment length; default the next power of two ≥ rate/6.",
        ),
    ] = None,
    overlap: Annotated[
        float, typer.Option("--overlap", min=0.0, max=0.95, help="Segment overlap fraction.")
    ] = 0.5,
    min_coherence: Annotated[
        float,
        typer.Option(
            "--min-coherence",
            min=0.0,
            max=1.0,
            help="Fit only points whose coherence is at least this.",
        ),
    ] = 0.99,
    reference_frequency: ReferenceFrequencyOption = "1 kHz",
    points_per_octave: PointsOption = 24,
    smooth: SmoothOption = 6,
    csv: CsvOption = None,
    plot: PlotOption = None,
    reference_uncertainty: Annotated[
        str | None,
        typer.Option(
            "--reference-uncertainty",
            metavar="DB",
            help="Comparison: the reference sensor's expanded uncertainty (k = 2), e.g. "
            "'0.2 dB', when its chart has no expanded_uncertainty_db column.",
        ),
    ] = None,
    write_curve: Annotated[
        Path | None,
        typer.Option(
            "--write-curve",
            metavar="OUT.csv",
            help="Comparison: write the (first) unit's response curve, relative to its "
            "sensitivity at --reference-frequency, in the response-curve format.",
        ),
    ] = None,
    write_profile: Annotated[
        Path | None,
        typer.Option(
            "--write-profile",
            metavar="OUT.toml",
            help="Comparison: write a profile for the (first) unit: quantity, sensitivity "
            "at --reference-frequency, the curve of --write-curve.",
        ),
    ] = None,
    force: ForceOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Estimate H1 = Gxy / Gxx and the coherence from Welch-averaged spectra.

    For recordings that carry the stimulus (or a reference sensor) on one channel and
    the device on another. Any broadband stimulus works: noise, music, sweeps. Both
    channels are taken in volts at the sensor (full scale and gain undone; a sensitivity
    is ignored), so H1 is in V/V. Numbers are fitted where the coherence is at least
    --min-coherence (the fit is skipped, and says why, when fewer than 6 points are);
    the table and plot show every frequency.

    When the reference channel has a sensitivity (its chain: a profile's [channel.N]
    section with its response curve), the measured channels are calibrated against it by
    the back-to-back comparison method (ISO 16063-21; IEC 60565 and IEC 61094-5 in
    pressure): each unit's sensitivity against frequency in its quantity's unit, with an
    expanded uncertainty and its GUM budget (docs/uncertainty.md).

    Examples
    --------
    Both channels are taken in volts, so H1 is in V/V:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["response", "recordings/valve-pickup-noise-2ch.flac", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "channel": 1, "magnitude_unit": "dB re 1 V/V", ... "corner_order": 1, ...}
    0
    """
    refuse_existing(csv, plot, write_curve, write_profile, force=force)
    ref_expanded_db = (
        None
        if reference_uncertainty is None
        else parse_quantity(
            reference_uncertainty.replace("dB", ""), "", what="--reference-uncertainty"
        )
    )
    if ref_expanded_db is not None and not (
        math.isfinite(ref_expanded_db) and ref_expanded_db > 0
    ):
        raise InputError(
            f"--reference-uncertainty must be positive, got {reference_uncertainty!r}"
        )
    ref_hz = parse_frequency(reference_frequency, "--reference-frequency")
    measured = list(src.channel) if src.channel else None
    source = open_source(file, replace(src, channel=None))
    with progress(f"Reading {file.name}", source.frames) as advance:
        analysis = h1_response_of(
            source,
            reference_channel=reference_channel,
            measured_channels=measured,
            segment_frames=segment,
            overlap=overlap,
            min_coherence=min_coherence,
            reference_hz=ref_hz,
            points_per_octave=points_per_octave,
            advance=advance,
        )
    doc = analysis.to_dict()
    channels = [ch.to_dict() for ch in analysis.channels]
    tables = [ch.table for ch in analysis.channels]
    first = channels[0]
    result = analysis.estimate
    comparison, skipped = None, None
    if source.chain_of(reference_channel).calibrated:
        try:
            comparison = comparison_of(
                source,
                result,
                reference_hz=ref_hz,
                reference_expanded_db=ref_expanded_db,
                min_coherence=min_coherence,
            )
        except InputError as exc:
            if write_curve is not None or write_profile is not None:
                raise
            skipped = exc.message
    elif write_curve is not None or write_profile is not None:
        raise InputError(
            f"--write-curve and --write-profile need a comparison: give the reference "
            f"channel {reference_channel} its sensitivity (a profile's [channel.N] section)",
            source=str(file),
        )
    if comparison is not None:
        doc["comparison"] = comparison.to_dict()
    if skipped is not None:
        doc["comparison_skipped_reason"] = skipped
    if comparison is not None and write_curve is not None:
        write_text_atomic(write_curve, comparison.channels[0].chart_text())
    if comparison is not None and write_profile is not None:
        write_text_atomic(
            write_profile, _unit_profile(source, comparison, write_curve, write_profile)
        )
    if csv is not None:
        write_csv(csv, tables[0])
    if plot is not None:
        write_plot(
            plot,
            tables[0],
            title=f"{file.name}: H1, channel {first['channel']} / {reference_channel}",
            smooth=smooth,
            lower="coherence",
        )
    if json_out:
        emit_json(doc)
    else:
        print_heading(file, f"H1 from {result.segments} Welch segments")
        for entry in channels:
            console.print(
                f" channel {entry['channel']} over reference channel {reference_channel} "
                f"({entry['fitted_points']} points with coherence ≥ {min_coherence:g})"
            )
            if entry["fit_skipped_reason"] is None:
                print_fit(entry)
            else:
                _print_h1_only(entry)
        if comparison is not None:
            _print_comparison(comparison.to_dict())
        elif skipped is not None:
            console.print(f" comparison skipped: {skipped}")
    for path, what in (
        (csv, "table"),
        (plot, "plot"),
        (write_curve if comparison else None, "response curve"),
        (write_profile if comparison else None, "profile"),
    ):
        if path is not None:
            err_console.print(f"{what} written: {path}")


def _unit_profile(
    source: CalibratedSource, comparison: Comparison, curve: Path | None, profile: Path
) -> str:
    """The first unit's profile text, its chart named relative to the profile."""
    unit = comparison.channels[0]
    name = serial = None
    prov = source.provenance_of(unit.channel)
    for prof in prov.profiles if prov is not None else ():
        for part in (prof, prof.channels.get(unit.channel)):
            if part is not None:
                name = part.name or name
                serial = part.serial or serial
    chart = None
    if curve is not None:
        chart = os.path.relpath(curve.resolve(), profile.resolve().parent)
    r = unit.result
    index = int(np.argmin(np.abs(r.frequency_hz - r.reference_frequency_hz)))
    return profile_for_sensor(
        unit.sensitivity,
        calibration_date=datetime.date.today().isoformat(),
        reference_frequency_hz=float(r.frequency_hz[index]),
        response_curve=chart,
        name=name,
        serial=serial,
    )


def _print_comparison(doc: dict[str, Any]) -> None:
    """Terminal summary of a comparison: sensitivity, U and the GUM budget per unit."""
    console.print(
        f" comparison against channel {doc['reference_channel']} "
        f"({doc['reference_sensitivity']}"
        + (f", chart {doc['reference_response_curve']}" if doc["reference_response_curve"] else "")
        + ")"
    )
    for ch in doc["channels"]:
        # Uncertainties to two significant digits (GUM 7.2.6), k stated (7.2.4).
        console.print(
            Text.assemble(
                f"  channel {ch['channel']} ({ch['quantity']}): ",
                (ch["sensitivity"], "bold"),
                f" at {ch['reference_frequency_hz']:.4g} Hz, "
                f"U = {ch['expanded_uncertainty_db']:#.2g} dB "
                f"(k = {ch['coverage_factor']:.2f}, about 95 %)",
            )
        )
        budget = ch["budget"]
        table = Table(box=None, pad_edge=False, header_style="bold")
        for name in ("component", "distribution", "u (dB)", "ν"):
            table.add_column(name, justify="left" if name == "component" else "right")
        for c in budget["components"]:
            nu = c["degrees_of_freedom"]
            table.add_row(
                c["name"], c["distribution"], f"{c['contribution']:#.2g}",
                "∞" if nu is None else f"{nu:.0f}",
            )  # fmt: skip
        nu_eff = budget["effective_degrees_of_freedom"]
        table.add_row(
            "combined", "", f"{budget['combined_standard_uncertainty']:#.2g}",
            "∞" if nu_eff is None else f"{nu_eff:.3g}",
        )  # fmt: skip
        console.print(table)
        chart = ch["chart"]
        if chart["frequency_hz"]:
            console.print(
                f"  chart: {len(chart['frequency_hz'])} frequencies "
                f"{chart['frequency_hz'][0]:.4g} – {chart['frequency_hz'][-1]:.4g} Hz, "
                f"relative {min(chart['relative_db']):+.2f} to {max(chart['relative_db']):+.2f} dB"
            )


def _print_h1_only(entry: dict[str, Any]) -> None:
    """Terminal summary of an H1 table that was not fitted: magnitude and coherence."""
    f = np.asarray(entry["frequency_hz"])
    mag = np.asarray(entry["magnitude_db"])
    coh = np.asarray(entry["coherence"])
    unit = entry["magnitude_unit"] or "dB (relative)"
    ref = float(entry["reference_hz"])
    if f[0] <= ref <= f[-1]:
        lf = np.log(f)
        at = np.interp(math.log(ref), lf, mag)
        c = np.interp(math.log(ref), lf, coh)
        console.print(f"  H1            {at:.2f} {unit} at {ref:g} Hz (coherence {c:.3f})")
    console.print(
        f"  coherence     median {np.median(coh):.3f}, {np.min(coh):.3f} – {np.max(coh):.3f} "
        f"over {f[0]:.4g} Hz – {f[-1]:.4g} Hz"
    )
    console.print(f"  fit skipped   {entry['fit_skipped_reason']}")


# --------------------------------------------------------------------------------------
# piezo fit-frontend
# --------------------------------------------------------------------------------------


def fit_frontend(
    file: Annotated[
        Path,
        typer.Argument(help="Response CSV: frequency (Hz), magnitude (dB), optional phase."),
    ],
    *,
    reference_frequency: ReferenceFrequencyOption = "1 kHz",
    order: Annotated[
        int | None,
        typer.Option("--order", min=1, max=2, help="Force a first- or second-order high-pass."),
    ] = None,
    fit_from: Annotated[
        str | None, typer.Option("--fit-from", metavar="FREQ", help="Lowest frequency fitted.")
    ] = None,
    fit_to: Annotated[
        str | None, typer.Option("--fit-to", metavar="FREQ", help="Highest frequency fitted.")
    ] = None,
    min_coherence: Annotated[
        float,
        typer.Option(
            "--min-coherence",
            min=0.0,
            max=1.0,
            help="With a coherence column: fit only points at least this coherent.",
        ),
    ] = 0.99,
    json_out: JsonOption = False,
) -> None:
    """Fit sensitivity, low corner (first or second order) and resonance to a response.

    Reads the CSV written by ``piezo sweep analyze --csv`` or ``piezo response --csv``
    (or any table of frequency and magnitude in dB). Each fitted value comes with an
    uncertainty from the fit's covariance: printed expanded (k = 2), standard (1σ) in
    the JSON's ``*_std*`` keys.

    Examples
    --------
    >>> from piezo.cli import main
    >>> try:
    ...     main(["fit-frontend", "recordings/valve-pickup-golden.csv", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "points": 239, ... "corner_hz": 77.2..., ... "corner_order": 1, ...}
    0
    """
    ref_hz = parse_frequency(reference_frequency, "--reference-frequency")
    table = read_response_table(file, what="response file")
    keep = np.isfinite(table.magnitude_db)
    if "coherence" in table.extra:
        keep &= table.extra["coherence"] >= min_coherence
    sub = table_subset(table, keep)
    fit_range = None
    if fit_from is not None or fit_to is not None:
        lo = parse_frequency(fit_from, "--fit-from") if fit_from else 0.0
        hi = parse_frequency(fit_to, "--fit-to") if fit_to else math.inf
        fit_range = (lo, hi)
    try:
        fit = fit_response(
            sub.frequency_hz,
            sub.magnitude_db,
            reference_hz=ref_hz,
            orders=(1, 2) if order is None else (order,),
            fit_range_hz=fit_range,
            magnitude_unit=table.magnitude_unit,
        )
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    doc = {"file": str(file), "points": int(keep.sum()), **fit_document(fit)}
    doc["caution"] = FRONTEND_CAUTION
    if json_out:
        emit_json(doc)
        return
    print_heading(file, f"{doc['points']} points")
    print_fit(doc)
    err_console.print(FRONTEND_CAUTION)
