"""``piezo report``: one self-contained HTML page and its JSON twin per recording."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from piezo.cli.check import resolve_thresholds
from piezo.cli.options import JsonOption, SourceOptions, open_source, source_options
from piezo.cli.output import console, emit_json, err_console, progress
from piezo.errors import InputError, PiezoError
from piezo.io.text import printable
from piezo.report import ReportSettings, analyse, write_report
from piezo.report.names import UniqueNames

__all__ = ["register", "report"]


def register(app: typer.Typer) -> None:
    """Add the ``report`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['report']
    """
    app.command(
        "report",
        help="Write an HTML report (plots embedded, printable, offline) and its JSON per file.",
    )(report)


@source_options
def report(
    files: Annotated[list[Path], typer.Argument(help="Recordings: WAV, FLAC, CSV ...")],
    *,
    out: Annotated[
        Path, typer.Option("--out", metavar="DIR", help="Directory for the reports (created).")
    ],
    frontend: Annotated[
        Path | None,
        typer.Option(
            "--frontend",
            metavar="DESIGN.toml",
            help="Front-end design whose modelled response is added to the report.",
        ),
    ] = None,
    thresholds_file: Annotated[
        Path | None,
        typer.Option("--thresholds", metavar="TOML", help="Thresholds of the diagnostics."),
    ] = None,
    threshold: Annotated[
        list[str] | None,
        typer.Option("--threshold", metavar="NAME=VALUE", help="Override one threshold."),
    ] = None,
    expected_corner: Annotated[
        str | None,
        typer.Option("--expected-corner", metavar="FREQ", help="Expected low corner."),
    ] = None,
    json_out: JsonOption = False,
    src: SourceOptions,
) -> None:
    """Analyse each recording and write NAME.report.html and NAME.report.json into DIR.

    The page holds the measurement chain and its provenance, the capture diagnostics with
    their evidence, the levels, the spectra and the filter self-test at the file's sample
    rate; it embeds its figures and needs no network. Every file gets its report even
    when another fails; the exit code is 2 if any could not be analysed.

    Examples
    --------
    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["report", "recordings/pd27-golden/PD27-23001.flac", "--out", tmp, "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    { "reports": [ { "file": "recordings/pd27-golden/PD27-23001.flac",
    "html": ".../PD27-23001.report.html", "json": ".../PD27-23001.report.json",
    "verdict": "warn" } ], "failed": [] }
    0
    """
    thresholds = resolve_thresholds(thresholds_file, threshold, expected_corner)
    if frontend is not None and not frontend.is_file():
        raise InputError(f"--frontend: design file {str(frontend)!r} not found")
    settings = ReportSettings(thresholds=thresholds, frontend_design=frontend)
    if out.exists() and not out.is_dir():
        raise InputError(f"--out: {str(out)!r} exists and is not a directory")
    names = UniqueNames()
    written = []
    failed = []
    for file in files:
        try:
            source = open_source(file, src)
            with progress(f"Analysing {file.name}", source.frames) as advance:
                run = analyse(source, settings, advance=advance)
            html_path, json_path = write_report(run, out, names.claim(file.stem, ending=".report"))
        except PiezoError as exc:
            failed.append({"file": str(file), "error": str(exc.with_source(str(file)))})
            # One line per file, whatever its name holds.
            err_console.print(printable(f"piezo: error: {exc}"), soft_wrap=True)
            continue
        verdict = run.diagnostics.verdict.value
        written.append(
            {"file": str(file), "html": str(html_path), "json": str(json_path), "verdict": verdict}
        )
        if not json_out:
            console.print(printable(f"{file}: {verdict} -> {html_path}"), soft_wrap=True)
    if json_out:
        emit_json({"reports": written, "failed": failed})
    if failed:
        raise typer.Exit(2)
