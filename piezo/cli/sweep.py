"""``piezo sweep``: make a sweep or noise stimulus, analyse a swept-sine capture.

``piezo sweep make`` writes the stimulus WAV and, beside it, ``NAME.stimulus.toml`` with
every parameter (so analysis rebuilds the inverse filter exactly). The suffix keeps it
apart from the chain profile ``NAME.toml`` that every command reads beside a recording.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Annotated

import numpy as np
import soundfile as sf
import typer

from piezo.chain.measurement import CalibratedSource
from piezo.chain.quantity import QUANTITIES, Quantity, parse_level_of, with_article
from piezo.chain.units import (
    parse_duration,
    parse_frequency,
    parse_frequency_list,
    parse_quantity,
)
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import (
    ForceOption,
    atomic_output,
    console,
    emit_json,
    err_console,
    print_heading,
    refuse_existing,
    write_text_atomic,
)
from piezo.cli.response import (
    CsvOption,
    PlotOption,
    PointsOption,
    ReferenceFrequencyOption,
    SmoothOption,
    print_fit,
    write_csv,
)
from piezo.errors import InputError, SpecError, UnitError
from piezo.io.reader import open_recording
from piezo.plots.response import write_plot
from piezo.response.fit import (
    ResponseTable,
    read_response_table,
)
from piezo.response.stimulus import (
    NoiseSpec,
    SweepSpec,
    noise_signal,
    read_stimulus,
    sweep_signal,
    sweep_spec,
)
from piezo.response.summary import stimulus_document, sweep_response_of

STIMULUS_SUFFIX = ".stimulus.toml"
SUBTYPES = ("PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE")

sweep_app = typer.Typer(
    name="sweep",
    help="Swept-sine measurement: make the stimulus, analyse the capture.",
    no_args_is_help=True,
)


def register(app: typer.Typer) -> None:
    """Add the ``sweep`` command group to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [group.name for group in app.registered_groups]
    ['sweep']
    """
    app.add_typer(sweep_app, name="sweep")


def _stimulus_sidecar(wav: Path) -> Path:
    """``NAME.stimulus.toml`` beside ``NAME.wav``."""
    return wav.with_name(wav.stem + STIMULUS_SUFFIX)


_LEVEL_RE = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+))\s*(?:dBFS|dB)?\s*$", re.IGNORECASE)


def _parse_level(text: str) -> float:
    m = _LEVEL_RE.match(text)
    if not m:
        raise InputError(f"--level: cannot read {text!r}; give dBFS, e.g. '-6' or '-6 dBFS'")
    return float(m.group(1))


def _sensor_level(
    text: str, *, what: str, reference: float | None
) -> tuple[float, Quantity | None]:
    """The sweep's RMS amount at the sensor from ``--level`` / ``--sensor-level`` (any
    quantity, by its unit) or ``--acoustic-level`` (sound pressure only), read by the one
    level parser; a bare number in dB is re ``reference`` and names no quantity.

    Examples
    --------
    >>> value, q = _sensor_level("1 g", what="--level", reference=None)
    >>> value, q.name
    (9.80665, 'acceleration')
    >>> _sensor_level("1 g", what="--acoustic-level", reference=20e-6)
    Traceback (most recent call last):
    ...
    piezo.errors.InputError: --acoustic-level: '1 g' is an acceleration level; \
--acoustic-level is the sound-pressure spelling of --level: give '94 dB' or '1 Pa'
    """
    value, named = parse_level_of(text, reference=reference, what=what)
    if what == "--acoustic-level" and named is not None and named.name != "pressure":
        raise InputError(
            f"{what}: {text!r} is {with_article(named.name)} level; --acoustic-level is the "
            "sound-pressure spelling of --level: give '94 dB' or '1 Pa'"
        )
    return value, named


def _analysis_level(
    source: CalibratedSource, level: str | None, acoustic_level: str | None
) -> tuple[float | None, str | None, str]:
    """``--level`` or ``--acoustic-level`` as (RMS value, quantity, option name).

    A bare number in dB is re the reference of the channel's quantity (its chain's
    reference pressure for sound pressure, ISO 1683 otherwise); ``--acoustic-level`` is
    always sound pressure. Whether the quantity fits the channel is for
    :func:`~piezo.response.summary.sweep_response_of` to judge.
    """
    if level is not None and acoustic_level is not None:
        raise InputError(
            "give --level or --acoustic-level (its sound-pressure spelling), not both"
        )
    if level is None and acoustic_level is None:
        return None, None, "--level"
    what = "--level" if level is not None else "--acoustic-level"
    chain = source.chain_of(source.channel_indices[0])
    bare = QUANTITIES["pressure" if level is None else chain.quantity]
    reference = chain.reference_pa if bare.name == "pressure" else bare.reference
    value, named = _sensor_level(str(level or acoustic_level), what=what, reference=reference)
    return value, (named or bare).name, what


def _parse_rate(text: str) -> float:
    rate = parse_frequency(text, "--rate")
    if abs(rate - round(rate)) > 1e-9:
        raise InputError(f"--rate must be a whole number of hertz for a WAV file, got {text!r}")
    return float(round(rate))


def _seconds(text: str, what: str) -> float:
    """A duration that may be zero (silences, fades)."""
    try:
        return parse_duration(text, what=what)
    except UnitError:
        if parse_quantity(text, "s", what=what) == 0.0:
            return 0.0
        raise


def _check_subtype(subtype: str) -> str:
    if subtype.upper() not in SUBTYPES:
        raise InputError(f"--subtype {subtype!r}: choose one of {', '.join(SUBTYPES)}")
    return subtype.upper()


def _write_stimulus(out: Path, samples: np.ndarray, rate: float, subtype: str, toml: str) -> Path:
    fmt = {".wav": "WAV", ".flac": "FLAC"}.get(out.suffix.lower())
    if fmt is None:
        raise InputError(f"--out {out.name!r}: the stimulus is written as .wav or .flac")
    if not sf.check_format(fmt, subtype):
        raise InputError(f"--subtype {subtype} cannot be written as {fmt}")
    side = _stimulus_sidecar(out)
    with atomic_output(out) as tmp:
        sf.write(str(tmp), samples, int(rate), subtype=subtype, format=fmt)
    write_text_atomic(side, toml)
    return side


OutOption = Annotated[
    Path, typer.Option("--out", metavar="OUT.wav", help="File to write (.wav or .flac).")
]
RateOption = Annotated[str, typer.Option("--rate", metavar="RATE", help="Sample rate, e.g. 48k.")]
SubtypeOption = Annotated[
    str, typer.Option("--subtype", help=f"WAV sample format: {', '.join(SUBTYPES)}.")
]


@sweep_app.command("make")
def make(
    *,
    start: Annotated[str, typer.Option("--from", metavar="FREQ", help="Start frequency f1.")],
    stop: Annotated[str, typer.Option("--to", metavar="FREQ", help="Stop frequency f2.")],
    duration: Annotated[
        str, typer.Option("--duration", metavar="TIME", help="Sweep duration T, e.g. 5s.")
    ],
    rate: RateOption,
    out: OutOption,
    level: Annotated[
        str, typer.Option("--level", metavar="DBFS", help="Peak level in dBFS (≤ 0).")
    ] = "-6",
    silence_before: Annotated[
        str, typer.Option("--silence-before", metavar="TIME", help="Leading silence.")
    ] = "0.5 s",
    silence_after: Annotated[
        str, typer.Option("--silence-after", metavar="TIME", help="Trailing silence.")
    ] = "1 s",
    fade_in: Annotated[
        str | None,
        typer.Option("--fade-in", metavar="TIME", help="Fade-in; default half an octave."),
    ] = None,
    fade_out: Annotated[
        str | None,
        typer.Option("--fade-out", metavar="TIME", help="Fade-out; default 1/24 octave."),
    ] = None,
    sensor_level: Annotated[
        str | None,
        typer.Option(
            "--sensor-level",
            metavar="LEVEL",
            help="What the sweep makes at the sensor, RMS, with its unit, if known: "
            "'94 dB SPL', '114 dB re 20 µPa', '1 Pa', '10 m/s²', '1 g', '5 N'; recorded in "
            "the sidecar for calibrated results (dB re 1 V/Pa, V/(m/s²), V/N ...).",
        ),
    ] = None,
    acoustic_level: Annotated[
        str | None,
        typer.Option(
            "--acoustic-level",
            metavar="LEVEL",
            help="The sound-pressure spelling of --sensor-level: '94 dB' (re 20 µPa) or "
            "'1 Pa' RMS.",
        ),
    ] = None,
    subtype: SubtypeOption = "PCM_24",
    force: ForceOption = False,
    json_out: JsonOption = False,
) -> None:
    """Write an exponential sine sweep (Farina 2000) and its parameter sidecar.

    The sweep runs from --from to --to in --duration with half-Hann fades, between
    silences; NAME.stimulus.toml beside NAME.wav records every parameter.

    Examples
    --------
    0.5 s of silence, the 0.5 s sweep and 1 s of silence at 16 kHz make 32000 frames:

    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["sweep", "make", "--from", "20Hz", "--to", "4kHz", "--duration", "0.5s",
    ...               "--rate", "16k", "--out", f"{tmp}/sweep.wav", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "frames": 32000, "kind": "exponential-sine-sweep", ...
    "silence_before_s": 0.5, "silence_after_s": 1.0, ...}
    0
    """
    refuse_existing(out, _stimulus_sidecar(out), force=force)
    if sensor_level is not None and acoustic_level is not None:
        raise InputError(
            "give --sensor-level or --acoustic-level (its sound-pressure spelling), not both"
        )
    at_sensor: tuple[float, Quantity | None] | None = None
    if sensor_level is not None:
        at_sensor = _sensor_level(sensor_level, what="--sensor-level", reference=None)
    elif acoustic_level is not None:
        at_sensor = _sensor_level(acoustic_level, what="--acoustic-level", reference=20e-6)
    spec = sweep_spec(
        parse_frequency(start, "--from"),
        parse_frequency(stop, "--to"),
        parse_duration(duration, what="--duration"),
        _parse_rate(rate),
        level_dbfs=_parse_level(level),
        fade_in_s=None if fade_in is None else _seconds(fade_in, "--fade-in"),
        fade_out_s=None if fade_out is None else _seconds(fade_out, "--fade-out"),
        silence_before_s=_seconds(silence_before, "--silence-before"),
        silence_after_s=_seconds(silence_after, "--silence-after"),
        sensor_level=None if at_sensor is None else at_sensor[0],
        sensor_quantity="pressure"
        if at_sensor is None
        else (at_sensor[1] or QUANTITIES["pressure"]).name,
    )
    side = _write_stimulus(
        out, sweep_signal(spec), spec.sample_rate_hz, _check_subtype(subtype), spec.to_toml()
    )
    doc = {
        "file": str(out),
        "sidecar": str(side),
        "frames": spec.frames,
        **stimulus_document(spec),
    }
    if json_out:
        emit_json(doc)
        return
    console.print(
        f"wrote {out}: sweep {spec.start_hz:g}–{spec.stop_hz:g} Hz in {spec.duration_s:g} s "
        f"at {spec.level_dbfs:g} dBFS, {spec.sample_rate_hz:g} Hz, {spec.frames} frames"
    )
    if spec.sensor_level is not None:
        amount, quantity = spec.sensor_level
        console.print(f"  at the sensor {amount:.6g} {QUANTITIES[quantity].unit} RMS ({quantity})")
    console.print(f"  parameters in {side} (give it, or the WAV, to piezo sweep analyze)")


@sweep_app.command("noise")
def noise(
    *,
    kind: Annotated[str, typer.Option("--kind", help="pink or white.")],
    duration: Annotated[str, typer.Option("--duration", metavar="TIME", help="Length.")],
    rate: RateOption,
    out: OutOption,
    level: Annotated[
        str,
        typer.Option("--level", metavar="DBFS", help="RMS level in dBFS (AES17: sine = 0)."),
    ] = "-20",
    seed: Annotated[int, typer.Option("--seed", min=0, help="Random seed.")] = 1,
    fade: Annotated[
        str, typer.Option("--fade", metavar="TIME", help="Half-Hann fade at both ends.")
    ] = "10 ms",
    subtype: SubtypeOption = "PCM_24",
    force: ForceOption = False,
    json_out: JsonOption = False,
) -> None:
    """Write seeded pink or white noise (a stimulus for piezo response) and its sidecar.

    Examples
    --------
    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["sweep", "noise", "--kind", "pink", "--duration", "0.5s", "--rate", "16k",
    ...               "--out", f"{tmp}/pink.wav", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "frames": 8000, "kind": "noise", "color": "pink", ... "seed": 1, ...}
    0
    """
    if kind not in ("pink", "white"):
        raise InputError(f"--kind must be 'pink' or 'white', got {kind!r}")
    refuse_existing(out, _stimulus_sidecar(out), force=force)
    spec = NoiseSpec(
        kind,
        parse_duration(duration, what="--duration"),
        _parse_rate(rate),
        _parse_level(level),
        seed=seed,
        fade_s=_seconds(fade, "--fade"),
    )
    side = _write_stimulus(
        out, noise_signal(spec), spec.sample_rate_hz, _check_subtype(subtype), spec.to_toml()
    )
    doc = {
        "file": str(out),
        "sidecar": str(side),
        "frames": spec.frames,
        **stimulus_document(spec),
    }
    if json_out:
        emit_json(doc)
        return
    console.print(
        f"wrote {out}: {kind} noise, {spec.duration_s:g} s at {spec.level_dbfs:g} dBFS RMS, "
        f"seed {seed}"
    )


def _load_sweep(path: Path) -> SweepSpec:
    """The sweep behind ``--stimulus``: a ``.toml`` sidecar, or a WAV with one beside it."""
    if path.suffix.lower() == ".toml":
        side = path
    else:
        side = _stimulus_sidecar(path)
        if not side.is_file():
            raise InputError(
                f"no {side.name} beside the stimulus; give the {STIMULUS_SUFFIX} file written "
                "by 'piezo sweep make' (the WAV alone does not say f1, f2 and T)",
                source=str(path),
            )
    spec, _ = read_stimulus(side)
    if not isinstance(spec, SweepSpec):
        raise SpecError(
            f"describes {spec.color} noise; 'sweep analyze' needs a sweep (use 'piezo "
            "response' for noise stimuli recorded with a reference channel)",
            source=str(side),
        )
    if side is not path and path.is_file():
        info = open_recording(path)
        if info.sample_rate_hz != spec.sample_rate_hz or info.frames != spec.frames:
            raise SpecError(
                f"{path.name} ({info.frames} frames at {info.sample_rate_hz:g} Hz) does not match "
                f"its sidecar ({spec.frames} frames at {spec.sample_rate_hz:g} Hz)",
                source=str(side),
            )
    return spec


@sweep_app.command("analyze")
@source_options
def analyze(
    file: Annotated[Path, typer.Argument(help="Capture of the device playing the sweep.")],
    *,
    stimulus: Annotated[
        Path,
        typer.Option(
            "--stimulus",
            metavar="SWEEP",
            help=f"The sweep: NAME.wav (with NAME{STIMULUS_SUFFIX} beside it) or the sidecar.",
        ),
    ],
    level: Annotated[
        str | None,
        typer.Option(
            "--level",
            metavar="LEVEL",
            help="What the sweep made at the sensor, RMS, with its unit: '94 dB SPL', "
            "'114 dB re 20 µPa', '1 Pa', '10 m/s²', '1 g', '5 N'; a bare number is dB re "
            "the channel's quantity's reference. Overrides the sidecar. Gives the response "
            "in dB re 1 V per unit (V/Pa, V/(m/s²), V/N ...); the quantity must be the "
            "channel's (--quantity, profile).",
        ),
    ] = None,
    acoustic_level: Annotated[
        str | None,
        typer.Option(
            "--acoustic-level",
            metavar="LEVEL",
            help="The sound-pressure spelling of --level: '94 dB' (re the chain's "
            "reference, 20 µPa in air) or '1 Pa' RMS.",
        ),
    ] = None,
    golden: Annotated[
        Path | None,
        typer.Option("--golden", metavar="CSV", help="Golden response: frequency, dB."),
    ] = None,
    golden_relative: Annotated[
        bool,
        typer.Option(
            "--golden-relative",
            help="Align measured and golden at the reference frequency before comparing.",
        ),
    ] = False,
    thd_at: Annotated[
        str,
        typer.Option("--thd-at", metavar="FREQS", help="Frequencies to report THD at."),
    ] = "100 Hz, 1 kHz, 5 kHz",
    reference_frequency: ReferenceFrequencyOption = "1 kHz",
    points_per_octave: PointsOption = 24,
    smooth: SmoothOption = 6,
    csv: CsvOption = None,
    plot: PlotOption = None,
    force: ForceOption = False,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Response, distortion, corner and resonance from a swept-sine capture.

    Deconvolves the capture with the sweep's inverse filter (Farina 2000), finds the
    latency, and separates the linear response from the harmonics 2 to 5. The capture
    is taken in volts at the sensor (full scale and gain undone; a sensitivity in the
    chain is ignored: it is what is measured). With the sweep's level at the sensor
    (--level, or the sidecar's) the magnitude is a sensitivity in dB re 1 V per unit of
    the level's quantity (V/Pa, V/(m/s²), V/N ...), otherwise it is relative to the
    stimulus (dB re 1 V per stimulus full scale).

    Examples
    --------
    A capture of the sweep itself (the demo's loop-back) has no latency:

    >>> from piezo.cli import main
    >>> try:
    ...     main(["sweep", "analyze", "recordings/valve-pickup-sweep.flac",
    ...           "--stimulus", "recordings/valve-pickup-sweep.stimulus.toml", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "latency_frames": 0, ... "magnitude_unit": "dB re 1 V/Pa", ...}
    0
    """
    refuse_existing(csv, plot, force=force)
    ref_hz = parse_frequency(reference_frequency, "--reference-frequency")
    thd_freqs = parse_frequency_list(thd_at, what="--thd-at")
    spec = _load_sweep(stimulus)
    source = open_source(file, src)
    if len(source.channel_indices) != 1:
        raise InputError(
            f"{source.recording.channels} channels: choose the device's channel with --channel",
            source=str(file),
        )
    level_rms, quantity, level_what = _analysis_level(source, level, acoustic_level)
    golden_table: ResponseTable | None = None
    if golden is not None:
        golden_table = read_response_table(golden, what="golden response", finite=True)
    analysis = sweep_response_of(
        source,
        spec,
        stimulus=str(stimulus),
        level=level_rms,
        quantity=quantity,
        level_what=level_what,
        golden=golden_table,
        golden_file=None if golden is None else str(golden),
        golden_relative=golden_relative,
        thd_at_hz=thd_freqs,
        reference_hz=ref_hz,
        points_per_octave=points_per_octave,
    )
    table = analysis.table
    doc = analysis.to_dict()
    if csv is not None:
        write_csv(csv, table)
    if plot is not None:
        write_plot(
            plot,
            table,
            title=f"{file.name}: swept-sine response",
            smooth=smooth,
            golden=golden_table,
        )
    if json_out:
        emit_json(doc)
    else:
        _print_summary(doc)
    for path, what in ((csv, "table"), (plot, "plot")):
        if path is not None:
            err_console.print(f"{what} written: {path}")


def _print_summary(doc: dict) -> None:
    print_heading(doc["file"], f"channel {doc['channel']}")
    console.print(
        f"  latency       {doc['latency_frames']} samples ({1e3 * doc['latency_s']:.3f} ms); "
        f"IR peak/noise {doc['peak_to_noise_db']:.0f} dB"
    )
    print_fit(doc)
    if doc["sensitivity"] is not None:
        console.print(f"  trade form    {doc['sensitivity']} at {doc['reference_hz']:g} Hz")
    parts = []
    for f, v in doc["thd_percent_at"].items():
        text = "—" if v is None or not math.isfinite(v) else f"{v:.3g} %"
        parts.append(f"{f} Hz {text}")
    console.print(f"  THD (2–5)     {', '.join(parts)}")
    g = doc["golden"]
    if g is not None:
        how = "aligned at the reference" if g["aligned_at_hz"] else "absolute"
        console.print(
            f"  vs golden     worst {g['worst_db']:+.2f} dB at {g['worst_hz']:.4g} Hz, "
            f"RMS {g['rms_db']:.2f} dB ({how})"
        )
