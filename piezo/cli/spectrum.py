"""``piezo spectrum``: Welch power spectral density of a recording (CSV, PNG, JSON)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from piezo.chain.measurement import Chain
from piezo.chain.units import parse_frequency
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import (
    ForceOption,
    console,
    emit_json,
    err_console,
    levels_in,
    print_heading,
    progress,
    refuse_existing,
    write_text_atomic,
)
from piezo.errors import InputError
from piezo.io.tables import csv_text
from piezo.plots.spectrum import write_plot
from piezo.spectral.summary import spectrum_of
from piezo.spectral.transient import StationarityCheck
from piezo.spectral.welch import AVERAGES, SCALINGS, WINDOWS, PSDResult, Spectrogram, WelchPSD

#: Columns kept for the plotted spectrogram (time-decimated by averaging).
PLOT_COLUMNS = 600
#: Distinct peaks printed per channel (the JSON has up to MAX_PEAKS).
PRINTED_PEAKS = 5


def register(app: typer.Typer) -> None:
    """Add the ``spectrum`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['spectrum']
    """
    app.command(
        "spectrum",
        help="Welch power spectral density per channel (Pa²/Hz, (m/s²)²/Hz, V²/Hz ...), "
        "CSV and PNG.",
    )(spectrum)


def _choice(value: str, allowed: tuple[str, ...], what: str) -> str:
    if value not in allowed:
        raise InputError(f"{what} must be one of {', '.join(allowed)}; got {value!r}")
    return value


@source_options
def spectrum(
    file: Annotated[Path, typer.Argument(help="Recording: WAV, FLAC, RF64, W64, CSV ...")],
    *,
    resolution: Annotated[
        str | None,
        typer.Option(
            "--resolution",
            metavar="FREQ",
            help="Bin spacing, e.g. '1Hz' (segment rounded up to a fast FFT size). "
            "Default: 4096-sample segments.",
        ),
    ] = None,
    window: Annotated[
        str, typer.Option("--window", help=f"Window: {', '.join(WINDOWS)}.")
    ] = "hann",
    overlap: Annotated[
        float, typer.Option("--overlap", min=0.0, max=0.95, help="Segment overlap fraction.")
    ] = 0.5,
    average: Annotated[
        str, typer.Option("--average", help=f"Averaging: {', '.join(AVERAGES)} (max-hold).")
    ] = "mean",
    scaling: Annotated[
        str,
        typer.Option(
            "--scaling",
            help="density (unit²/Hz) or spectrum (unit² per bin: reads a tone's mean square).",
        ),
    ] = "density",
    csv: Annotated[
        Path | None, typer.Option("--csv", metavar="OUT.csv", help="Write the PSD as CSV.")
    ] = None,
    plot: Annotated[
        Path | None,
        typer.Option("--plot", metavar="OUT.png", help="Draw the PSD and a spectrogram as PNG."),
    ] = None,
    transient: Annotated[
        bool,
        typer.Option(
            "--transient",
            help="Energy view for bursts and impacts: energy spectral density, exposure "
            "levels per band and per event (instead of the Welch PSD).",
        ),
    ] = False,
    force: ForceOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Welch power spectral density of each channel, streamed through the file.

    One-sided, calibrated: Pa²/Hz with a sensitivity, V²/Hz without. The mean average
    equals scipy.signal.welch on the same data; the report gives the window's
    equivalent noise bandwidth, the number of averages and a 95 % chi-square confidence
    interval from the effective number of independent averages (Welch 1967).

    Examples
    --------
    The Hann window's equivalent noise bandwidth is 1.5 bins (Harris 1978, Table 1):

    >>> from piezo.cli import main
    >>> try:
    ...     main(["spectrum", "recordings/pd27-golden/PD27-23001.flac", "--resolution", "10Hz",
    ...           "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "resolution_hz": 10.0, "window": "hann", ... "enbw_bins": 1.49..., ...}
    0
    """
    refuse_existing(csv, plot, force=force)
    _choice(window, WINDOWS, "--window")
    _choice(average, AVERAGES, "--average")
    _choice(scaling, SCALINGS, "--scaling")
    source = open_source(file, src)
    if transient:
        from piezo.cli.transient import transient_view

        return transient_view(file, source, json_out=json_out)
    fs = source.sample_rate_hz
    nch = len(source.channel_indices)
    if plot is not None and len({c.level_unit for c in source.chains}) > 1:
        raise InputError(
            "--plot draws one level unit, and these channels have "
            f"{'; '.join(sorted({c.level_unit for c in source.chains}))}: choose one with "
            "--channel N",
            source=str(file),
        )
    res_hz = parse_frequency(resolution, "--resolution") if resolution is not None else None
    spectro = None
    if plot is not None:
        # About 50 ms segments (a power of two) for the picture, never longer than the PSD's.
        psd_frames = WelchPSD(fs, nch, resolution_hz=res_hz, window=window).segment_frames
        seg = min(psd_frames, 2 ** max(8, round(math.log2(fs / 20))))
        spectro = Spectrogram(
            fs,
            nch,
            segment_frames=seg,
            window=window,
            overlap=overlap,
            scaling=scaling,
            max_columns=PLOT_COLUMNS,
        )
    stationarity = (
        StationarityCheck(fs, nch, frames=source.frames) if source.frames >= 16 else None
    )
    with progress(f"Spectrum of {file.name}", source.frames) as advance:
        measured = spectrum_of(
            source,
            resolution_hz=res_hz,
            window=window,
            overlap=overlap,
            average=average,
            scaling=scaling,
            spectrogram=spectro,
            also=[] if stationarity is None else [stationarity],
            advance=advance,
        )
    result = measured.result
    ref = measured.reference
    level_unit = measured.level_unit
    if csv is not None:
        write_text_atomic(
            csv,
            _format_csv(
                result,
                source.channel_indices,
                measured.units,
                measured.references,
                measured.level_units,
            ),
        )
    if plot is not None and spectro is not None:
        assert level_unit is not None  # one level unit: refused above otherwise
        write_plot(
            plot,
            result,
            spectro,
            source.channel_indices,
            file.name,
            level_unit,
            ref,
            start_time_s=source.recording.start_time_s,
        )
    doc = measured.to_dict()
    if json_out:
        emit_json(doc)
    else:
        _print(doc, result, source.chains)
    note = stationarity.result().note() if stationarity is not None else None
    if note is not None:
        err_console.print(f"note: {note}")
    for path, what in ((csv, "table"), (plot, "plot")):
        if path is not None:
            err_console.print(f"{what} written: {path}")


def _format_csv(
    result: PSDResult,
    channels: tuple[int, ...],
    units: Sequence[str],
    references: Sequence[float],
    level_units: Sequence[str],
) -> str:
    """CSV text: frequency, then the PSD and its level for each channel.

    Columns ``ch<N>_psd`` (in the channel's unit) and ``ch<N>_psd_db`` (in its level
    unit); a ``# column: unit`` comment line above the header names each unit
    (docs/glossary.md), so channels of different quantities keep theirs.
    """
    header = ["frequency_hz"]
    comments = ["piezo spectrum table"]
    for ch, unit, level_unit in zip(channels, units, level_units, strict=True):
        header += [f"ch{ch}_psd", f"ch{ch}_psd_db"]
        comments += [f"ch{ch}_psd: {unit}", f"ch{ch}_psd_db: {level_unit}"]
    with np.errstate(divide="ignore"):
        levels = 10 * np.log10(result.psd / np.asarray(references, dtype=float) ** 2)
    rows = []
    for k, f in enumerate(result.frequency_hz):
        row = [f"{f:.6g}"]
        for i in range(len(channels)):
            lv = levels[k, i]
            row += [f"{result.psd[k, i]:.6e}", f"{lv:.3f}" if np.isfinite(lv) else ""]
        rows.append(row)
    return csv_text(header, rows, comments=comments)


def _print(doc: dict, result: PSDResult, chains: Sequence[Chain]) -> None:
    print_heading(doc["file"])
    ci = doc["confidence"]
    ci_text = (
        f", {100 * ci['coverage_probability']:g} % interval "
        f"{ci['lower_db']:+.2f}/{ci['upper_db']:+.2f} dB"
        if ci is not None
        else ""
    )
    console.print(
        f"  {doc['window']} window, {result.segment_frames} samples "
        f"({doc['resolution_hz']:.4g} Hz bins), overlap {result.overlap_frames}, "
        f"ENBW {doc['enbw_hz']:.4g} Hz; {doc['averages']} averages ({doc['average']}), "
        f"{doc['effective_averages']:.1f} independent{ci_text}"
    )
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("ch", justify="right")
    # Each channel through its own chain: the RMS in its quantity's unit and the total
    # level re its own reference.
    units = [c.unit for c in chains]
    totals = [c.level_unit for c in chains]
    same = len(set(units)) == 1 and len(set(totals)) == 1
    table.add_column(f"RMS {units[0]}" if same else "RMS", justify="right")
    table.add_column(f"total {totals[0]}" if same else "total", justify="right")
    table.add_column("distinct peaks: Hz, PSD level, above floor", justify="right")
    # One fixed-point format: frequencies to the bin spacing, levels to 0.1 dB.
    decimals = max(0, math.ceil(-math.log10(doc["resolution_hz"])))
    for entry, unit, total_unit in zip(doc["channels"], units, totals, strict=True):
        ms = entry["mean_square"]
        rms = math.sqrt(ms) if ms > 0 else 0.0
        reference = next(v for k, v in entry.items() if k.startswith("reference_"))
        total = f"{20 * math.log10(rms / reference):.2f}" if rms > 0 else "—"
        text = "\n".join(
            f"{pk['frequency_hz']:.{decimals}f} Hz  {pk['level_db']:.1f} dB  "
            f"{pk['above_floor_db']:+.1f} dB"
            for pk in entry["peaks"][:PRINTED_PEAKS]
        )
        rms_text = f"{rms:.4g}" if same else f"{rms:.4g} {unit}"
        total_text = total if same else f"{total} {total_unit}"
        table.add_row(str(entry["channel"]), rms_text, total_text, text or "none")
    console.print(table)
    console.print(
        f"  PSD levels in {levels_in(doc)}; totals by Parseval over all bins. Peaks: "
        f"at least {doc['peak_separation_hz']:.{decimals}f} Hz (one main lobe) apart, "
        f"{doc['peak_margin_db']:.1f} dB above the local floor (running median over an "
        "octave), apart by valleys deeper than the scatter; "
        f"the {PRINTED_PEAKS} strongest shown."
    )
    for note in doc["response_curve_notes"]:
        console.print(f"  {note}")
