"""``piezo spectrum``: Welch power spectral density of a recording (CSV, PNG, JSON)."""

from __future__ import annotations

import io
import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich.table import Table

from piezo.chain.units import parse_quantity
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
from piezo.spectral.welch import AVERAGES, SCALINGS, WINDOWS, PSDResult, Spectrogram, WelchPSD

#: Columns kept for the plotted spectrogram (time-decimated by averaging).
PLOT_COLUMNS = 600


def register(app: typer.Typer) -> None:
    """Add the ``spectrum`` command to ``app``."""
    app.command("spectrum", help="Welch power spectral density (Pa²/Hz or V²/Hz), CSV and PNG.")(
        spectrum
    )


def parse_frequency(text: str, what: str) -> float:
    """A positive frequency from user text such as ``"1Hz"`` or ``"2.5 kHz"``."""
    value = parse_quantity(text, "Hz", what=what)
    if not value > 0:
        raise InputError(f"{what} must be a positive frequency, got {text!r}")
    return value


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
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Welch power spectral density of each channel, streamed through the file.

    One-sided, calibrated: Pa²/Hz with a sensitivity, V²/Hz without. The mean average
    equals scipy.signal.welch on the same data; the report gives the window's
    equivalent noise bandwidth, the number of averages and a 95 % chi-square confidence
    interval from the effective number of independent averages (Welch 1967).
    """
    _choice(window, WINDOWS, "--window")
    _choice(average, AVERAGES, "--average")
    _choice(scaling, SCALINGS, "--scaling")
    source = open_source(file, src)
    fs = source.sample_rate_hz
    nch = len(source.channel_indices)
    res_hz = parse_frequency(resolution, "--resolution") if resolution is not None else None
    est = WelchPSD(
        fs,
        nch,
        resolution_hz=res_hz,
        window=window,
        overlap=overlap,
        average=average,
        scaling=scaling,
    )
    if est.segment_frames > source.frames:
        raise InputError(
            f"the recording has {source.frames} samples, fewer than one segment of "
            f"{est.segment_frames} ({est.segment_frames / fs:g} s); use a coarser --resolution",
            source=str(file),
        )
    spectro = None
    if plot is not None:
        # About 50 ms segments (a power of two) for the picture, never longer than the PSD's.
        seg = min(est.segment_frames, 2 ** max(8, round(math.log2(fs / 20))))
        spectro = Spectrogram(
            fs,
            nch,
            segment_frames=seg,
            window=window,
            overlap=overlap,
            scaling=scaling,
            max_columns=PLOT_COLUMNS,
        )
    with progress(f"Spectrum of {file.name}", source.frames) as advance:
        for block in source.blocks():
            est.update(block)
            if spectro is not None:
                spectro.update(block)
            advance(block.shape[0])
    result = est.result()
    unit = f"{source.unit}{result.unit_suffix}"
    ref = source.reference
    level_unit = _level_unit(source.chain.level_unit, scaling)
    if csv is not None:
        write_text_atomic(csv, format_csv(result, source.channel_indices, unit, ref))
    if plot is not None and spectro is not None:
        write_plot(plot, result, spectro, source.channel_indices, file.name, level_unit, ref)
    doc = {
        "file": str(file),
        "unit": unit,
        "level_unit": level_unit,
        "scaling": scaling,
        "sample_rate_hz": fs,
        "segment_frames": result.segment_frames,
        "overlap_frames": result.overlap_frames,
        "resolution_hz": result.resolution_hz,
        "window": window,
        "average": average,
        "enbw_hz": result.enbw_hz,
        "enbw_bins": result.enbw_bins,
        "averages": result.averages,
        "effective_averages": result.effective_averages,
        "confidence": None
        if result.ci_lower_db is None
        else {
            "level": result.confidence_level,
            "lower_db": result.ci_lower_db,
            "upper_db": result.ci_upper_db,
        },
        "channels": [
            {
                "channel": ch,
                "mean_square": float(result.mean_square()[i]),
                "frequency_hz": result.frequency_hz,
                "psd": result.psd[:, i],
            }
            for i, ch in enumerate(source.channel_indices)
        ],
    }
    if json_out:
        emit_json(doc)
    else:
        _print(doc, result, source.unit, ref, source.chain.level_unit)
    for path, what in ((csv, "table"), (plot, "plot")):
        if path is not None:
            err_console.print(f"{what} written: {path}")


def _level_unit(level_unit: str, scaling: str) -> str:
    """``dB re 20 µPa`` -> ``dB re (20 µPa)²/Hz`` for a density."""
    ref = level_unit.removeprefix("dB re ")
    return f"dB re ({ref})²/Hz" if scaling == "density" else f"dB re ({ref})²"


def format_csv(result: PSDResult, channels: tuple[int, ...], unit: str, reference: float) -> str:
    """CSV text: frequency, then the PSD and its level in dB for each channel."""
    buf = io.StringIO()
    header = ["frequency_hz"]
    for ch in channels:
        header += [f"ch{ch}_{unit}", f"ch{ch}_dB"]
    buf.write(",".join(header) + "\n")
    with np.errstate(divide="ignore"):
        levels = 10 * np.log10(result.psd / reference**2)
    for k, f in enumerate(result.frequency_hz):
        row = [f"{f:.6g}"]
        for i in range(len(channels)):
            lv = levels[k, i]
            row += [f"{result.psd[k, i]:.6e}", f"{lv:.3f}" if np.isfinite(lv) else ""]
        buf.write(",".join(row) + "\n")
    return buf.getvalue()


def write_plot(
    path: Path,
    result: PSDResult,
    spectro: Spectrogram,
    channels: tuple[int, ...],
    name: str,
    level_unit: str,
    reference: float,
) -> None:
    """PNG: PSD level of every channel over log frequency, and the first channel's
    spectrogram (time-decimated by averaging)."""
    from matplotlib.figure import Figure

    f = result.frequency_hz[1:]
    fig = Figure(figsize=(9.0, 8.0), layout="constrained")
    ax_p, ax_s = fig.subplots(2, 1)
    with np.errstate(divide="ignore"):
        for i, ch in enumerate(channels):
            ax_p.semilogx(f, 10 * np.log10(result.psd[1:, i] / reference**2), lw=0.9,
                          label=f"channel {ch}")  # fmt: skip
    ax_p.set_xlabel("frequency / Hz")
    ax_p.set_ylabel(f"PSD / {level_unit}")
    ax_p.set_title(
        f"{name}: {result.window} window, {result.resolution_hz:.3g} Hz bins, "
        f"{result.averages} averages ({result.average})"
    )
    ax_p.grid(True, which="both", alpha=0.3)
    ax_p.legend(loc="best", fontsize="small")
    s = spectro.result()
    fs_ = s.frequency_hz[1:]
    levels = s.level_db(reference)[:, 1:, 0]
    finite = levels[np.isfinite(levels)]
    top = float(finite.max()) if finite.size else 0.0
    # Cell edges: time between column centres, frequency half a bin either side.
    t = s.time_s
    dt = float(np.median(np.diff(t))) if t.size > 1 else 2 * t[0]
    t_edges = np.concatenate([t - dt / 2, [t[-1] + dt / 2]])
    df = fs_[0]
    f_edges = np.concatenate([fs_ - df / 2, [fs_[-1] + df / 2]])
    img = ax_s.pcolormesh(
        t_edges, f_edges, levels.T, vmin=top - 90, vmax=top, cmap="magma", shading="flat"
    )
    ax_s.set_yscale("log")
    ax_s.set_xlabel("time / s")
    ax_s.set_ylabel("frequency / Hz")
    most = int(s.segments_per_column.max())
    ax_s.set_title(
        f"channel {channels[0]}: {df:.3g} Hz bins, each column averages up to {most} segment(s)"
    )
    fig.colorbar(img, ax=ax_s, label=level_unit)
    with atomic_output(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)


def _print(doc: dict, result: PSDResult, unit: str, reference: float, level_unit: str) -> None:
    console.print(f"[bold]{doc['file']}[/bold]")
    ci = doc["confidence"]
    ci_text = (
        f", 95 % interval {ci['lower_db']:+.2f}/{ci['upper_db']:+.2f} dB"
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
    table.add_column(f"RMS {unit}", justify="right")
    table.add_column(f"total {level_unit}", justify="right")
    table.add_column("strongest lines (Hz: level)", justify="left")
    f = result.frequency_hz
    for i, entry in enumerate(doc["channels"]):
        ms = entry["mean_square"]
        rms = math.sqrt(ms) if ms > 0 else 0.0
        total = f"{20 * math.log10(rms / reference):.2f}" if rms > 0 else "—"
        p = result.psd[:, i]
        peaks = [k for k in range(1, p.size - 1) if p[k] >= p[k - 1] and p[k] > p[k + 1]]
        chosen: list[int] = []
        for k in sorted(peaks, key=lambda k: -p[k]):
            # Skip maxima within a few bins of a stronger one (ripple on the same line).
            if all(abs(k - c) > 4 * result.enbw_bins for c in chosen):
                chosen.append(k)
            if len(chosen) == 4:
                break
        peaks = chosen
        with np.errstate(divide="ignore"):
            text = ", ".join(
                f"{f[k]:.5g}: {10 * math.log10(p[k] / reference**2):.1f}" for k in peaks
            )
        table.add_row(str(entry["channel"]), f"{rms:.4g}", total, text)
    console.print(table)
    console.print(f"  PSD levels in {doc['level_unit']}; totals by Parseval over all bins.")
