"""``piezo frontend``, ``piezo simulate``, ``piezo equalize``: the front-end model.

``frontend`` reports what a sensor + cable + amplifier design does (sensitivity, corner,
bands, phase, noise budget, self-noise) and trade-off tables; ``simulate`` shapes a
recording as the front-end would; ``equalize`` undoes a front-end's low-frequency
roll-off down to a lower corner.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import soundfile as sf
import typer
from rich.table import Table

from piezo.chain.measurement import REFERENCE_AIR_PA, CalibratedSource, Chain, sidecar_path
from piezo.chain.quantity import QUANTITIES, Sensitivity, compact_sensitivity
from piezo.chain.units import (
    format_quantity,
    parse_frequency_list,
    parse_frequency_range,
    parse_quantity,
)
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import (
    ForceOption,
    atomic_output,
    console,
    emit_json,
    print_heading,
    progress,
    refuse_existing,
)
from piezo.errors import InputError
from piezo.frontend.filters import Equalizer, FrontendFilter
from piezo.frontend.model import (
    design_key_unit,
    frontend_from_mapping,
    read_design,
    summarise_response,
)
from piezo.frontend.study import CAUTION, study_frontend, vary_values
from piezo.io.atomic import write_text_atomic
from piezo.io.toml import toml_value
from piezo.plots.frontend import write_plot as _plot
from piezo.plots.style import axis_label
from piezo.results import reference_key, shared_value

#: Output formats that hold 32-bit float samples (values beyond ±1 survive).
_FLOAT_FORMATS = {".wav": "WAV", ".w64": "W64", ".rf64": "RF64", ".caf": "CAF", ".aiff": "AIFF"}

DesignArgument = Annotated[
    Path, typer.Argument(help="Front-end design (TOML), see docs/frontend.md.")
]
FrontendOption = Annotated[
    Path, typer.Option("--frontend", metavar="DESIGN", help="Front-end design (TOML).")
]
OutOption = Annotated[
    Path, typer.Option("--out", metavar="OUT", help="Output audio file (.wav, .w64, .rf64, .caf).")
]


def register(app: typer.Typer) -> None:
    """Add ``frontend``, ``simulate`` and ``equalize`` to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['frontend', 'simulate', 'equalize']
    """
    app.command(
        "frontend",
        help="Sensitivity, corner, bands, phase, noise budget and self-noise of a design.",
    )(frontend)
    app.command("simulate", help="Shape a recording (pressure or charge) as a front-end would.")(
        simulate
    )
    app.command(
        "equalize", help="Undo a front-end's low-frequency roll-off down to a lower corner."
    )(equalize)


# --------------------------------------------------------------------------- frontend


def _parse_vary(text: str) -> tuple[str, np.ndarray]:
    name, sep, spec = text.partition("=")
    parts = spec.split(":")
    if not sep or len(parts) != 3:
        raise InputError(
            f"--vary {text!r}: expected NAME=LO:HI:N, e.g. feedback_resistance=100M:10G:5"
        )
    name = name.strip()
    try:
        count = int(parts[2])
    except ValueError:
        raise InputError(f"--vary {text!r}: N must be a whole number, got {parts[2]!r}") from None
    try:
        return name, vary_values(name, parts[0].strip(), parts[1].strip(), count)
    except InputError as exc:
        raise InputError(f"--vary: {exc.message}") from None


def frontend(
    design: DesignArgument,
    *,
    at: Annotated[
        str,
        typer.Option(
            "--at", metavar="FREQS", help="Frequencies for the phase table, e.g. '10Hz,100Hz'."
        ),
    ] = "1Hz,10Hz,100Hz,1kHz,10kHz",
    plot: Annotated[
        Path | None,
        typer.Option(
            "--plot", metavar="PNG", help="Draw magnitude, phase and noise to this image."
        ),
    ] = None,
    vary: Annotated[
        str | None,
        typer.Option(
            "--vary",
            metavar="NAME=LO:HI:N",
            help="Trade-off table over one design value, log-spaced, "
            "e.g. feedback_resistance=100M:10G:5.",
        ),
    ] = None,
    force: ForceOption = False,
    noise_band: Annotated[
        str,
        typer.Option(
            "--noise-band",
            metavar="LOW:HIGH",
            help="Band of the self-noise, e.g. '10Hz:100kHz' for a hydrophone or "
            "'1Hz:10kHz' for vibration.",
        ),
    ] = "20Hz:20kHz",
    json_out: JsonOption = False,
) -> None:
    """Model a piezo front-end from its design file.

    Prints the midband sensitivity, the -3 dB corner and time constant, the ±1 dB and
    ±3 dB bands (low end from the high-pass, high end from the resonance or the op-amp),
    level and phase at --at frequencies, the noise budget per source, the A-weighted
    self-noise (dB re 20 µPa, 20 Hz–20 kHz) and the dynamic range to the clip level.

    Examples
    --------
    The corner of a first-order high-pass is 1/(2π τ): 1/(2π · 0.124 s) = 1.2835 Hz:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["frontend", "recordings/designs/film-buffer-voltage.toml", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "corner_hz": 1.2835..., "time_constant_s": 0.124..., ...}
    0
    """
    refuse_existing(plot, force=force)
    at_hz = tuple(parse_frequency_list(at, what="--at"))
    noise_band_hz = parse_frequency_range(noise_band, what="--noise-band", positive=True)
    varied = _parse_vary(vary) if vary is not None else None
    study = study_frontend(design, at_hz=at_hz, vary=varied, noise_band_hz=noise_band_hz)
    fe = study.frontend
    doc = study.to_dict()
    rows = doc["vary"]["rows"] if varied is not None else None
    if plot is not None:
        _plot(fe, plot, title=fe.name or design.name)
        doc["plot"] = str(plot)
    if json_out:
        emit_json(doc)
        return
    _print_design(doc)
    if rows is not None:
        _print_vary(doc["vary"]["name"], rows)
    if plot is not None:
        console.print(f"plot written to {plot}")
    console.print(CAUTION, style="yellow")


def _q(value: float | None, unit: str, digits: int = 4) -> str:
    if value is None or not math.isfinite(value):
        return "—"
    return format_quantity(value, unit, digits=digits)


def _band_text(band: list[float | None] | None) -> str:
    if band is None:
        return "none (the response is never within the tolerance)"
    lo, hi = band
    high = "no upper limit in the model" if hi is None else _q(hi, "Hz")
    return f"{_q(lo, 'Hz')} to {high}"


def _num(value: float | None, spec: str) -> str:
    return "—" if value is None or not math.isfinite(value) else format(value, spec)


def _print_design(doc: dict[str, Any]) -> None:
    title = f"{doc['design']}" + (f" — {doc['name']}" if doc["name"] else "")
    print_heading(title)
    kind = "charge amplifier" if doc["amplifier"] == "charge" else "voltage amplifier"
    lines = [
        ("front-end", kind + (", inverting output" if doc["inverting"] else "")),
        (
            "sensitivity",
            f"{doc['sensitivity_mv_per_pa']:.4g} mV/Pa "
            f"({doc['sensitivity_dbv_per_pa']:.2f} dB re 1 V/Pa)",
        ),
        ("charge gain", f"{doc['charge_gain_mv_per_pc']:.4g} mV/pC"),
    ]
    if doc["divider_ratio"] is not None:
        ratio = doc["divider_ratio"]
        lines.append(("capacitive divider", f"{ratio:.4g} ({20 * math.log10(ratio):.2f} dB)"))
    lines += [
        (
            "-3 dB corner",
            f"{_q(doc['corner_hz'], 'Hz')} (time constant {_q(doc['time_constant_s'], 's')})",
        ),
        ("±1 dB band", _band_text(doc["band_1db_hz"])),
        ("±3 dB band", _band_text(doc["band_3db_hz"])),
        ("noise gain", f"{doc['noise_gain_midband']:.4g} (midband)"),
        (
            "self-noise",
            f"{doc['self_noise_dba']:.1f} dB(A) re 20 µPa; unweighted "
            f"{doc['self_noise_unweighted_db']:.1f} dB over "
            f"{_q(doc['noise_band_hz'][0], 'Hz')}–{_q(doc['noise_band_hz'][1], 'Hz')}",
        ),
    ]
    if doc["clip_level_v"] is not None:
        lines.append(
            (
                "clip",
                f"{doc['clip_level_v']:.4g} V peak = {doc['max_spl_db']:.1f} dB re 20 µPa "
                f"(midband sine); dynamic range {doc['dynamic_range_db']:.1f} dB",
            )
        )
    width = max(len(k) for k, _ in lines)
    for key, value in lines:
        console.print(f"  {key:<{width}}  {value}")

    if doc["phase"]:
        table = Table(
            title="Response re midband", box=None, header_style="bold", title_justify="left"
        )
        table.add_column("frequency", justify="right")
        table.add_column(axis_label("level", "dB"), justify="right")
        table.add_column(axis_label("phase", "°"), justify="right")
        for row in doc["phase"]:
            table.add_row(
                _q(row["frequency_hz"], "Hz"),
                f"{row['level_db']:+.3f}",
                f"{row['phase_deg']:+.2f}",
            )
        console.print(table)

    ref = _q(doc["noise_reference_hz"], "Hz")
    table = Table(
        title=f"Noise budget (densities at {ref}, A-weighted over "
        f"{_q(doc['noise_band_hz'][0], 'Hz')}–{_q(doc['noise_band_hz'][1], 'Hz')})",
        box=None,
        header_style="bold",
        title_justify="left",
    )
    table.add_column("source")
    table.add_column("output", justify="right")
    table.add_column("input", justify="right")
    table.add_column(axis_label("A-weighted", "dB re 20 µPa"), justify="right")
    table.add_column("share", justify="right")
    for s in doc["noise_budget"]:
        table.add_row(
            s["label"],
            _q(s["output_v_per_sqrt_hz"], "V/√Hz", 3),
            _q(s["input_pa_per_sqrt_hz"], "Pa/√Hz", 3),
            _num(s["a_weighted_db"], ".1f"),
            f"{100 * s['share']:.1f} %",
        )
    table.add_row("total", "", "", f"{doc['self_noise_dba']:.1f}", "100 %", style="bold")
    console.print(table)


_UNIT_SYMBOLS = {
    "Ohm": "Ω",
    "V/sqrtHz": "V/√Hz",
    "A/sqrtHz": "A/√Hz",
    "gain": "",
    "V/V": "",
    "temperature": "K",
    "sensitivity": "V/Pa",
}


def _print_vary(name: str, rows: list[dict[str, Any]]) -> None:
    unit = design_key_unit(name)
    symbol = _UNIT_SYMBOLS.get(unit, unit)
    table = Table(
        title=f"Trade-off over {name}", box=None, header_style="bold", title_justify="left"
    )
    columns = ("value", "mV/Pa", "corner", "τ", "±1 dB from", "to", "dB(A)", "NG", "DR dB")
    for col in columns:
        table.add_column(col, justify="right")
    for row in rows:
        band = row["band_1db_hz"] or [None, None]
        value = _q(row["value"], symbol, 3) if symbol else format(row["value"], ".4g")
        table.add_row(
            value,
            f"{row['sensitivity_mv_per_pa']:.4g}",
            _q(row["corner_hz"], "Hz", 3),
            _q(row["time_constant_s"], "s", 3),
            _q(band[0], "Hz", 3),
            _q(band[1], "Hz", 3),
            f"{row['self_noise_dba']:.1f}",
            f"{row['noise_gain_midband']:.3g}",
            _num(row["dynamic_range_db"], ".1f"),
        )
    console.print(table)
    console.print("  NG: noise gain (midband); DR: dynamic range to the clip level")


# --------------------------------------------------------------------------- recordings


def _check_output(file: Path, out: Path, force: bool) -> str:
    fmt = _FLOAT_FORMATS.get(out.suffix.lower())
    if fmt is None:
        raise InputError(
            f"--out {out}: write a format that holds float samples ({', '.join(_FLOAT_FORMATS)})"
        )
    if out.exists() and out.resolve() == file.resolve():
        raise InputError(f"--out {out} is the input file; write to a new file")
    refuse_existing(out, force=force)
    return fmt


def _integer_rate(sample_rate_hz: float) -> int:
    rate = round(sample_rate_hz)
    if rate <= 0 or abs(rate - sample_rate_hz) > 1e-6 * sample_rate_hz:
        raise InputError(
            f"sample rate {sample_rate_hz!r} Hz is not a whole number of hertz; audio files "
            "need one (give --rate)"
        )
    return rate


def _realisation_text(max_error_db: float, band: tuple[float, float], phase: float) -> str:
    return (
        f"digital realisation within {max_error_db:.3f} dB of the model over "
        f"{_q(band[0], 'Hz')}–{_q(band[1], 'Hz')} (phase within {phase:.1f}°)"
    )


@source_options
def simulate(
    file: Annotated[Path, typer.Argument(help="Recording of the sensor's pressure (or charge).")],
    *,
    frontend_path: FrontendOption,
    out: OutOption,
    input_kind: Annotated[
        str,
        typer.Option(
            "--input",
            metavar="KIND",
            help="'pressure' (calibrated recording, Pa) or 'charge' (with --charge-unit).",
        ),
    ] = "pressure",
    charge_unit: Annotated[
        str | None,
        typer.Option(
            "--charge-unit",
            metavar="CHARGE",
            help="With --input charge: the charge one volt of samples stands for, e.g. '1 pC'.",
        ),
    ] = None,
    no_clip: Annotated[
        bool, typer.Option("--no-clip", help="Do not limit the output at the design's clip level.")
    ] = False,
    force: ForceOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Shape a recording as the front-end would and write the amplifier output in volts.

    The recording is taken as the sensor's pressure (calibrate it with --sensitivity, a
    profile or a sidecar; samples already in pascals: --sensitivity '1 V/Pa') or, with
    --input charge, as the sensor's charge. The output is a 32-bit float file of volts at
    the amplifier output: read it back with --full-scale 1V.

    Examples
    --------
    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["simulate", "recordings/pd27-golden/PD27-23001.flac",
    ...               "--frontend", "recordings/designs/film-buffer-voltage.toml",
    ...               "--sensitivity", "1 V/Pa", "--out", f"{tmp}/out.wav", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "input": "pressure", ... "output_unit": "V", ... "corner_hz": 1.2835..., ...}
    0
    """
    if input_kind not in ("pressure", "charge"):
        raise InputError(f"--input must be 'pressure' or 'charge', got {input_kind!r}")
    fe = frontend_from_mapping(read_design(frontend_path), source=str(frontend_path))
    fmt = _check_output(file, out, force)
    source = open_source(file, src)
    scale = 1.0
    if input_kind == "pressure":
        if source.unit != "Pa":
            raise InputError(
                "simulate takes the recording as the sensor's pressure: give its sensitivity "
                "(--sensitivity, --profile or a sidecar); for samples already in pascals use "
                "--sensitivity '1 V/Pa'",
                source=str(file),
            )
    else:
        if charge_unit is None:
            raise InputError("--input charge needs --charge-unit, e.g. '1 pC' per volt of samples")
        scale = parse_quantity(charge_unit, "C", what="--charge-unit")
        if source.unit != "V":
            raise InputError(
                "--input charge reads the samples as volts standing for charge; drop the "
                "sensitivity (--no-sidecar if a sidecar gives one)",
                source=str(file),
            )
    rate = _integer_rate(source.sample_rate_hz)
    channels = len(source.channel_indices)
    filt = FrontendFilter(
        source.sample_rate_hz,
        channels,
        frontend=fe,
        input="charge" if input_kind == "charge" else "pressure",
        clip=not no_clip,
    )
    with atomic_output(out) as tmp:
        with sf.SoundFile(
            str(tmp), "w", samplerate=rate, channels=channels, format=fmt, subtype="FLOAT"
        ) as sink:
            with progress(f"Simulating {file.name}", source.frames) as advance:
                for block in source.blocks():
                    sink.write(filt.update(block * scale))
                    advance(block.shape[0])
    result = filt.result()
    summary = summarise_response(fe)
    doc = {
        "file": str(file),
        "frontend": str(frontend_path),
        "out": str(out),
        "input": input_kind,
        "sample_rate_hz": source.sample_rate_hz,
        "frames": result.frames,
        "channels": list(source.channel_indices),
        "output_unit": "V",
        "sensitivity_mv_per_pa": 1e3 * summary.sensitivity_v_per_pa,
        "corner_hz": summary.corner_hz,
        "peak_v": list(result.peak_v),
        "clip_level_v": result.clip_level_v,
        "clipped_samples": list(result.clipped_samples),
        "max_error_db": result.max_error_db,
        "max_phase_error_deg": filt.realisation.max_phase_error_deg,
        "check_band_hz": list(result.check_band_hz),
        "caution": CAUTION,
    }
    if json_out:
        emit_json(doc)
        return
    console.print(
        f"wrote {out}: {result.frames} frames × {channels} channel(s), 32-bit float, volts at "
        f"the amplifier output (read it back with --full-scale 1V; sensitivity "
        f"{doc['sensitivity_mv_per_pa']:.4g} mV/Pa)"
    )
    for ch, peak, clipped in zip(
        source.channel_indices, result.peak_v, result.clipped_samples, strict=True
    ):
        note = f", {clipped} samples clipped at ±{result.clip_level_v:g} V" if clipped else ""
        console.print(f"  channel {ch}: peak {peak:.4g} V{note}")
    console.print(
        "  "
        + _realisation_text(
            result.max_error_db, result.check_band_hz, filt.realisation.max_phase_error_deg
        )
    )
    console.print(CAUTION, style="yellow")


def _peaks_in_units(peaks: Sequence[float], units: Sequence[str]) -> dict[str, Any]:
    """``output_peak_pa`` (or ``_v``, ``_m_per_s2`` ...) when the channels share a unit;
    else ``output_peak`` with ``output_peak_units``, each channel in its own."""
    unit = shared_value(list(units))
    if unit is not None:
        return {reference_key(unit).replace("reference_", "output_peak_", 1): list(peaks)}
    return {"output_peak": list(peaks), "output_peak_units": list(units)}


def _equalized_gain(file: Path, source: CalibratedSource) -> float:
    """The one sidecar gain of an equalized output: the chains' gain over full scale.

    The output keeps each channel's raw sample scale; a sidecar states one gain for the
    file (``[chain]``) and a sensor per channel (``[channel.N]``), so channels with
    different gains or full scales (per-channel options) cannot be written back.
    """
    pcm = source.recording.is_pcm
    gains = {c.gain / (c.full_scale_v if pcm else 1.0) for c in source.chains}
    if len(gains) > 1:
        raise InputError(
            "equalize writes one gain for the output's sidecar, and these channels have "
            "different gains or full scales: equalize them one at a time (--channel N)",
            source=str(file),
        )
    if any(c.integrations for c in source.chains):
        raise InputError(
            "equalize writes the sensor's own quantity: drop --integrate (integrate the "
            "equalized file instead)",
            source=str(file),
        )
    return gains.pop()


def _sensor_lines(chain: Chain) -> list[str]:
    if chain.sensitivity_v_per_unit is None:
        return []
    s = Sensitivity(chain.sensitivity_v_per_unit, "V", QUANTITIES[chain.quantity])
    return [
        f"quantity = {toml_value(chain.quantity)}",
        f"sensitivity = {toml_value(compact_sensitivity(s, digits=10))}",
    ]


def _write_equalized_sidecar(file: Path, out: Path, source: CalibratedSource) -> Path:
    """The output's sidecar profile: the input's chains for the output's float samples.

    The samples keep each channel's input scale; a float file is not scaled by a
    full-scale voltage, so the sidecar's gain takes it in (gain / full scale for a PCM
    input). The response curve is not repeated: the output is already corrected by it.
    Channels are numbered as in the output (the analysed channels, from 0).
    """
    gain = _equalized_gain(file, source)
    chains = source.chains
    lines = [
        f"# Sidecar of {out.name}, written by piezo equalize from {file.name}: the samples",
        "# keep the input's scale, so this chain reads them in the input's units.",
    ]
    if len({(c.quantity, c.sensitivity_v_per_unit) for c in chains}) == 1:
        sensor = _sensor_lines(chains[0])
        lines += ["[sensor]", *sensor] if sensor else []
    else:
        for i, chain in enumerate(chains):
            sensor = _sensor_lines(chain)
            lines += [f"[channel.{i}]", *sensor] if sensor else []
    lines += ["[chain]", f"gain = {toml_value(f'{gain:.12g}')}"]
    if chains[0].reference_pa != REFERENCE_AIR_PA:
        lines.append(f"reference = {toml_value(f'{chains[0].reference_pa:.10g} Pa')}")
    path = sidecar_path(out)
    write_text_atomic(path, "\n".join(lines) + "\n")
    return path


@source_options
def equalize(
    file: Annotated[Path, typer.Argument(help="Recording made through the front-end.")],
    *,
    frontend_path: FrontendOption,
    corner: Annotated[
        str, typer.Option("--corner", metavar="FREQ", help="New -3 dB corner, e.g. '0.5Hz'.")
    ],
    out: OutOption,
    max_boost: Annotated[
        float,
        typer.Option(
            "--max-boost", metavar="DB", help="Largest low-frequency boost accepted, dB."
        ),
    ] = 40.0,
    force: ForceOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Undo the front-end's high-pass and put a lower corner in its place.

    A stable shelf (s + ωc)/(s + ωt) is applied: the midband is unchanged and the gain
    towards DC rises by ωc/ωt, which also amplifies any noise, drift or offset the
    recording holds below the old corner. The output keeps the input's sample scale (so
    the same chain options and profile apply) as a 32-bit float file.

    Examples
    --------
    Moving the corner from 1.2835 Hz to 1 Hz boosts towards DC by 20·lg(1.2835) = 2.17 dB:

    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["equalize", "recordings/pd27-golden/PD27-23001.flac",
    ...               "--frontend", "recordings/designs/film-buffer-voltage.toml",
    ...               "--corner", "1Hz", "--out", f"{tmp}/eq.wav", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "model_corner_hz": 1.2835..., "target_corner_hz": 1.0, "boost_db": 2.16..., ...}
    0
    """
    fe = frontend_from_mapping(read_design(frontend_path), source=str(frontend_path))
    target_hz = parse_quantity(corner, "Hz", what="--corner")
    fmt = _check_output(file, out, force)
    source = open_source(file, src)
    _equalized_gain(file, source)  # refused before anything is written
    rate = _integer_rate(source.sample_rate_hz)
    channels = len(source.channel_indices)
    scales = source.scales
    eq = Equalizer(
        source.sample_rate_hz,
        channels,
        frontend=fe,
        target_corner_hz=target_hz,
        max_boost_db=max_boost,
    )
    with atomic_output(out) as tmp:
        with sf.SoundFile(
            str(tmp), "w", samplerate=rate, channels=channels, format=fmt, subtype="FLOAT"
        ) as sink:
            with progress(f"Equalizing {file.name}", source.frames) as advance:
                for block in source.blocks():
                    sink.write(eq.update(block) / scales)
                    advance(block.shape[0])
    result = eq.result()
    profile = _write_equalized_sidecar(file, out, source)
    probe = np.geomspace(target_hz / 10, result.model_corner_hz * 10, 5)
    doc: dict[str, Any] = {
        "file": str(file),
        "frontend": str(frontend_path),
        "out": str(out),
        "sample_rate_hz": source.sample_rate_hz,
        "frames": result.frames,
        "channels": list(source.channel_indices),
        "model_corner_hz": result.model_corner_hz,
        "target_corner_hz": result.target_corner_hz,
        "boost_db": result.boost_db,
        "boost_at": [
            {"frequency_hz": float(f), "boost_db": float(b)}
            for f, b in zip(probe, eq.boost_at_db(probe), strict=True)
        ],
        "output_peak_fs": [p / k for p, k in zip(result.peak, scales, strict=True)],
        **_peaks_in_units(result.peak, source.units),
        "profile_written": str(profile),
        "max_error_db": result.max_error_db,
        "max_phase_error_deg": eq.realisation.max_phase_error_deg,
        "check_band_hz": list(result.check_band_hz),
    }
    if json_out:
        emit_json(doc)
        return
    console.print(
        f"wrote {out}: {result.frames} frames × {channels} channel(s), 32-bit float, same "
        f"sample scale as the input; its chain in {doc['profile_written']}"
    )
    console.print(
        f"  corner {_q(result.model_corner_hz, 'Hz')} → {_q(result.target_corner_hz, 'Hz')}; "
        f"low-frequency boost up to {result.boost_db:.1f} dB: noise, drift and offsets below "
        f"{_q(result.model_corner_hz, 'Hz')} are amplified by as much"
    )
    table = Table(box=None, header_style="bold")
    table.add_column("frequency", justify="right")
    table.add_column(axis_label("boost", "dB"), justify="right")
    for row in doc["boost_at"]:
        table.add_row(_q(row["frequency_hz"], "Hz"), f"{row['boost_db']:+.2f}")
    console.print(table)
    console.print(
        "  "
        + _realisation_text(
            result.max_error_db, result.check_band_hz, eq.realisation.max_phase_error_deg
        )
    )
