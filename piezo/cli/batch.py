"""``piezo batch``: judge a production lot against a limit spec."""

from __future__ import annotations

import contextlib
import functools
from pathlib import Path
from typing import Annotated, Any

import typer
from rich.table import Table
from rich.text import Text

from piezo.batch.lot import LotVerdicts
from piezo.batch.outputs import (
    Journal,
    OutputLock,
    read_previous_rows,
    report_link,
    report_page_names,
    summarize,
    write_capture_report,
    write_outputs,
)
from piezo.batch.runner import (
    WORKER_WAIT_S,
    cluster_client,
    evaluate_capture,
    expand_inputs,
    previous_index,
    run_batch,
)
from piezo.batch.spec import load_spec
from piezo.batch.verdict import FAIL, NOT_EVALUABLE, PASS, VERDICTS, WARN
from piezo.chain.units import parse_duration
from piezo.cli.options import JsonOption
from piezo.cli.output import console, emit_json, progress
from piezo.errors import InputError
from piezo.io.atomic import refuse_link

#: Failing units listed in the terminal summary (all of them are in the output files).
SHOWN_FAILURES = 15


def register(app: typer.Typer) -> None:
    """Add the ``batch`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['batch']
    """
    app.command(
        "batch",
        help="Judge every capture of a lot against a limit spec: verdicts, yield, "
        "CSV/JSON/JUnit/HTML results.",
    )(batch)


def batch(
    inputs: Annotated[
        list[str],
        typer.Argument(
            metavar="INPUT",
            help="Capture files, directories (searched recursively) or glob patterns.",
            show_default=False,
        ),
    ],
    *,
    spec_path: Annotated[
        Path, typer.Option("--spec", help="Limit spec (TOML, see docs/batch.md).")
    ],
    out: Annotated[Path, typer.Option("--out", help="Folder for the result files.")],
    workers: Annotated[
        int | None,
        typer.Option("--workers", help="Local worker processes (default: all cores)."),
    ] = None,
    cluster: Annotated[
        str | None,
        typer.Option(
            "--cluster",
            metavar="ADDRESS",
            help="Run on a Dask distributed scheduler, e.g. tcp://host:8786 "
            "(needs the piezo\\[cluster] extra; captures must be on shared storage).",
        ),
    ] = None,
    worker_wait: Annotated[
        str,
        typer.Option(
            "--worker-wait",
            metavar="DURATION",
            help="With --cluster: how long to wait for a first worker to join the "
            "scheduler before giving up (exit 2), e.g. 60s, 5 min.",
        ),
    ] = f"{WORKER_WAIT_S:g} s",
    resume: Annotated[
        bool,
        typer.Option(
            "--resume",
            help="Reuse the rows of captures whose content and spec are unchanged since "
            "the last (or an interrupted) run in --out.",
        ),
    ] = False,
    reports: Annotated[
        bool, typer.Option("--reports", help="Also write one HTML report per capture.")
    ] = False,
    json_out: JsonOption = False,
) -> None:
    """Judge every capture against a limit spec and write results.csv, results.json,
    junit.xml and summary.html into --out.

    Exit code 0 when every capture passes (warnings allowed), 1 when any capture fails or
    is not evaluable, 2 for a bad spec or unusable arguments, an --out that another run
    is using, or a cluster that no worker joined within --worker-wait (nothing is judged
    then); 130 when interrupted (the journal is kept for --resume).

    Examples
    --------
    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["batch", "recordings/element-lot/tap/EL-29101.flac",
    ...               "--spec", "recordings/element-tap-spec.toml", "--out", tmp,
    ...               "--workers", "1", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "captures": 1, ... "counts": { "pass": 1, ...}, "yield": 1.0, "failing": [] }
    0
    """
    spec = load_spec(spec_path)  # a bad spec stops here, before any capture is read
    if workers is not None and cluster is not None:
        raise InputError(
            "--workers applies to the local pool; with --cluster the cluster's workers are used"
        )
    if workers is not None and workers < 1:
        raise InputError(f"--workers: must be at least 1, got {workers}")
    worker_wait_s = parse_duration(worker_wait, what="--worker-wait")
    if out.exists() and not out.is_dir():
        raise InputError(f"--out: {str(out)!r} exists and is not a folder")
    files = expand_inputs(inputs)
    out.mkdir(parents=True, exist_ok=True)
    lock = OutputLock(out)
    lock.acquire()  # a second run into the same --out stops here
    try:
        with contextlib.ExitStack() as stack:
            # Connected (and a worker joined) before the journal is touched.
            client = _connect(stack, cluster, worker_wait_s) if cluster is not None else None
            rows, reused = _judge(
                files, spec, out, workers, client, worker_wait_s, resume=resume, reports=reports
            )
    finally:
        lock.release()
    summary = summarize(rows, spec)
    bad = summary["counts"][FAIL] + summary["counts"][NOT_EVALUABLE]
    if json_out:
        emit_json(LotVerdicts(tuple(rows), spec, str(out), reused).to_dict())
    else:
        _print_summary(rows, summary, out, reused)
    if bad:
        raise typer.Exit(1)


def _judge(
    files: list[str],
    spec: Any,
    out: Path,
    workers: int | None,
    cluster: Any,
    worker_wait_s: float,
    *,
    resume: bool,
    reports: bool,
) -> tuple[list[dict[str, Any]], int]:
    """Run the lot with its journal; write the result files; return (rows, reused).

    An interruption keeps the journal (for ``--resume``) and is raised again.
    """
    if reports:
        refuse_link(out / "reports")
    previous = previous_index(read_previous_rows(out)) if resume else None
    journal = Journal(out, keep=resume)
    reused = 0
    done = False
    links: dict[str, str] = {}
    pages = report_page_names(files) if reports else {}
    job = functools.partial(evaluate_capture, spec=spec, with_report=reports)
    try:
        with progress(f"Judging {len(files)} captures", len(files)) as advance:

            def on_row(row: dict[str, Any], was_reused: bool) -> None:
                nonlocal reused
                reused += was_reused
                data = row.pop("_report", None)
                if reports:
                    name = pages[row["file"]]
                    if data is not None or not (out / "reports" / name).exists():
                        links[row["file"]] = write_capture_report(out, row, spec, data, name=name)
                    else:  # reused row: keep the report written with its curves
                        links[row["file"]] = report_link(name)
                if not was_reused:
                    journal.add(row)
                advance(1)

            rows = run_batch(
                files,
                spec,
                workers=workers,
                cluster=cluster,
                previous=previous,
                on_row=on_row,
                job=job,
                worker_wait_s=worker_wait_s,
            )
        write_outputs(out, rows, spec, reports=links if reports else None)
        done = True
    finally:
        # The journal survives an interruption (for --resume) and goes once the results
        # are written.
        journal.close(remove=done)
    return rows, reused


def _connect(stack: contextlib.ExitStack, address: str, worker_wait_s: float) -> Any:
    """The cluster's client (closed with ``stack``), once a worker has joined; the wait
    shows a progress bar on a terminal."""
    shown = 0.0
    with progress(
        f"Waiting for cluster workers (up to {worker_wait_s:g} s)", worker_wait_s
    ) as bar:

        def waited(seconds: float) -> None:
            nonlocal shown
            bar(seconds - shown)
            shown = seconds

        return stack.enter_context(
            cluster_client(address, worker_wait_s=worker_wait_s, on_wait=waited)
        )


def _why(row: dict[str, Any]) -> str:
    """The failed metrics by name, or the first reason a capture is not evaluable."""
    if row["failed_limits"]:
        names = dict.fromkeys(m.split(" ", 1)[0].rstrip(":") for m in row["failed_limits"])
        return ", ".join(names)
    return row["not_evaluable"][0] if row["not_evaluable"] else ""


def _print_summary(
    rows: list[dict[str, Any]], summary: dict[str, Any], out: Path, reused: int
) -> None:
    counts = summary["counts"]
    styles = {PASS: "green", WARN: "yellow", FAIL: "bold red", NOT_EVALUABLE: "bold red"}
    # Verdicts are shown in capitals, as check's severities and the HTML badges are; the
    # JSON and CSV values stay lower case (docs/glossary.md).
    table = Table(box=None, pad_edge=False, header_style="bold")
    table.add_column("verdict")
    table.add_column("captures", justify="right")
    for v in VERDICTS:
        table.add_row(Text(v.upper(), style=styles[v]), str(counts[v]))
    console.print(table)
    y = summary["yield"]
    console.print(
        f"yield {100 * y:.1f} % of {summary['captures']} captures"
        + (f" ({reused} reused from earlier results)" if reused else "")
        if y is not None
        else "no captures"
    )
    for m in summary["metrics"]:
        # A sensitivity of a line whose quantity has a trade form (mV/g ...): the lot's
        # mean in both forms.
        if m.get("mean_trade_form"):
            console.print(
                f"{m['name']} mean: {m['mean_trade_form']} = {m['mean']:.4g} {m['unit']}",
                soft_wrap=True,
            )
    bad = [r for r in rows if r["verdict"] in (FAIL, NOT_EVALUABLE)]
    if bad:
        failing = Table(box=None, pad_edge=False, header_style="bold")
        shown = bad[:SHOWN_FAILURES]
        width = max(len(r["serial"] or Path(r["file"]).name) for r in shown)
        failing.add_column("unit", no_wrap=True, min_width=width)
        failing.add_column("verdict", no_wrap=True, min_width=len(NOT_EVALUABLE))
        # Rich drops whole columns when a row is too wide: cap the last one instead.
        rest = max(20, console.width - width - len(NOT_EVALUABLE) - 4)
        failing.add_column(
            "failed limits / why", overflow="ellipsis", no_wrap=True, max_width=rest
        )
        for r in shown:
            failing.add_row(
                r["serial"] or Path(r["file"]).name,
                Text(r["verdict"].upper(), style=styles[r["verdict"]]),
                _why(r),
            )
        console.print(failing)
        if len(bad) > SHOWN_FAILURES:
            console.print(f"... and {len(bad) - SHOWN_FAILURES} more in {out / 'results.csv'}")
    console.print(f"results: {out / 'results.csv'}, {out / 'summary.html'}")
