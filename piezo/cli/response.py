"""``piezo response`` (two-channel H1) and ``piezo fit-frontend`` (fits to a response CSV).

Also the helpers ``piezo sweep analyze`` shares with them: the JSON form of a fit, the
terminal summary, the response plot.
"""

from __future__ import annotations

import math
import re
from dataclasses import replace
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer

from piezo.chain.units import format_uncertain, parse_quantity
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import (
    atomic_output,
    console,
    emit_json,
    err_console,
    progress,
    write_text_atomic,
)
from piezo.errors import InputError
from piezo.response.fit import (
    GoldenDeviation,
    ResponseFit,
    ResponseTable,
    fit_response,
    format_response_csv,
    parse_response_csv,
)
from piezo.response.measure import H1Estimator, smooth_fractional_octave

FRONTEND_CAUTION = (
    "Fitted values are an engineering estimate of the sensor and front-end; confirm them "
    "by measurement. Piezo elements can produce high voltages under shock or temperature "
    "change: protect the amplifier input."
)


def register(app: typer.Typer) -> None:
    """Add the ``response`` and ``fit-frontend`` commands to ``app``."""
    app.command(
        "response",
        help="Frequency response H1 = Gxy/Gxx with coherence from a two-channel recording.",
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


def parse_frequency(text: str, what: str) -> float:
    """A positive frequency from user text."""
    value = parse_quantity(text, "Hz", what=what)
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"{what} must be a positive frequency, got {text!r}")
    return value


_DB_SPL_RE = re.compile(r"^\s*([-+]?\d+(?:\.\d*)?)\s*dB(?:\s*SPL)?\s*$", re.IGNORECASE)


def parse_acoustic_level(text: str | None) -> float | None:
    """``"94 dB"`` (dB SPL re 20 µPa) or ``"1.2 Pa"`` (RMS) → pascals RMS."""
    if text is None:
        return None
    m = _DB_SPL_RE.match(text)
    if m:
        return 20e-6 * 10 ** (float(m.group(1)) / 20)
    try:
        value = parse_quantity(text, "Pa", what="--acoustic-level")
    except InputError:
        raise InputError(
            f"--acoustic-level: cannot read {text!r}; use e.g. '94 dB' (re 20 µPa) or '1 Pa' (RMS)"
        ) from None
    if not value > 0:
        raise InputError(f"--acoustic-level must be positive, got {text!r}")
    return value


def fit_document(fit: ResponseFit | None) -> dict[str, Any]:
    """The fitted numbers as a JSON-ready mapping (keys shared by all response commands).

    ``None`` (no fit made) gives the same keys, each ``null``.
    """
    if fit is None:
        # The keys of any fit (a flat response's), every value null.
        flat = fit_response(np.geomspace(100.0, 10000.0, 8), np.zeros(8))
        return {
            k: [None, None] if isinstance(v, list) else None for k, v in fit_document(flat).items()
        }
    hp, res = fit.highpass, fit.resonance
    sens_v = fit.sensitivity_v_per_pa
    return {
        "magnitude_unit": fit.magnitude_unit,
        "reference_hz": fit.reference_hz,
        "sensitivity_db": fit.sensitivity_db,
        "sensitivity_mv_per_pa": None if sens_v is None else 1e3 * sens_v,
        "passband_db": fit.passband_db,
        "passband_std_db": fit.passband_std_db,
        "corner_hz": None if hp is None else hp.corner_hz,
        "corner_std_hz": None if hp is None else hp.corner_std_hz,
        "corner_order": None if hp is None else hp.order,
        "corner_q": None if hp is None else hp.q,
        "corner_in_band": None if hp is None else hp.in_band,
        "resonance_hz": None if res is None else res.frequency_hz,
        "resonance_std_hz": None if res is None else res.frequency_std_hz,
        "resonance_q": None if res is None else res.q,
        "resonance_q_std": None if res is None else res.q_std,
        "resonance_peak_db": None if res is None else res.peak_db,
        "resonance_peak_hz": None if res is None else res.peak_hz,
        "resonance_fit_residual_db": None if res is None else res.residual_rms_db,
        "resonance_fit_poor": None if res is None else res.poor_fit,
        "band_1db_hz": [fit.band_1db.low_hz, fit.band_1db.high_hz],
        "band_1db_limited": [fit.band_1db.low_limited, fit.band_1db.high_limited],
        "band_3db_hz": [fit.band_3db.low_hz, fit.band_3db.high_hz],
        "band_3db_limited": [fit.band_3db.low_limited, fit.band_3db.high_limited],
        "fit_residual_rms_db": fit.residual_rms_db,
    }


def golden_document(dev: GoldenDeviation, path: Path) -> dict[str, Any]:
    """Deviation from the golden response as a JSON-ready mapping."""
    return {
        "file": str(path),
        "worst_hz": dev.worst_hz,
        "worst_db": dev.worst_db,
        "rms_db": dev.rms_db,
        "aligned_at_hz": dev.aligned_at_hz,
        "frequency_hz": dev.frequency_hz,
        "deviation_db": dev.deviation_db,
    }


def table_document(table: ResponseTable) -> dict[str, Any]:
    """The response table's columns as a JSON-ready mapping."""
    doc: dict[str, Any] = {
        "frequency_hz": table.frequency_hz,
        "magnitude_db": table.magnitude_db,
        "phase_deg": table.phase_deg,
    }
    doc.update(table.extra)
    return doc


def _band_text(lo: float, hi: float, lo_limited: bool, hi_limited: bool) -> str:
    left = f"≤{lo:.4g}" if lo_limited else f"{lo:.4g}"
    right = f"≥{hi:.4g}" if hi_limited else f"{hi:.4g}"
    return f"{left} Hz – {right} Hz"


def print_fit(doc: dict[str, Any]) -> None:
    """Terminal summary of :func:`fit_document`'s numbers."""
    unit = doc["magnitude_unit"] or "dB (relative)"
    sens = f"{doc['sensitivity_db']:.2f} {unit}"
    if doc["sensitivity_mv_per_pa"] is not None:
        sens += f"  ({doc['sensitivity_mv_per_pa']:.4g} mV/Pa)"
    console.print(f"  sensitivity   [bold]{sens}[/bold] at {doc['reference_hz']:g} Hz")
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
            f"  resonance     peak [bold]{doc['resonance_peak_hz']:.5g} Hz[/bold], "
            f"{doc['resonance_peak_db']:+.2f} dB; not single-mode shaped (single-mode fit "
            f"{doc['resonance_hz']:.4g} Hz, Q {doc['resonance_q']:.2g}, residual "
            f"{doc['resonance_fit_residual_db']:.2f} dB RMS: no uncertainty quoted)"
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
    """Write the response table atomically."""
    write_text_atomic(path, format_response_csv(table))


def write_plot(
    path: Path,
    table: ResponseTable,
    *,
    title: str,
    smooth: int,
    golden: ResponseTable | None = None,
    lower: str = "distortion",
) -> None:
    """PNG with magnitude (raw and smoothed), phase and distortion or coherence."""
    from matplotlib.figure import Figure

    f = table.frequency_hz
    fig = Figure(figsize=(8.0, 9.0), layout="constrained")
    ax_m, ax_p, ax_l = fig.subplots(3, 1, sharex=True)
    unit = table.magnitude_unit or "dB (relative)"
    ax_m.semilogx(f, table.magnitude_db, color="0.6", linewidth=0.8, label="measured")
    if smooth:
        ax_m.semilogx(
            f,
            smooth_fractional_octave(f, table.magnitude_db, fraction=smooth),
            color="C0",
            linewidth=1.6,
            label=f"1/{smooth}-octave smoothed (display only)",
        )
    if golden is not None:
        ax_m.semilogx(golden.frequency_hz, golden.magnitude_db, "--", color="C3", label="golden")
    ax_m.set_ylabel(f"magnitude / {unit}")
    ax_m.legend(loc="best", fontsize="small")
    ax_m.set_title(title)
    if table.phase_deg is not None:
        ax_p.semilogx(f, table.phase_deg, color="C1")
    ax_p.set_ylabel("phase / degrees")
    ax_p.set_ylim(-185, 185)
    if lower == "coherence" and "coherence" in table.extra:
        ax_l.semilogx(f, table.extra["coherence"], color="C2")
        ax_l.set_ylabel("coherence γ² / 1")
        ax_l.set_ylim(0, 1.05)
    else:
        drew = False
        for name in sorted(k for k in table.extra if k.endswith("_percent")):
            values = table.extra[name]
            if np.any(np.isfinite(values) & (values > 0)):
                label = name.removesuffix("_percent").upper()
                ax_l.loglog(f, values, label=label)
                drew = True
        if drew:
            ax_l.legend(loc="best", fontsize="small")
        ax_l.set_ylabel("distortion / % of fundamental")
    ax_l.set_xlabel("frequency / Hz")
    for ax in (ax_m, ax_p, ax_l):
        ax.grid(True, which="both", alpha=0.3)
    with atomic_output(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)


# --------------------------------------------------------------------------------------
# piezo response
# --------------------------------------------------------------------------------------


def _table_subset(table: ResponseTable, keep: np.ndarray) -> ResponseTable:
    return ResponseTable(
        table.frequency_hz[keep],
        table.magnitude_db[keep],
        None if table.phase_deg is None else table.phase_deg[keep],
        table.magnitude_unit,
        {k: v[keep] for k, v in table.extra.items()},
    )


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
    """
    ref_hz = parse_frequency(reference_frequency, "--reference-frequency")
    measured = list(src.channel) if src.channel else None
    source = open_source(file, replace(src, channel=None))
    rec = source.recording
    volts_per_raw = source.chain.scale(is_pcm=rec.is_pcm)
    if source.chain.sensitivity_v_per_pa is not None:
        volts_per_raw *= source.chain.sensitivity_v_per_pa
    try:
        est = H1Estimator(
            rec.sample_rate_hz,
            rec.channels,
            reference_channel=reference_channel,
            measured_channels=measured,
            segment_frames=segment,
            overlap=overlap,
            unit="V/V",
        )
        with progress(f"Reading {file.name}", rec.frames) as advance:
            for block in rec.blocks():
                est.update(block * volts_per_raw)
                advance(block.shape[0])
        result = est.result()
    except InputError as exc:
        raise exc.with_source(str(file)) from None

    channels = []
    tables = []
    for i, ch in enumerate(result.measured_channels):
        table = result.to_table(channel=i, points_per_octave=points_per_octave)
        keep = table.extra["coherence"] >= min_coherence
        fit = None
        skipped = None
        if np.count_nonzero(keep) < 6:
            # The table stands on its own; only the fit needs coherent points.
            skipped = (
                f"only {np.count_nonzero(keep)} points have coherence ≥ {min_coherence:g} "
                "(--min-coherence)"
            )
            keep[:] = False
        else:
            good = _table_subset(table, keep)
            try:
                fit = fit_response(
                    good.frequency_hz,
                    good.magnitude_db,
                    reference_hz=ref_hz,
                    magnitude_unit=result.magnitude_unit,
                )
            except InputError as exc:
                raise exc.with_source(str(file)) from None
        entry = {
            "channel": ch,
            **fit_document(fit),
            "magnitude_unit": result.magnitude_unit,
            "reference_hz": ref_hz,
            "fitted_points": int(keep.sum()),
            "fit_skipped_reason": skipped,
        }
        entry.update(table_document(table))
        channels.append(entry)
        tables.append(table)

    first = channels[0]
    doc = {
        "file": str(file),
        "reference_channel": result.reference_channel,
        "sample_rate_hz": result.sample_rate_hz,
        "segments": result.segments,
        "segment_frames": result.segment_frames,
        "min_coherence": min_coherence,
        **first,
    }
    if len(channels) > 1:
        doc["channels"] = channels
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
        console.print(f"[bold]{file}[/bold]  H1 from {result.segments} Welch segments")
        for entry in channels:
            console.print(
                f" channel {entry['channel']} over reference channel {reference_channel} "
                f"({entry['fitted_points']} points with coherence ≥ {min_coherence:g})"
            )
            if entry["fit_skipped_reason"] is None:
                print_fit(entry)
            else:
                _print_h1_only(entry)
    for path, what in ((csv, "table"), (plot, "plot")):
        if path is not None:
            err_console.print(f"{what} written: {path}")


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
    """
    ref_hz = parse_frequency(reference_frequency, "--reference-frequency")
    try:
        text = file.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("response file not found", source=str(file)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the response file: {exc}", source=str(file)) from None
    table = parse_response_csv(text, source=str(file))
    keep = np.isfinite(table.magnitude_db)
    if "coherence" in table.extra:
        keep &= table.extra["coherence"] >= min_coherence
    sub = _table_subset(table, keep)
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
    console.print(f"[bold]{file}[/bold]  {doc['points']} points")
    print_fit(doc)
    err_console.print(FRONTEND_CAUTION)
