"""``piezo impedance``: an element's impedance sweep and its equivalent circuit per mode."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.table import Table
from rich.text import Text

from piezo.chain.units import (
    format_quantity,
    format_uncertain,
    parse_frequency_range,
    parse_quantity,
)
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, err_console, print_heading, progress
from piezo.errors import InputError

#: Shown with every result (terminal and JSON).
CAUTION = (
    "A piezo element can hold a dangerous charge after a mechanical shock, a temperature "
    "change or a drive sweep: discharge it (short its electrodes through a resistor) "
    "before handling, and follow local electrical safety practice."
)


def register(app: typer.Typer) -> None:
    """Add the ``impedance`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['impedance']
    """
    app.command(
        "impedance",
        help="Impedance sweep of an element (CSV table, or a V/I capture with --shunt): "
        "fs, fp, Qm, k_eff, C0 and the Butterworth–Van Dyke circuit per mode.",
    )(impedance)


_LOSS = {"auto": None, "yes": True, "no": False}


@source_options
def impedance(
    file: Annotated[
        Path,
        typer.Argument(help="Impedance table (CSV/TSV) or, with --shunt, a V/I capture."),
    ],
    *,
    shunt: Annotated[
        str | None,
        typer.Option(
            "--shunt",
            metavar="R",
            help="Shunt resistor of a two-channel V/I capture, e.g. '100ohm'.",
        ),
    ] = None,
    voltage_channel: Annotated[
        int, typer.Option("--voltage-channel", help="Channel of the voltage across the element.")
    ] = 0,
    shunt_channel: Annotated[
        int, typer.Option("--shunt-channel", help="Channel of the voltage across the shunt.")
    ] = 1,
    segment: Annotated[
        int | None,
        typer.Option(
            "--segment",
            metavar="N",
            help="V/I: Welch segment length. Default: chosen from the resonances' widths.",
        ),
    ] = None,
    band: Annotated[
        list[str] | None,
        typer.Option(
            "--band",
            metavar="LOW:HIGH",
            help="Fit one mode in this band (repeat for several). Default: every resonance.",
        ),
    ] = None,
    dielectric_loss: Annotated[
        str,
        typer.Option(
            "--dielectric-loss",
            help="Fit R0 parallel to C0: auto (kept when significant), yes or no.",
        ),
    ] = "auto",
    at: Annotated[
        str,
        typer.Option("--at", metavar="FREQ", help="Frequency of free capacitance and tan δ."),
    ] = "1kHz",
    shape: Annotated[
        str | None,
        typer.Option(
            "--shape",
            help="Mode of the lowest resonance for the material coupling: thickness (k_t), "
            "radial (k_p), length (k_33), transverse (k_31), shear (k_15).",
        ),
    ] = None,
    plot: Annotated[
        Path | None,
        typer.Option("--plot", metavar="OUT.png", help="Draw |Z| and phase with the fit."),
    ] = None,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Fit the Butterworth–Van Dyke circuit to each resonance of an element.

    Reports fs, fp, fm, fn, fr, fa, C0, R1, L1, C1 (and R0), Qm = √(L1/C1)/R1 and
    k_eff² = (fp² − fs²)/fp² with standard uncertainties from the fit (IEEE Std 176),
    the free capacitance and tan δ at --at, and with --shape the material coupling
    (EN 50324-2). See docs/element.md.

    Examples
    --------
    k_eff² = (fp² − fs²)/fp² (IEEE Std 176-1987): 1 − (28899.9/30542.7)² gives
    k_eff = 0.3235:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["impedance", "recordings/element-lot/impedance/EL-29101.csv", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "fs_hz": 28899.8..., "fp_hz": 30542.7..., ... "k_eff": 0.3235..., ...}
    0
    """
    from piezo.element.bvd import SHAPES, analyse_impedance
    from piezo.element.impedance import read_impedance_csv
    from piezo.element.vi import measure_impedance
    from piezo.io.reader import CSV_SUFFIXES

    if dielectric_loss not in _LOSS:
        raise InputError(f"--dielectric-loss must be auto, yes or no; got {dielectric_loss!r}")
    if shape is not None and shape not in SHAPES:
        raise InputError(f"--shape must be one of {', '.join(SHAPES)}; got {shape!r}")
    at_hz = parse_quantity(at, "Hz", what="--at")
    if not at_hz > 0:
        raise InputError(f"--at must be a positive frequency, got {at!r}")
    bands = (
        [parse_frequency_range(b, what="--band", positive=True) for b in band] if band else None
    )
    measurement: dict[str, Any] | None = None
    if shunt is None:
        if file.suffix.lower() not in CSV_SUFFIXES:
            raise InputError(
                "an audio recording is a V/I capture: give the shunt resistor with --shunt",
                source=str(file),
            )
        sweep = read_impedance_csv(file)
    else:
        shunt_ohm = parse_quantity(shunt, "Ohm", what="--shunt")
        if not shunt_ohm > 0:
            raise InputError(f"--shunt must be a positive resistance, got {shunt!r}")
        source = open_source(file, src)
        if source.unit != "V":
            raise InputError(
                f"a V/I capture must be in volts, but the chain gives {source.unit} (a "
                "sensitivity from a profile?): use --no-sidecar",
                source=str(file),
            )
        n_ch = len(source.channel_indices)
        for ch, what in (
            (voltage_channel, "--voltage-channel"),
            (shunt_channel, "--shunt-channel"),
        ):
            if not 0 <= ch < n_ch:
                raise InputError(
                    f"{what} {ch} is not one of the {n_ch} channel(s)", source=str(file)
                )
        with progress(f"Impedance of {file.name}", None):
            m = measure_impedance(
                source.blocks, source.sample_rate_hz, n_ch, source.frames, shunt_ohm=shunt_ohm,
                voltage_channel=voltage_channel, shunt_channel=shunt_channel,
                segment_frames=segment,
            )  # fmt: skip
        sweep = m.sweep
        measurement = {
            "shunt_ohm": shunt_ohm,
            "voltage_channel": voltage_channel,
            "shunt_channel": shunt_channel,
            "sample_rate_hz": source.sample_rate_hz,
            "segment_frames": m.segment_frames,
            "resolution_hz": source.sample_rate_hz / m.segment_frames,
            "passes": m.passes,
            "narrowest_bandwidth_hz": m.narrowest_bandwidth_hz,
            "bins_per_bandwidth": m.bins_per_bandwidth,
            "notes": list(m.notes),
        }
    try:
        analysis = analyse_impedance(
            sweep, bands_hz=bands, dielectric_loss=_LOSS[dielectric_loss],
            low_frequency_hz=at_hz, shape=shape,
        )  # fmt: skip
    except InputError as exc:
        raise exc.with_source(str(file)) from None
    doc = _document(file, analysis, measurement)
    if plot is not None:
        from piezo.io.atomic import write_bytes_atomic
        from piezo.plots.element import impedance_figure

        write_bytes_atomic(plot, impedance_figure(analysis, file.name))
    if json_out:
        emit_json(doc)
    else:
        _print(doc)
    if plot is not None:
        err_console.print(f"plot written: {plot}")


#: Mode quantities in the JSON document, in order: (key, attribute).
MODE_KEYS = (
    ("fs_hz", "fs_hz"), ("fp_hz", "fp_hz"), ("fm_hz", "fm_hz"), ("fn_hz", "fn_hz"),
    ("fr_hz", "fr_hz"), ("fa_hz", "fa_hz"), ("C0_f", "c0_f"), ("R1_ohm", "r1_ohm"),
    ("L1_h", "l1_h"), ("C1_f", "c1_f"), ("R0_ohm", "r0_ohm"), ("Qm", "qm"), ("k_eff", "k_eff"),
)  # fmt: skip


def _document(file: Path, analysis: Any, measurement: dict[str, Any] | None) -> dict[str, Any]:
    """The ``--json`` document of one sweep."""
    sweep = analysis.sweep
    modes = []
    for m in analysis.modes:
        entry: dict[str, Any] = {"model": m.model, "band_hz": list(m.band_hz), "points": m.points}
        entry.update({key: getattr(m, attr) for key, attr in MODE_KEYS})
        entry["uncertainty"] = {key: m.u.get(attr) for key, attr in MODE_KEYS}
        entry["residual_rms"] = m.residual_rms
        if sweep.coherence is not None:
            sel = (sweep.frequency_hz >= m.band_hz[0]) & (sweep.frequency_hz <= m.band_hz[1])
            entry["min_coherence"] = float(sweep.coherence[sel].min())
        modes.append(entry)
    material = None
    if analysis.material is not None:
        mat = analysis.material
        material = {"shape": mat.shape, "symbol": mat.symbol, "value": mat.value,
                    "uncertainty": mat.u, "relation": mat.relation}  # fmt: skip
    return {
        "file": str(file),
        "source": "V/I capture" if measurement is not None else "impedance table",
        "form": sweep.form,
        "points": int(sweep.frequency_hz.size),
        "frequency_range_hz": [float(sweep.frequency_hz[0]), float(sweep.frequency_hz[-1])],
        "measurement": measurement,
        "modes": modes,
        "low_frequency_hz": analysis.low_frequency_hz,
        "free_capacitance_f": analysis.free_capacitance_f,
        "tan_delta": analysis.tan_delta,
        "capacitance_source": analysis.capacitance_source,
        "material_coupling": material,
        "standard": "IEEE Std 176-1987 equivalent circuit; EN 50324-2 (IEC 60483) couplings",
        "uncertainty_note": "standard uncertainties (k = 1) from the fit's covariance",
        "caution": CAUTION,
    }


def _q(value: float | None, unit: str, u: float | None = None, digits: int = 5) -> str:
    if value is None or not math.isfinite(value):
        return "—"
    if u is not None and math.isfinite(u):
        # Printed expanded (k = 2), value and uncertainty rounded together (GUM 7.2.6).
        return format_uncertain(value, u, unit, si_prefix=True)
    return format_quantity(value, unit, digits=digits) if unit else f"{value:.{digits}g}"


def _print(doc: dict[str, Any]) -> None:
    print_heading(doc["file"])
    lo, hi = doc["frequency_range_hz"]
    console.print(
        f"  {doc['source']} ({doc['form']}), {doc['points']} points from "
        f"{format_quantity(lo, 'Hz')} to {format_quantity(hi, 'Hz')}"
    )
    meas = doc["measurement"]
    if meas is not None:
        bins = meas["bins_per_bandwidth"]
        console.print(
            f"  V/I with a {format_quantity(meas['shunt_ohm'], 'Ω')} shunt: "
            f"{meas['segment_frames']}-sample segments ({meas['resolution_hz']:.3g} Hz), "
            f"{meas['passes']} pass(es)"
            + (f", {bins:.1f} bins in the narrowest resonance" if bins is not None else "")
        )
        for note in meas["notes"]:
            console.print(Text.assemble("  ", ("note:", "yellow"), f" {note}"))
    if not doc["modes"]:
        console.print("  no resonance found")
    units = {"fs_hz": "Hz", "fp_hz": "Hz", "fm_hz": "Hz", "fn_hz": "Hz", "fr_hz": "Hz",
             "fa_hz": "Hz", "C0_f": "F", "R1_ohm": "Ω", "L1_h": "H", "C1_f": "F",
             "R0_ohm": "Ω", "Qm": "", "k_eff": ""}  # fmt: skip
    labels = {
        "fs_hz": "fs", "fp_hz": "fp", "fm_hz": "fm (|Z| min)", "fn_hz": "fn (|Z| max)",
        "fr_hz": "fr (phase 0)", "fa_hz": "fa (phase 0)", "C0_f": "C0", "R1_ohm": "R1",
        "L1_h": "L1", "C1_f": "C1", "R0_ohm": "R0", "Qm": "Qm", "k_eff": "k_eff",
    }  # fmt: skip
    if doc["modes"]:
        table = Table(box=None, pad_edge=False, header_style="bold")
        table.add_column("quantity")
        for i, m in enumerate(doc["modes"]):
            table.add_column(f"mode {i + 1} ({m['model']})", justify="right")
        for key, _ in MODE_KEYS:
            cells = [_q(m[key], units[key], m["uncertainty"][key]) for m in doc["modes"]]
            if all(c == "—" for c in cells):
                continue
            table.add_row(labels[key], *cells)
        table.add_row("fit residual", *(f"{100 * m['residual_rms']:.2g} %" for m in doc["modes"]))
        if meas is not None:
            table.add_row("min coherence", *(f"{m['min_coherence']:.3f}" for m in doc["modes"]))
        console.print(table)
    if doc["free_capacitance_f"] is not None:
        console.print(
            f"  at {format_quantity(doc['low_frequency_hz'], 'Hz')}: free capacitance "
            f"{_q(doc['free_capacitance_f'], 'F')}, tan δ {doc['tan_delta']:.3g} "
            f"({doc['capacitance_source']})"
        )
    mat = doc["material_coupling"]
    if mat is not None:
        console.print(
            f"  material coupling {mat['symbol']} = {_q(mat['value'], '', mat['uncertainty'], 4)}"
            f" ({mat['shape']} mode; {mat['relation']})"
        )
    console.print(
        "  uncertainties: expanded (k = 2) from the fit's covariance; standard (k = 1) in --json"
    )
    console.print(doc["caution"], style="dim")
