"""``piezo check``: is a capture sound? Clipping, headroom, DC, dropouts, hum, roll-off, noise.

Exit codes: 0 when no channel fails, 1 when any channel fails, 2 on unusable input (the
app wrapper turns every :class:`~piezo.errors.PiezoError` into exit 2).
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer
from rich import box
from rich.table import Table
from rich.text import Text

from piezo.chain.measurement import CalibratedSource, Chain
from piezo.chain.units import format_quantity, parse_quantity
from piezo.cli.exits import EXIT_FAILED
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, print_heading, progress
from piezo.diagnostics.checker import (
    CaptureDiagnostics,
    ChannelDiagnostics,
    Severity,
    Thresholds,
    load_thresholds,
    parse_threshold_assignment,
)
from piezo.diagnostics.summary import Check, check_of

__all__ = ["check", "register", "resolve_thresholds", "run_check"]


def register(app: typer.Typer) -> None:
    """Add the ``check`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['check']
    """
    app.command(
        "check",
        help="Capture diagnostics: clipping, headroom, DC, dropouts, hum, roll-off, noise floor. "
        "Exit 1 when a channel fails.",
    )(check)


def resolve_thresholds(
    thresholds_file: Path | None, overrides: list[str] | None, expected_corner: str | None
) -> Thresholds:
    """Defaults, then the TOML file, then ``--threshold`` overrides, then the corner option.

    Examples
    --------
    >>> th = resolve_thresholds(None, ["clip_min_run=5"], "10 Hz")
    >>> th.clip_min_run, th.rolloff_expected_hz
    (5, 10.0)
    """
    th = load_thresholds(thresholds_file) if thresholds_file is not None else Thresholds()
    values: dict[str, Any] = {}
    for text in overrides or []:
        name, value = parse_threshold_assignment(text)
        values[name] = value
    if expected_corner is not None:
        corner = parse_quantity(expected_corner, "Hz", what="--expected-corner")
        values["rolloff_expected_hz"] = corner
    return th.updated(values, source="--threshold") if values else th


def run_check(source: CalibratedSource, thresholds: Thresholds) -> Check:
    """Read ``source`` once (with a progress bar on a terminal) and return its check.

    Examples
    --------
    >>> import piezo
    >>> source = piezo.open("recordings/pd27-golden/PD27-23001.flac")
    >>> checked = run_check(source, resolve_thresholds(None, None, None))
    >>> checked.failed, [channel.verdict.value for channel in checked.diagnostics.channels]
    (False, ['ok'])
    """
    with progress(f"Checking {source.recording.path.name}", source.frames) as advance:
        return check_of(source, thresholds, advance=advance)


@source_options
def check(
    file: Annotated[Path, typer.Argument(help="Recording: WAV, FLAC, RF64, W64, CSV ...")],
    *,
    thresholds_file: Annotated[
        Path | None,
        typer.Option(
            "--thresholds",
            metavar="TOML",
            help="Thresholds file (keys as in docs/diagnostics.md, optionally in [thresholds]).",
        ),
    ] = None,
    threshold: Annotated[
        list[str] | None,
        typer.Option(
            "--threshold",
            metavar="NAME=VALUE",
            help="Override one threshold, e.g. 'clip_min_run=5'; repeat for several.",
        ),
    ] = None,
    expected_corner: Annotated[
        str | None,
        typer.Option(
            "--expected-corner",
            metavar="FREQ",
            help="Expected low-frequency corner of the chain, e.g. '0.16 Hz'; the roll-off "
            "check warns when the capture disagrees.",
        ),
    ] = None,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Check a capture before trusting numbers from it.

    Every check gives a severity (ok, warn, fail), the evidence and the threshold used.
    A channel's verdict is the worst severity of its own checks; the file's verdict adds
    the file-level (metadata) checks. Exit code 0 when nothing fails, 1 when a channel or
    a file-level check fails, 2 when the input cannot be used.

    Examples
    --------
    A warning does not fail the check (exit code 0; 1 when a check fails):

    >>> from piezo.cli import main
    >>> try:
    ...     main(["check", "recordings/pd27-golden/PD27-23001.flac", "--json"])
    ... except SystemExit as done:
    ...     print(done.code)
    {... "frames": 16000, ... "verdict": "warn", ...}
    0
    """
    thresholds = resolve_thresholds(thresholds_file, threshold, expected_corner)
    source = open_source(file, src, allow_time_gaps=True)
    checked = run_check(source, thresholds)
    if json_out:
        emit_json(checked.to_dict())
    else:
        _print(file, source, checked.diagnostics)
    if checked.failed:
        raise typer.Exit(EXIT_FAILED)


_STYLE = {Severity.OK: "green", Severity.WARN: "yellow", Severity.FAIL: "bold red"}


def _severity(sev: Severity) -> Text:
    # The word carries the meaning; colour only helps (readable without colour).
    return Text(sev.value.upper(), style=_STYLE[sev])


def _print(file: Path, source: CalibratedSource, result: CaptureDiagnostics) -> None:
    rec = source.recording
    chains = source.chains
    shared = all(c == chains[0] for c in chains)
    print_heading(file)
    console.print(
        f"  {rec.format} {rec.subtype}, {rec.sample_rate_hz:g} Hz, {rec.frames} frames "
        f"({rec.duration_s:.3f} s)" + ("" if shared else "; each channel through its own chain")
    )
    if shared:
        console.print(f"  {_chain_text(chains[0], result.channels[0], rec.is_pcm)}")
    if result.metadata_checks:
        console.print()
        table = _table("metadata")
        for c in result.metadata_checks:
            table.add_row(c.name, _severity(c.severity), c.evidence, c.threshold)
        console.print(table)
    for chain, ch in zip(chains, result.channels, strict=True):
        console.print()
        title = Text.assemble(f"channel {ch.channel}: ", _severity(ch.verdict))
        if not shared:  # each channel in its own unit: say which under its title
            title.append(f"\n{_chain_text(chain, ch, rec.is_pcm)}")
        table = _table(title)
        for c in ch.checks:
            table.add_row(c.name, _severity(c.severity), c.evidence, c.threshold)
        console.print(table)
    console.print()
    bad = [f"file ({c.name})" for c in result.metadata_checks if c.severity is not Severity.OK]
    for ch in result.channels:
        if ch.verdict is not Severity.OK:
            names = [c.name for c in ch.checks if c.severity is ch.verdict]
            bad.append(f"channel {ch.channel} ({', '.join(names)})")
    verdict = result.verdict
    console.print(
        Text.assemble("verdict: ", _severity(verdict), f" — {'; '.join(bad)}" if bad else "")
    )


def _chain_text(chain: Chain, channel: ChannelDiagnostics, is_pcm: bool) -> str:
    """What a channel's values are and the chain they came through, in one line.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.diagnostics.checker import check_capture
    >>> accel = Chain(gain=10.0, sensitivity_v_per_unit=1e-3, quantity="acceleration")
    >>> x = 0.1 * np.sin(2 * np.pi * 100 * np.arange(8000) / 8000)
    >>> ch = check_capture(x, 8000.0, full_scale=100.0, unit="m/s²", reference=1e-6)
    >>> for part in _chain_text(accel, ch.channels[0], True).split("; "):
    ...     print(part)
    acceleration in m/s², levels in dB re 1 µm/s²
    chain: full scale 1 V, gain 10 V/V, sensitivity 1.000 mV/(m/s²) (9.807 mV/g)
    full scale in m/s²: 100 m/s²
    """
    if channel.full_scale is not None:
        fs_text = format_quantity(channel.full_scale, channel.unit)
    elif chain.integrations:
        fs_text = "not determinable (integrated)"
    else:
        fs_text = "unknown (CSV)" if not is_pcm else "unknown"
    return (
        f"{chain.measured.name} in {channel.unit}, levels in {channel.level_unit}; chain: "
        f"full scale {chain.full_scale_v:g} V, gain {chain.gain:g} V/V, sensitivity "
        f"{chain.sensitivity_text or 'none (volts)'}; full scale in {channel.unit}: {fs_text}"
    )


def _table(title: str | Text) -> Table:
    table = Table(
        title=title, title_justify="left", header_style="bold", expand=True, box=box.SIMPLE_HEAD
    )
    table.add_column("check", no_wrap=True)
    table.add_column("result", no_wrap=True)
    table.add_column("evidence", ratio=3)
    table.add_column("threshold", ratio=2, style="dim")
    return table
